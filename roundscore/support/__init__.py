"""Layer 1, support: process starting, process-pool batches, the progress bar and file names; no domain knowledge."""
