"""Many recordings on dask: manifest, resume, study table and group comparison."""
