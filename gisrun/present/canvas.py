"""Figures on their own Agg canvas (no pyplot state, no backend switch) and their PNG bytes."""

from __future__ import annotations

import io

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

__all__ = ["PRINT_DPI", "new_figure", "figure_png"]

#: Resolution of every PNG written: print quality (a 13.3 in wide map is about 2000 px).
PRINT_DPI = 150


def new_figure(figsize: tuple[float, float]) -> Figure:
    """A new figure on its own Agg canvas (pyplot's list of figures is not touched)."""
    fig = Figure(figsize=figsize, dpi=100)
    FigureCanvasAgg(fig)
    return fig


def figure_png(fig: Figure, *, dpi: int = PRINT_DPI) -> bytes:
    """PNG bytes of a figure, rendered on an Agg canvas at ``dpi`` (recorded in the file)."""
    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, bbox_inches="tight")
    return buffer.getvalue()
