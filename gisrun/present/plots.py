"""Plots through time: the rain split of a subcatchment's pervious area, and the hyetographs.

The infiltration plot draws what becomes of the rain on the pervious area step by
step as three stacked bands that add up to the rain: what infiltrates, what fills
depression storage and what runs off (excess). With disconnected impervious area the
run-on the pervious area receives is added to the rain (a hatched band above the rain
line), and the bands add up to both. Water drawn back out of storage in a later step
shows as the part of the stack above the rain (and run-on) line. The
infiltration capacity is drawn area-weighted over the pervious units and, beside
it, for the unit that ponds first, on whose curve the ponding instant is marked
(the subcatchment's time to ponding is that unit's). Every title and legend
names the loss method.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from matplotlib import colormaps
from matplotlib.figure import Figure
from numpy.typing import NDArray

from ..engine import LossResult
from ..storm import Hyetograph
from .canvas import new_figure
from .display import human, method_name

__all__ = ["PerviousSeries", "pervious_series", "infiltration_plot", "hyetograph_plot",
           "hyetograph_title", "rain_map_title", "BAND_COLOURS"]

#: Colours of the stacked bands (colour-blind safe, Okabe-Ito).
BAND_COLOURS = {"infiltration": "#e69f00", "storage": "#999999", "excess": "#56b4e9"}


@dataclass(frozen=True)
class PerviousSeries:
    """One subcatchment's pervious-area rates through a storm (m/s; step ends in s).

    ``infiltration + storage + excess == rain + runon`` in every step, where ``storage``
    is the change of depression storage (positive while it fills, negative when
    stored water is offered again and infiltrates or runs off) and ``runon`` the run-on
    received from disconnected impervious area (zero without it).
    """

    time_end_s: NDArray[np.float64]
    rain_m_per_s: NDArray[np.float64]
    capacity_m_per_s: NDArray[np.float64]
    infiltration_m_per_s: NDArray[np.float64]
    storage_m_per_s: NDArray[np.float64]
    excess_m_per_s: NDArray[np.float64]
    ponding_s: float
    method: str
    #: The pervious unit that ponds first (``soil / cover``) and its capacity; "" and NaN if none.
    first_unit: str = ""
    first_capacity_m_per_s: NDArray[np.float64] | None = None
    #: Run-on received from disconnected impervious area (:mod:`gisrun.runon`); None without.
    runon_m_per_s: NDArray[np.float64] | None = None


def pervious_series(loss: LossResult, params: pd.DataFrame, sub_id: str, dt_s: float
                    ) -> PerviousSeries:
    """Area-weighted rain, capacity, infiltration, storage change and excess over pervious units.

    The capacity is NaN where the method has no rate form (curve number).

    Parameters
    ----------
    loss : LossResult
        Per-unit results of one storm, in the row order of ``params``.
    params : DataFrame
        Unit parameters (``subcatchment_id``, ``surface``, ``area_m2``; ``soil_class``,
        ``cover_class`` and ``loss_method`` when present).
    sub_id : str
        The subcatchment.
    dt_s : float
        Time step, s.
    """
    rows = (params["subcatchment_id"].astype(str).to_numpy() == str(sub_id)) & (
        params["surface"].to_numpy() != "impervious")
    area = params["area_m2"].to_numpy(dtype=np.float64)[rows]
    w = area / area.sum() if area.sum() > 0 else area
    cap = loss.capacity_m_per_s[:, rows]
    has = np.isfinite(cap) | np.isinf(cap)
    capacity = np.where(has.all(axis=1), np.where(has, cap, 0.0) @ w, np.nan)
    ponding = loss.time_to_ponding_s[rows]
    rain, infil, excess = (np.asarray(a[:, rows] @ w) / dt_s
                           for a in (loss.rain_m, loss.infil_m, loss.excess_m))
    runon = None if loss.runon_m is None else np.asarray(loss.runon_m[:, rows] @ w) / dt_s
    supply = rain if runon is None else rain + runon
    first, first_cap = "", None
    if np.isfinite(ponding).any():
        k = int(np.nanargmin(ponding))
        unit = params[rows].iloc[k]
        first = " / ".join(str(unit[c]) for c in ("soil_class", "cover_class") if c in unit)
        first_cap = np.asarray(cap[:, k], dtype=np.float64)
    n = loss.rain_m.shape[0]
    methods = np.asarray(loss.methods)[rows] if len(loss.methods) else np.array([])
    return PerviousSeries(
        time_end_s=np.arange(1, n + 1) * dt_s, rain_m_per_s=rain, capacity_m_per_s=capacity,
        infiltration_m_per_s=infil, storage_m_per_s=supply - infil - excess,
        excess_m_per_s=excess, runon_m_per_s=runon,
        ponding_s=float(np.nanmin(ponding)) if np.isfinite(ponding).any() else float("nan"),
        method=str(methods[0]) if methods.size else "", first_unit=first,
        first_capacity_m_per_s=first_cap)


def _edges(t: NDArray[np.float64]) -> NDArray[np.float64]:
    return np.r_[t[0] - (t[1] - t[0] if t.size > 1 else t[0]), t]


def infiltration_plot(series: PerviousSeries, *, title: str, rate_unit: str,
                      to_rate: Callable[[NDArray[np.float64]], NDArray[np.float64]]) -> Figure:
    """What becomes of the rain on the pervious area, step by step, with the capacity curves.

    Parameters
    ----------
    series : PerviousSeries
    title : str
        Subject of the plot (subcatchment, storm); the method is added.
    rate_unit : str
        Label of the rate unit (``"mm/h"``).
    to_rate : callable
        Converts m/s arrays to ``rate_unit``.
    """
    method = method_name(series.method)
    t = series.time_end_s / 60.0
    edges = _edges(t)
    rain, infil, excess = (to_rate(a) for a in (series.rain_m_per_s, series.infiltration_m_per_s,
                                                series.excess_m_per_s))
    runon = (np.zeros_like(rain) if series.runon_m_per_s is None
             else to_rate(series.runon_m_per_s))
    supply = rain + runon
    fill = np.maximum(supply - infil - excess, 0.0)
    fig = new_figure((10, 5))
    ax = fig.subplots()
    base = np.zeros_like(rain)
    for name, values, label in (
            ("infiltration", infil, f"infiltration ({method})"),
            ("storage", fill, "filling depression storage"),
            ("excess", excess, f"excess: runoff from the pervious area ({method})")):
        ax.stairs(base + values, edges, baseline=base.copy(), fill=True, alpha=0.75,
                  color=BAND_COLOURS[name], label=label, linewidth=0)
        base = base + values
    above = "above the rain"
    if (runon > 0).any():
        ax.stairs(supply, edges, baseline=rain.copy(), fill=True, facecolor="none",
                  edgecolor="#0072b2", hatch="\\\\", linewidth=0,
                  label="run-on from disconnected impervious area, on top of the rain")
        above = "above the rain and run-on"
    release = np.maximum(base - supply, 0.0)
    if (release > 1e-12 * max(float(supply.max()), 1e-300)).any():
        ax.stairs(supply + release, edges, baseline=supply.copy(), fill=True, facecolor="none",
                  edgecolor="#555555", hatch="//", linewidth=0,
                  label=f"{above}: water drawn back from storage")
    ax.stairs(rain, edges, color="#1f4e79", linewidth=1.4, label="rain intensity")
    top = max(float(np.nanmax(base)) if base.size else 0.0, float(np.nanmax(supply)))
    _capacity_curves(ax, series, t, to_rate, method)
    ax.set_ylim(0, top * 1.3 if top > 0 else 1.0)
    _ponding_mark(ax, series, t, to_rate)
    ax.set_xlabel("time from storm start (min)")
    ax.set_ylabel(f"rate ({rate_unit})")
    ax.set_title(f"{title}: pervious area, {method}", fontsize=11)
    ax.legend(fontsize=8, loc="upper right", frameon=False)
    fig.tight_layout()
    return fig


def _capacity_curves(ax: object, series: PerviousSeries, t: NDArray[np.float64],
                     to_rate: Callable[[NDArray[np.float64]], NDArray[np.float64]],
                     method: str) -> None:
    cap = to_rate(series.capacity_m_per_s)
    if np.isfinite(cap).any():
        ax.plot(t, np.where(np.isfinite(cap), cap, np.nan), color="#009e73", linestyle="--",
                linewidth=1.2, label=f"capacity, area-weighted ({method})")
    first = series.first_capacity_m_per_s
    if first is not None and np.isfinite(first).any():
        ax.plot(t, np.where(np.isfinite(first), to_rate(first), np.nan), color="#cc79a7",
                linewidth=1.4, label=f"capacity of the first unit to pond, "
                f"{series.first_unit} ({method})")


def _ponding_mark(ax: object, series: PerviousSeries, t: NDArray[np.float64],
                  to_rate: Callable[[NDArray[np.float64]], NDArray[np.float64]]) -> None:
    """Mark ponding on the first unit's capacity curve (the x axis when it has none)."""
    if not np.isfinite(series.ponding_s):
        return
    tp = series.ponding_s / 60.0
    first = series.first_capacity_m_per_s
    y = 0.0
    if first is not None and np.isfinite(first).any():
        finite = np.isfinite(first)
        y = float(np.interp(tp, t[finite], to_rate(first[finite])))
    word = "runoff starts" if series.method == "curve_number" else "ponding"
    ax.plot([tp], [y], marker="o", markersize=7, color="#d55e00", linestyle="none",
            label=f"{word} at {human(tp)} min ({series.first_unit or 'first unit'})",
            clip_on=False, zorder=5)
    ax.axvline(tp, color="#d55e00", linewidth=0.8, linestyle=":")


def hyetograph_title(h: Hyetograph) -> str:
    """What a storm's hyetograph panel shows, in words (its name first).

    A storm of areal rain plots its basin mean (the area-weighted mean of the subcatchments'
    columns, :func:`gisrun.storm.areal_storm`), not any one subcatchment's rain; a storm
    reduced by one areal reduction factor plots the reduced depths.
    """
    if h.areal is not None:
        return f"{h.name}: area-weighted mean over the subcatchments of {_made_from(h)}"
    if h.reduction is not None and h.reduction.factor.size:
        return (f"{h.name}: point depths x areal reduction factor "
                f"{float(h.reduction.factor[0]):.3g} ({h.reduction.relation})")
    return h.name



def rain_map_title(h: Hyetograph) -> str:
    """What a storm's map of rain per subcatchment shows, in words (two lines).

    Each subcatchment's rain over the whole storm, and what it was made from: the area-weighted
    mean of a rain grid's cells or of rain gauges, or point design depths times each
    subcatchment's areal reduction factor. For a storm of areal rain only.
    """
    made = _made_from(h)
    how = made if h.reduction is not None else f"each subcatchment's area-weighted mean of {made}"
    return f"Total rain depth per subcatchment, {h.name}\n{how}"


def _made_from(h: Hyetograph) -> str:
    """The areal rain's source without its details in brackets, or the storm's name.

    For example ``3 rain gauges, Thiessen polygons`` or ``rain grid radar.nc:rain``.
    """
    return re.sub(r" \([^()]*\)", "", h.areal.source) if h.areal is not None else h.name

def hyetograph_plot(storms: Sequence[tuple[str, NDArray[np.float64], NDArray[np.float64]]], *,
                    rate_unit: str, title: str | None = None) -> Figure:
    """Each storm's intensity through time: (panel title, interval edges in min, intensity)."""
    n = max(1, len(storms))
    height = 1.9 * n + 0.6 + (0.3 if title else 0.0)
    fig = new_figure((10, height))
    axes = fig.subplots(n, 1, squeeze=False)
    colours = colormaps["viridis"].resampled(n + 1)
    for ax, (k, (name, edges, intensity)) in zip(axes[:, 0], enumerate(storms), strict=False):
        ax.stairs(intensity, edges, fill=True, color=colours(k), alpha=0.85)
        ax.set_title(name, fontsize=9, loc="left")
        ax.set_ylabel(rate_unit, fontsize=8)
        ax.tick_params(labelsize=7)
    axes[-1, 0].set_xlabel("time from storm start (min)")
    # The title gets a band of its own above the panels (0.3 in).
    fig.tight_layout(rect=(0.0, 0.0, 1.0, 1.0 - (0.3 / height if title else 0.0)))
    if title:
        fig.suptitle(title, fontsize=10, y=1.0 - 0.08 / height, va="top")
    return fig
