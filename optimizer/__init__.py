"""tubewright design layer: command line, plots and reports (optimisation, screening and studies grow here)."""

__version__ = "0.1.0"
