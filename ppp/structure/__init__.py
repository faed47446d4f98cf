"""Stage 1 of the pipeline: from a chemical structure to typed pi-centres and planar coordinates."""
