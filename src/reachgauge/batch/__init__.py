"""Running the job over every reach: tasks, executors (serial, process pool,
Dask) and the run summary."""
