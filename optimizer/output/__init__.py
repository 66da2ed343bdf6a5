"""Presentation only: plots, progress bar, JSON safety, cautions."""
