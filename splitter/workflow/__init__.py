"""The steps of a job, each from inputs (paths, data frames, rasters) to typed results.

``design`` (records -> folds, and the public split-rule classes), ``audit`` (folds ->
residual dependence), ``evaluation`` (folds + predictions -> per-fold tests),
``range_estimate`` (covariates -> autocorrelation range), ``block_matching``
(block_size='match'), ``loading`` (records + background as the design reads them).
They sit between the array core (``partition``, ``dependence``, ``evaluate``) and the
shells that write files and talk to users (``io``, ``report``, ``cli``, ``batch``,
``demo``). Nothing is imported here: ``import splitter`` stays light.
"""
