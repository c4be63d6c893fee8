"""Figures of the runoff bands: a map of the band width and tornado figures (no files).

The band-width map classes the width of each subcatchment's runoff depth band
(highest minus lowest percentile) with one set of classes for every storm of the
run; its title and legend say what was computed and that it covers parameter
spread only. A tornado figure shows, for one subcatchment and storm, how far its
runoff depth moves when each parameter alone goes to the low and the high end
of its range, widest first, around the run's value.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.patches import Patch

from ..uncertainty.spread import SPREADS
from .canvas import new_figure
from .classes import Classes, shared_classes
from .maps import CRSLike, subcatchment_map

__all__ = ["band_width_map", "tornado_figure", "band_classes"]


def band_classes(widths: list[np.ndarray]) -> Classes:
    """One set of classes for the band widths of every storm."""
    return shared_classes(widths, cmap="viridis")


def band_width_map(gdf: gpd.GeoDataFrame, column: str, *, storm: str, label: str,
                   samples: int, crs: CRSLike, classes: Classes, distance_unit: str) -> Figure:
    """Map of one storm's band width per subcatchment, labelled with what was computed."""
    title = (f"Runoff depth band width, {storm}: {label} over {samples} parameter sets "
             "(parameter spread only)")
    return subcatchment_map(gdf, column, title=title, label=label, crs=crs, classes=classes,
                            id_column="subcatchment_id", distance_unit=distance_unit,
                            cmap="viridis")


def tornado_figure(rows: pd.DataFrame, *, title: str, depth_unit: str) -> Figure:
    """Horizontal bars: runoff depth with each parameter at the low and high end of its range.

    Parameters
    ----------
    rows : DataFrame
        One subcatchment's rows of one storm from the sensitivity table, already in
        the run's depth unit: ``parameter``, ``runoff_depth``, ``runoff_depth_at_low``,
        ``runoff_depth_at_high`` (any unit, the same for all).
    """
    rows = rows.assign(swing=(rows["runoff_depth_at_high"] - rows["runoff_depth_at_low"]).abs())
    rows = rows.sort_values("swing", kind="stable")
    fig = new_figure((9.0, 1.2 + 0.55 * max(len(rows), 1)))
    ax = fig.add_subplot()
    centre = float(rows["runoff_depth"].iloc[0]) if len(rows) else 0.0
    y = np.arange(len(rows))
    for end, colour in (("runoff_depth_at_low", "#3b528b"), ("runoff_depth_at_high", "#5ec962")):
        ax.barh(y, rows[end].to_numpy() - centre, left=centre, color=colour, height=0.6)
    ax.axvline(centre, color="#222", linewidth=1)
    ax.set_yticks(y, [SPREADS[c].what if c in SPREADS else c for c in rows["parameter"]])
    ax.set_xlabel(f"runoff depth ({depth_unit}); line: the run's value")
    ax.set_title(title, fontsize=10)
    ax.legend(handles=[Patch(color="#3b528b", label="parameter at the low end of its range"),
                       Patch(color="#5ec962", label="parameter at the high end of its range")],
              loc="upper center", bbox_to_anchor=(0.5, -0.25 if len(rows) > 2 else -0.45),
              ncol=2, frameon=False, fontsize=8)
    return fig
