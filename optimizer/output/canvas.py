"""Figures drawn without pyplot: a ``matplotlib.figure.Figure`` on its own Agg canvas. Nothing global
changes (no ``matplotlib.use``, no pyplot state), so a notebook user's backend is left alone."""

from __future__ import annotations


def new_figure(figsize):
    """A Figure with an Agg canvas attached (``fig.savefig`` then works without pyplot)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize)
    FigureCanvasAgg(fig)
    return fig
