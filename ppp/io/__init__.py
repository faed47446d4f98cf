"""Stage 5: readers for structures, and JSON / HDF5 / text output."""
