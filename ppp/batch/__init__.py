"""Batch runs over libraries of molecules: input readers, a crash-safe HDF5 results store, parallel
workers (local processes or Dask), resume, salvage, merge and export. See ``docs/batch.md``."""
