"""kinedash: the pieces of the kinetrace dashboard (reading the results store, thinning
series for charts, display units, chart builders). The pages live in ``dashboards/views``.

The dashboard reads the results store only (:mod:`kinetrace.store`); it never
recomputes the pipeline.
"""
