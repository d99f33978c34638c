"""Profiling on a Dask cluster: the one front end that imports dask and distributed (the
`chainlint[dask]` extra). Tasks run the profiler's own code (`chainlint.profile.pieces`,
`chainlint.profile.partial`); this package only schedules them."""
