"""PNG maps and plots from result frames (matplotlib, Agg; reads and writes no files).

Every function returns a :class:`matplotlib.figure.Figure` drawn on its own Agg
canvas (no pyplot state, no global backend switch); :func:`figure_png` turns it
into PNG bytes, which :mod:`gisrun.write.extras` writes and
:mod:`gisrun.present.report` embeds. Colour maps are perceptually uniform and
colour-blind safe (``cividis``, ``viridis``); legends are classed and carry
units; maps in a projected CRS get a scale bar and a north arrow (the grid's
north; correct for north-up grids), and every map names its CRS.
"""

from __future__ import annotations

import io
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pandas as pd
from matplotlib import colormaps
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import BoundaryNorm, Colormap
from matplotlib.figure import Figure
from matplotlib.patches import Patch, Rectangle
from matplotlib.ticker import MaxNLocator
from numpy.typing import NDArray
from pyproj import CRS

from ..engine import LossResult

__all__ = ["class_breaks", "subcatchment_map", "raster_map", "infiltration_plot",
           "hyetograph_plot", "pervious_series", "PerviousSeries", "figure_png"]

MISSING_COLOUR = "#d9d9d9"

#: Anything :meth:`pyproj.CRS.from_user_input` accepts (a CRS, "EPSG:32617", an EPSG code...).
CRSLike = CRS | str | int


def _figure(figsize: tuple[float, float]) -> Figure:
    """A new figure on its own Agg canvas (pyplot's list of figures is not touched)."""
    fig = Figure(figsize=figsize, dpi=100)
    FigureCanvasAgg(fig)
    return fig


def class_breaks(values: ArrayLikeFloat, n_classes: int = 5) -> NDArray[np.float64]:
    """Round-numbered class edges spanning the finite values (at least two edges).

    Examples
    --------
    >>> class_breaks([0.3, 7.9, 12.2]).tolist()
    [0.0, 2.5, 5.0, 7.5, 10.0, 12.5]
    """
    v = np.asarray(values, dtype=np.float64)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return np.array([0.0, 1.0])
    lo, hi = float(v.min()), float(v.max())
    if hi - lo < 1e-12 * max(1.0, abs(hi)):
        pad = max(abs(hi) * 0.05, 1e-6)
        lo, hi = lo - pad, hi + pad
    edges = MaxNLocator(nbins=n_classes, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi)
    edges = edges[(edges >= lo - (edges[1] - edges[0])) & (edges <= hi + (edges[1] - edges[0]))]
    if lo >= 0 and edges[0] < 0:
        edges = edges[edges >= 0] if (edges >= 0).sum() >= 2 else np.array([0.0, hi])
    if edges[0] > lo:
        edges = np.r_[lo, edges]
    if edges[-1] < hi:
        edges = np.r_[edges, hi]
    return np.asarray(edges, dtype=np.float64)


ArrayLikeFloat = Sequence[float] | NDArray[np.float64] | pd.Series


def _classed(values: ArrayLikeFloat, cmap_name: str, n_classes: int
             ) -> tuple[NDArray[np.float64], Colormap, BoundaryNorm]:
    edges = class_breaks(values, n_classes)
    cmap = colormaps[cmap_name].resampled(len(edges) - 1)
    return edges, cmap, BoundaryNorm(edges, cmap.N)


def _fmt(v: float) -> str:
    return f"{v:,.3g}" if abs(v) < 1000 else f"{v:,.0f}"


def subcatchment_map(gdf: gpd.GeoDataFrame, column: str, *, title: str, label: str,
                     crs: CRSLike,
                     cmap: str = "cividis", n_classes: int = 5,
                     missing_label: str = "no value") -> Figure:
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
        Named under the map; decides scale bar units.
    """
    values = pd.to_numeric(gdf[column], errors="coerce").to_numpy(dtype=np.float64)
    edges, cm, norm = _classed(values, cmap, n_classes)
    fig = _figure((8, 5.6))
    ax = fig.subplots()
    finite = np.isfinite(values)
    if finite.any():
        gdf[finite].plot(ax=ax, color=cm(norm(values[finite])), edgecolor="white", linewidth=0.4)
    if (~finite).any():
        gdf[~finite].plot(ax=ax, color=MISSING_COLOUR, edgecolor="white", linewidth=0.4,
                          hatch="//")
    handles = [Patch(facecolor=cm(i), label=f"{_fmt(edges[i])} - {_fmt(edges[i + 1])}")
               for i in range(len(edges) - 1)]
    if (~finite).any():
        handles.append(Patch(facecolor=MISSING_COLOUR, hatch="//", label=missing_label))
    ax.legend(handles=handles, title=label, loc="upper left", bbox_to_anchor=(1.01, 1.0),
              frameon=False, fontsize=8, title_fontsize=9)
    _decorate(ax, title, crs)
    return fig


def raster_map(values: NDArray[np.float64], extent: tuple[float, float, float, float], *,
               title: str, label: str, crs: CRSLike, outlines: gpd.GeoDataFrame | None = None,
               cmap: str = "viridis",
               n_classes: int = 6) -> Figure:
    """Draw a float raster (NaN = nodata) with a classed colour bar and optional outlines."""
    edges, cm, norm = _classed(values, cmap, n_classes)
    fig = _figure((8, 5.6))
    ax = fig.subplots()
    image = ax.imshow(np.ma.masked_invalid(values), extent=extent, cmap=cm, norm=norm,
                      interpolation="nearest")
    if outlines is not None:
        outlines.boundary.plot(ax=ax, color="black", linewidth=0.3)
    bar = fig.colorbar(image, ax=ax, shrink=0.8, ticks=edges, spacing="proportional")
    bar.set_label(label)
    _decorate(ax, title, crs)
    return fig


def _decorate(ax: Axes, title: str, crs: CRSLike) -> None:
    crs = CRS.from_user_input(crs)
    ax.set_title(title, fontsize=11)
    ax.set_xticks([])
    ax.set_yticks([])
    ax.set_xlabel("")
    ax.set_ylabel("")
    ax.set_aspect("equal")
    ax.text(0.0, -0.03, f"CRS: {crs.name}" + (f" (EPSG:{crs.to_epsg()})" if crs.to_epsg() else ""),
            transform=ax.transAxes, fontsize=7, va="top")
    if crs.is_projected:
        _scale_bar(ax, crs.axis_info[0].unit_conversion_factor)
        _north_arrow(ax)


def _scale_bar(ax: Axes, metres_per_unit: float) -> None:
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    target_m = (x1 - x0) * metres_per_unit / 5
    power = 10 ** np.floor(np.log10(target_m))
    length_m = max(m * power for m in (1, 2, 5) if m * power <= target_m)
    length = length_m / metres_per_unit
    bx, by, bh = x0 + 0.04 * (x1 - x0), y0 + 0.05 * (y1 - y0), 0.012 * (y1 - y0)
    for i in range(2):
        ax.add_patch(Rectangle((bx + i * length / 2, by), length / 2, bh,
                               facecolor="black" if i == 0 else "white", edgecolor="black",
                               linewidth=0.6))
    text = f"{length_m / 1000:g} km" if length_m >= 1000 else f"{length_m:g} m"
    ax.text(bx + length / 2, by + 1.8 * bh, text, ha="center", va="bottom", fontsize=7)


def _north_arrow(ax: Axes) -> None:
    ax.annotate("N", xy=(0.95, 0.95), xytext=(0.95, 0.83), xycoords="axes fraction",
                ha="center", va="center", fontsize=9, fontweight="bold",
                arrowprops={"arrowstyle": "-|>", "color": "black", "linewidth": 1.2})


@dataclass(frozen=True)
class PerviousSeries:
    """One subcatchment's pervious-area rates through a storm (m/s; step ends in s)."""

    time_end_s: NDArray[np.float64]
    rain_m_per_s: NDArray[np.float64]
    capacity_m_per_s: NDArray[np.float64]
    infiltration_m_per_s: NDArray[np.float64]
    ponding_s: float


def pervious_series(loss: LossResult, params: pd.DataFrame, sub_id: str, dt_s: float
                    ) -> PerviousSeries:
    """Area-weighted rain, infiltration capacity and infiltration over pervious units.

    The capacity is NaN where the method has no rate form (curve number).

    Parameters
    ----------
    loss : LossResult
        Per-unit results of one storm, in the row order of ``params``.
    params : DataFrame
        Unit parameters (``subcatchment_id``, ``surface``, ``area_m2``).
    sub_id : str
        The subcatchment.
    dt_s : float
        Time step, s.
    """
    rows = (params["subcatchment_id"].astype(str).to_numpy() == str(sub_id)) & (
        params["surface"].to_numpy() != "impervious")
    area = params["area_m2"].to_numpy(dtype=np.float64) * rows
    w = area / area.sum() if area.sum() > 0 else area
    cap = loss.capacity_m_per_s[:, rows]
    cap_w = w[rows]
    has = np.isfinite(cap)
    capacity = np.where(has.all(axis=1), np.where(has, cap, 0.0) @ cap_w, np.nan)
    ponding = loss.time_to_ponding_s[rows]
    n = loss.rain_m.shape[0]
    return PerviousSeries(
        time_end_s=np.arange(1, n + 1) * dt_s,
        rain_m_per_s=np.asarray(loss.rain_m[:, rows] @ cap_w) / dt_s,
        capacity_m_per_s=capacity,
        infiltration_m_per_s=np.asarray(loss.infil_m[:, rows] @ cap_w) / dt_s,
        ponding_s=float(np.nanmin(ponding)) if np.isfinite(ponding).any() else float("nan"),
    )


def infiltration_plot(series: PerviousSeries, *, title: str, rate_unit: str,
                      to_rate: Callable[[NDArray[np.float64]], NDArray[np.float64]]) -> Figure:
    """Rain, infiltration capacity and actual infiltration through a storm, excess shaded.

    Parameters
    ----------
    series : PerviousSeries
    title : str
    rate_unit : str
        Label of the rate unit (``"mm/h"``).
    to_rate : callable
        Converts m/s arrays to ``rate_unit``.
    """
    t = series.time_end_s / 60.0
    edges = np.r_[t[0] - (t[1] - t[0] if t.size > 1 else t[0]), t]
    rain = to_rate(series.rain_m_per_s)
    infil = to_rate(series.infiltration_m_per_s)
    cap = to_rate(series.capacity_m_per_s)
    fig = _figure((8, 4))
    ax = fig.subplots()
    ax.stairs(rain, edges, color="#1f4e79", linewidth=1.2, label="rain intensity")
    ax.stairs(infil, edges, color="#e69f00", linewidth=1.2, label="actual infiltration")
    ax.fill_between(edges, np.r_[infil, infil[-1]], np.r_[rain, rain[-1]], step="post",
                    where=np.r_[rain > infil, False], color="#56b4e9", alpha=0.45,
                    label="excess (runoff from pervious area)")
    if np.isfinite(cap).any():
        ax.plot(t, cap, color="#009e73", linestyle="--", linewidth=1.2,
                label="infiltration capacity (end of step)")
        finite = cap[np.isfinite(cap)]
        top = max(float(rain.max()), float(np.percentile(finite, 5)) if finite.size else 0.0)
        ax.set_ylim(0, top * 1.25 if top > 0 else 1.0)
    if np.isfinite(series.ponding_s):
        tp = series.ponding_s / 60.0
        ax.axvline(tp, color="#d55e00", linewidth=1.2, linestyle=":")
        ax.text(tp, ax.get_ylim()[1] * 0.95, f" ponding {tp:.0f} min", color="#d55e00",
                fontsize=8, va="top")
    ax.set_xlabel("time from storm start (min)")
    ax.set_ylabel(f"rate ({rate_unit})")
    ax.set_title(title, fontsize=10)
    ax.legend(fontsize=7, loc="upper right", frameon=False)
    fig.tight_layout()
    return fig


def hyetograph_plot(storms: Sequence[tuple[str, NDArray[np.float64], NDArray[np.float64]]], *,
                    rate_unit: str) -> Figure:
    """Each storm's intensity through time: (name, interval edges in min, intensity) tuples."""
    n = max(1, len(storms))
    fig = _figure((8, 1.9 * n + 0.6))
    axes = fig.subplots(n, 1, squeeze=False)
    colours = colormaps["viridis"].resampled(n + 1)
    for ax, (k, (name, edges, intensity)) in zip(axes[:, 0], enumerate(storms), strict=False):
        ax.stairs(intensity, edges, fill=True, color=colours(k), alpha=0.85)
        ax.set_title(name, fontsize=9, loc="left")
        ax.set_ylabel(rate_unit, fontsize=8)
        ax.tick_params(labelsize=7)
    axes[-1, 0].set_xlabel("time from storm start (min)")
    fig.tight_layout()
    return fig


def figure_png(fig: Figure, *, dpi: int = 100) -> bytes:
    """PNG bytes of a figure, rendered on an Agg canvas."""
    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, bbox_inches="tight")
    return buffer.getvalue()
