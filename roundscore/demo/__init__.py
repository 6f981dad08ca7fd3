"""Layer 8, demo: seeded generators of invented rounds (the bundled demo round; large rounds of filled-in forms
for the benchmarks)."""
