"""PNG maps from result frames (matplotlib, Agg; reads and writes no files).

Every function returns a :class:`matplotlib.figure.Figure` drawn on its own Agg
canvas (no pyplot state, no global backend switch); :func:`figure_png` turns it
into PNG bytes at print resolution (150 dpi, about 2000 px wide), which
:mod:`gisrun.write.figures` writes and :mod:`gisrun.present.report` embeds.
Colour maps are perceptually uniform and colour-blind safe (``cividis``,
``viridis``); legends are classed with :class:`~gisrun.present.classes.Classes`
shared by every storm of a run, and carry units. Subcatchments are labelled with
their id where the label fits inside the polygon, and hatched by loss method
where methods differ. Maps in a projected CRS get a scale bar below the map (off
the data), in metres and kilometres or feet and miles after the run's unit
system, and a north arrow (the grid's north; correct for north-up grids); every
map names its CRS.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
from matplotlib import patheffects
from matplotlib.axes import Axes
from matplotlib.colors import ListedColormap
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle
from matplotlib.transforms import blended_transform_factory
from numpy.typing import NDArray
from pyproj import CRS
from shapely.geometry import box

from ..units import FACTORS_TO_SI
from .canvas import PRINT_DPI, figure_png, new_figure
from .classes import MISSING_COLOUR, Classes, class_breaks, shared_classes
from .display import distance_label, method_name

__all__ = ["class_breaks", "shared_classes", "Classes", "subcatchment_map", "raster_map",
           "figure_png", "PRINT_DPI", "METHOD_HATCHES", "MAP_SIZE_IN"]

#: Anything :meth:`pyproj.CRS.from_user_input` accepts (a CRS, "EPSG:32617", an EPSG code...).
CRSLike = CRS | str | int

#: Figure size of a map, inches (about 2000 px wide at 150 dpi once trimmed).
MAP_SIZE_IN = (14.5, 9.5)

#: Hatching of each loss method on a map where methods differ (the most used one is plain).
METHOD_HATCHES = {"green_ampt": "", "horton": "///", "curve_number": "...",
                  "constant_loss": "xxx", "phi_index": "\\\\\\"}

_LABEL_PT = 7.0


def subcatchment_map(gdf: gpd.GeoDataFrame, column: str, *, title: str, label: str,
                     crs: CRSLike, classes: Classes | None = None, id_column: str | None = None,
                     method_column: str | None = None, distance_unit: str = "m",
                     cmap: str = "cividis", missing_label: str = "no value",
                     points: pd.DataFrame | None = None, points_label: str = "rain gauge"
                     ) -> Figure:
    """Choropleth of one column per subcatchment with a classed legend.

    Parameters
    ----------
    gdf : GeoDataFrame
        Subcatchment polygons with ``column``.
    column : str
        Values to map (missing values drawn grey as ``missing_label``).
    title, label : str
        Figure title; legend title with the unit (``"runoff depth (mm)"``).
    crs : CRS-like
        Named under the map; decides whether a scale bar is drawn.
    classes : Classes, optional
        The run's classes of this quantity (:func:`shared_classes`); by default from
        this map's values alone.
    id_column, method_column : str, optional
        Label polygons with this id where it fits; hatch by this loss method column.
    distance_unit : ``"m"`` or ``"ft"``
        Unit of the scale bar (the run's unit system).
    points : DataFrame, optional
        Point sources to draw and name (columns ``source_id``, ``x``, ``y`` in ``crs``), listed
        in the legend as ``points_label``: the gauges on a rain map.
    """
    values = pd.to_numeric(gdf[column], errors="coerce").to_numpy(dtype=np.float64)
    classes = classes or shared_classes([values], cmap=cmap)
    colours = classes.colours()
    index = classes.index(values)
    fig = new_figure(MAP_SIZE_IN)
    ax = fig.subplots()
    have = index >= 0
    if have.any():
        gdf[have].plot(ax=ax, color=[colours[i] for i in index[have]], edgecolor="white",
                       linewidth=0.5)
    if (~have).any():
        gdf[~have].plot(ax=ax, color=MISSING_COLOUR, edgecolor="white", linewidth=0.5,
                        hatch="//")
    handles = [Patch(facecolor=c, label=t) for c, t in zip(colours, classes.labels(), strict=True)]
    if (~have).any():
        handles.append(Patch(facecolor=MISSING_COLOUR, hatch="//", label=missing_label))
    if points is not None and len(points):
        handles.append(_draw_points(ax, points, points_label))
    legend = ax.legend(handles=handles, title=label, loc="upper left", bbox_to_anchor=(1.01, 1.0),
                       frameon=False, fontsize=10, title_fontsize=11)
    if method_column is not None:
        _method_hatching(ax, gdf, method_column, legend)
    _decorate(ax, title, crs, distance_unit)
    if id_column is not None:
        _label_ids(ax, gdf, id_column)
    return fig


def _draw_points(ax: Axes, points: pd.DataFrame, label: str) -> Line2D:
    """Draw each point as a black triangle with its id beside it; the legend's handle."""
    x, y = points["x"].to_numpy(float), points["y"].to_numpy(float)
    ax.plot(x, y, linestyle="none", marker="^", markersize=9, markerfacecolor="black",
            markeredgecolor="white", zorder=5)
    outline = [patheffects.withStroke(linewidth=2.5, foreground="white")]
    for name, px, py in zip(points["source_id"].astype(str), x, y, strict=True):
        ax.annotate(name, (px, py), xytext=(6, 4), textcoords="offset points", fontsize=9,
                    fontweight="bold", zorder=6, path_effects=outline)
    return Line2D([], [], linestyle="none", marker="^", markersize=9, markerfacecolor="black",
                  markeredgecolor="white", label=label)


def _method_hatching(ax: Axes, gdf: gpd.GeoDataFrame, column: str, first_legend: object) -> None:
    """Hatch every method but the most used one, with a legend of methods, if methods differ."""
    methods = gdf[column].astype(str)
    counts = methods.value_counts()
    if len(counts) < 2:
        return
    plain = counts.index[0]
    patterns = iter(["///", "...", "xxx", "\\\\\\", "ooo"])
    handles = [Patch(facecolor="white", edgecolor="#333333", label=method_name(plain))]
    for method in counts.index[1:]:
        hatch = METHOD_HATCHES.get(method) or next(patterns)
        hatch = hatch if hatch else next(patterns)
        gdf[methods == method].plot(ax=ax, facecolor="none", edgecolor="#222222", hatch=hatch,
                                    linewidth=0.0)
        handles.append(Patch(facecolor="white", edgecolor="#333333", hatch=hatch,
                             label=method_name(method)))
    ax.add_artist(first_legend)
    ax.legend(handles=handles, title="loss method", loc="center left", bbox_to_anchor=(1.01, 0.45),
              frameon=False, fontsize=10, title_fontsize=11)


def _label_ids(ax: Axes, gdf: gpd.GeoDataFrame, column: str) -> None:
    """Write each polygon's id at a point inside it, where the text box fits in the polygon."""
    fig = ax.figure
    ax.apply_aspect()
    width_in = ax.get_position().width * fig.get_figwidth()
    x0, x1 = ax.get_xlim()
    units_per_pt = (x1 - x0) / (width_in * 72.0)
    outline = [patheffects.withStroke(linewidth=2.0, foreground="white")]
    for geom, text in zip(gdf.geometry, gdf[column].astype(str), strict=True):
        if geom is None or geom.is_empty:
            continue
        p = geom.representative_point()
        half_w = 0.5 * len(text) * _LABEL_PT * 0.62 * units_per_pt
        half_h = 0.5 * _LABEL_PT * 1.25 * units_per_pt
        if geom.contains(box(p.x - half_w, p.y - half_h, p.x + half_w, p.y + half_h)):
            ax.text(p.x, p.y, text, ha="center", va="center", fontsize=_LABEL_PT,
                    color="black", path_effects=outline)


def raster_map(values: NDArray[np.float64], extent: tuple[float, float, float, float], *,
               title: str, label: str, crs: CRSLike, outlines: gpd.GeoDataFrame | None = None,
               classes: Classes | None = None, distance_unit: str = "m",
               cmap: str = "viridis") -> Figure:
    """Draw a float raster (NaN = nodata) with a classed legend and optional outlines."""
    classes = classes or shared_classes([values], cmap=cmap)
    index = classes.index(values)
    fig = new_figure(MAP_SIZE_IN)
    ax = fig.subplots()
    colours = classes.colours()
    ax.imshow(np.ma.masked_less(index, 0), extent=extent, interpolation="nearest",
              cmap=ListedColormap(colours), vmin=-0.5, vmax=len(colours) - 0.5)
    if outlines is not None:
        outlines.boundary.plot(ax=ax, color="black", linewidth=0.3)
    handles = [Patch(facecolor=c, label=t) for c, t in zip(colours, classes.labels(), strict=True)]
    ax.legend(handles=handles, title=label, loc="upper left", bbox_to_anchor=(1.01, 1.0),
              frameon=False, fontsize=10, title_fontsize=11)
    _decorate(ax, title, crs, distance_unit)
    return fig


def _decorate(ax: Axes, title: str, crs: CRSLike, distance_unit: str) -> None:
    crs = CRS.from_user_input(crs)
    ax.set_title(title, fontsize=13)
    ax.set_xticks([])
    ax.set_yticks([])
    ax.set_xlabel("")
    ax.set_ylabel("")
    ax.set_aspect("equal")
    ax.text(0.0, -0.02, f"CRS: {crs.name}" + (f" (EPSG:{crs.to_epsg()})" if crs.to_epsg() else ""),
            transform=ax.transAxes, fontsize=9, va="top")
    if crs.is_projected:
        _scale_bar(ax, crs.axis_info[0].unit_conversion_factor, distance_unit)
        _north_arrow(ax)


def nice_length(target: float) -> float:
    """The largest 1, 2 or 5 x 10^n not above ``target`` (a scale-bar length).

    Examples
    --------
    >>> nice_length(730.0), nice_length(0.3)
    (500.0, 0.2)
    """
    power = 10 ** np.floor(np.log10(target))
    return float(max(m * power for m in (1, 2, 5) if m * power <= target))


def _scale_bar(ax: Axes, metres_per_unit: float, distance_unit: str) -> None:
    """A scale bar below the map's frame (so never on the data), in ``m`` or ``ft`` terms."""
    x0, x1 = ax.get_xlim()
    unit_m = FACTORS_TO_SI["ft" if distance_unit == "ft" else "m"]
    target = (x1 - x0) * metres_per_unit / unit_m / 4  # in display units
    big = 5280.0 if distance_unit == "ft" else 1000.0  # feet in a mile, metres in a km
    length = nice_length(target / big) * big if target >= big else nice_length(target)
    span = length * unit_m / metres_per_unit  # in CRS units
    trans = blended_transform_factory(ax.transData, ax.transAxes)
    bx, by, bh = x1 - span, -0.05, 0.014
    for i in range(2):
        ax.add_patch(Rectangle((bx + i * span / 2, by), span / 2, bh, transform=trans,
                               facecolor="black" if i == 0 else "white", edgecolor="black",
                               linewidth=0.8, clip_on=False))
    ax.text(bx + span / 2, by - 0.008, distance_label(length, "ft" if distance_unit == "ft"
                                                       else "m"),
            transform=trans, ha="center", va="top", fontsize=10, clip_on=False)


def _north_arrow(ax: Axes) -> None:
    ax.annotate("N", xy=(1.04, 0.14), xytext=(1.04, 0.02), xycoords="axes fraction",
                ha="center", va="center", fontsize=11, fontweight="bold", annotation_clip=False,
                arrowprops={"arrowstyle": "-|>", "color": "black", "linewidth": 1.4})
