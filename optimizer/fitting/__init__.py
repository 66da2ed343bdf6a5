"""Kinetics from laboratory data: the runs (data), the [fit] section (spec), the estimator over all runs at
once (estimate) and the statistics of the fit (statistics)."""
