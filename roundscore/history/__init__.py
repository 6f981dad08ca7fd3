"""Layer 7, history: a lab's scores across rounds: the archive store (store.py, SQLite in db.py), score sheets
read back (sheets.py) and checked (checks.py), and the trend rules applied to a lab's series (rules.py)."""
