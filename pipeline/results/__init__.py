"""The on-disk contract: atomic file writes, the run-folder layout, the per-star summary document,
the chain file and the summary table."""
