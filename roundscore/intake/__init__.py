"""Layer 5, intake: everything that turns files into model objects (the round file, result cells, sheets, the
safety check and isolated reading of untrusted workbooks, returned forms, participants, item tables)."""
