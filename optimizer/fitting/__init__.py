"""Kinetics from laboratory data: the statistics of a weighted least-squares fit (the estimator and the
`fit` verb follow)."""
