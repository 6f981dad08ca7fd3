"""Layer 3, model: plain data and the domain's pure rules (the round's settings, results, item tables, the
evaluation's records, lab codes, units, read limits, the score-sheet digest). Imports nothing above stats/."""
