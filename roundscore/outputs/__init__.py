"""Layer 6, outputs: every file a run writes (CSV tables, workbooks, figures, score strips, HTML pages) and the
output folder they are written into. Writers read the evaluation; they never recompute a statistic."""
