"""Figures on their own Agg canvas (no pyplot state, no backend switch) and their PNG bytes."""

from __future__ import annotations

import io

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.legend import Legend
from matplotlib.patches import Patch
from matplotlib.text import Text

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
    # legends, labels and scale bars outside the frame count for the trimmed box too
    extra = [c for ax in fig.axes for c in ax.get_children()
             if isinstance(c, Legend) or (isinstance(c, (Text, Patch)) and not c.get_clip_on())]
    fig.savefig(buffer, format="png", dpi=dpi, bbox_inches="tight", bbox_extra_artists=extra)
    return buffer.getvalue()
