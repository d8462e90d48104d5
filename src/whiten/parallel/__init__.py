"""Scale-out engines. ``whiten.parallel.dask`` needs the optional extra ``whiten[dask]``."""
