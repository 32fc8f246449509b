"""Catalog runs: catalog reader, run state and resume, executors (local, Dask), orchestration, demo."""
