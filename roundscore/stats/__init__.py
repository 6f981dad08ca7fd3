"""Statistics core: pure functions on numpy arrays, no I/O, no pandas in signatures."""
