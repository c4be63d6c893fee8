"""Figures on their own Agg canvas (no pyplot state, no backend switch) and their PNG bytes."""

from __future__ import annotations

import io

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.legend import Legend
from matplotlib.patches import Patch
from matplotlib.text import Text

__all__ = ["PRINT_DPI", "FileCanvas", "new_figure", "figure_png"]

#: Resolution of every PNG written: print quality (a 13.3 in wide map is about 2000 px).
PRINT_DPI = 150


class FileCanvas(FigureCanvasAgg):
    """An Agg canvas for figures that are only ever saved to a file.

    Its ``draw_idle`` does nothing. On a plain Agg canvas it draws the whole figure at once, and
    plotting helpers (geopandas' ``plot``, for one) call it after every layer they add: a map
    was drawn once per layer and then again to be saved, which took a fifth of a demo run.
    Saving draws the figure itself, and an explicit ``draw()`` still draws.
    """

    def draw_idle(self, *args, **kwargs) -> None:
        """Do nothing: the figure is drawn when it is saved."""


def new_figure(figsize: tuple[float, float], **kwargs) -> Figure:
    """A new figure on its own file canvas (pyplot's list of figures is not touched)."""
    fig = Figure(figsize=figsize, dpi=100, **kwargs)
    FileCanvas(fig)
    return fig


def figure_png(fig: Figure, *, dpi: int = PRINT_DPI) -> bytes:
    """PNG bytes of a figure, rendered on an Agg canvas at ``dpi`` (recorded in the file)."""
    if not isinstance(fig.canvas, FigureCanvasAgg):
        FileCanvas(fig)
    buffer = io.BytesIO()
    # legends, labels and scale bars outside the frame count for the trimmed box too, and so
    # do the figure's own texts (a title over several panels): given extra artists, matplotlib
    # trims to the axes and those artists only
    extra = [c for ax in fig.axes for c in ax.get_children()
             if isinstance(c, Legend) or (isinstance(c, (Text, Patch)) and not c.get_clip_on())]
    extra += [t for t in fig.texts if t.get_text()]
    fig.savefig(buffer, format="png", dpi=dpi, bbox_inches="tight", bbox_extra_artists=extra)
    return buffer.getvalue()
