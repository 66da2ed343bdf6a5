"""Sensitivity screening: uncertain inputs, sampling, batched evaluation, analysis, re-optimisation."""
