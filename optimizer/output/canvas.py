"""Figures drawn without pyplot: a ``matplotlib.figure.Figure`` on its own Agg canvas. Nothing global
changes (no ``matplotlib.use``, no pyplot state), so a notebook user's backend is left alone."""

from __future__ import annotations

from pathlib import Path

from tubewright.deferred import defer_modules

CAUTION_LINE = "Screening estimate only - verify before use."


def new_figure(figsize):
    """A Figure with an Agg canvas attached (``fig.savefig`` then works without pyplot)."""
    defer_modules(("matplotlib.pyplot", "matplotlib.pylab"))  # Pyomo would import them with matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize)
    FigureCanvasAgg(fig)
    return fig


def finish(fig, path, top: float = 1.0, dpi: int = 110) -> Path:
    """The caution line at the foot of the figure, a tight layout below ``top`` (room for a suptitle), saved."""
    fig.text(0.01, 0.005, CAUTION_LINE, fontsize=7, color="gray")
    fig.tight_layout(rect=(0, 0.02, 1, top))
    path = Path(path)
    fig.savefig(path, dpi=dpi)
    return path
