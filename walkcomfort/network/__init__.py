"""Network scale: every street segment x hour x scheme, in-process or on Dask."""
