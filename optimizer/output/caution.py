"""The caution every report, table and JSON answer carries."""

CAUTION = (
    "Screening estimate only: an ideal one-dimensional plug-flow model with invented or uncertain data. "
    "Verify with detailed models, hazard studies (runaway, overpressure, toxic release) and licensed "
    "engineers before any design decision; local codes and standards govern."
)
