"""Stage 4, execution: prepared-array cache, jobs, executors (local processes, Dask), the append-only results store, the runner."""
