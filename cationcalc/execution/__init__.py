"""Many species: serial, process-pool and Dask executors, the SQLite result store, DFT refinement of stored
results."""
