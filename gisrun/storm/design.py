"""Published design storms and the registry of storm kinds, :data:`KINDS` (all SI).

Each kind names its builder and the keys of its ``[[storms]]`` table
(:class:`StormKind`); :mod:`gisrun.config.storms` and ``gisrun storm make`` read
them from here. A new kind is a builder here (or in its own module) and an
entry in :data:`KINDS`.

Rainfall from these storms feeds planning-level runoff estimates only; defer to local codes,
agency methods and a licensed engineer for design.

Examples
--------
>>> h = uniform(0.012, 3600.0, 600.0)
>>> round(h.total_depth_m, 12), h.duration_s, len(h.depth_m)
(0.012, 3600.0, 6)
>>> h.resample(900.0).round(6).tolist()
[0.003, 0.003, 0.003, 0.003]
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Callable
from dataclasses import dataclass
from functools import cache
from importlib import resources
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from ..errors import StormError
from .hyetograph import REL_TOL, FloatArray, Hyetograph, check_positive, step_edges
from .idf import IdfFormula, IdfTable

__all__ = [
    "KINDS",
    "StormKind",
    "StormKey",
    "NRCS_DISTRIBUTIONS",
    "nrcs_24h_table",
    "nrcs_24h",
    "alternating_block",
    "chicago",
    "uniform",
]

Distribution = Literal["I", "IA", "II", "III"]
NRCS_DISTRIBUTIONS: tuple[str, ...] = ("I", "IA", "II", "III")
_DAY_S = 86400.0




# --- NRCS 24-hour distributions -------------------------------------------------------------


@cache
def nrcs_24h_table() -> dict[str, FloatArray]:
    """Tabulated NRCS 24-hour cumulative distributions shipped with gisrun.

    Returns
    -------
    dict
        ``"time_h"`` (hours) and one array of cumulative fractions per type
        (``"I"``, ``"IA"``, ``"II"``, ``"III"``).

    References
    ----------
    .. [1] U.S. Soil Conservation Service (1986), Urban Hydrology for Small Watersheds, TR-55,
       Appendix B; NRCS National Engineering Handbook Part 630, Chapter 4.
    .. [2] Chow, V. T., Maidment, D. R. and Mays, L. W. (1988), Applied Hydrology, sec. 14.4
       (tabulated SCS 24-hour rainfall distributions).
    """
    text = resources.files("gisrun.storm").joinpath("data/nrcs_24h_distributions.csv").read_text()
    rows = [r for r in csv.reader(io.StringIO(text)) if r and not r[0].startswith("#")]
    header, values = rows[0], np.array(rows[1:], dtype=np.float64)
    return {name: values[:, j] for j, name in enumerate(header)}


def nrcs_24h(
    distribution: Distribution | str,
    depth_m: float,
    step_s: float,
    *,
    name: str | None = None,
) -> Hyetograph:
    """NRCS 24-hour design storm of a given type and total depth.

    The tabulated cumulative fraction of the 24-hour depth is interpolated linearly to the step
    edges and differenced, so the storm total equals ``depth_m`` exactly. A step that does not
    divide 24 h gives a shorter last step.

    Parameters
    ----------
    distribution : {"I", "IA", "II", "III"}
        NRCS rainfall distribution type.
    depth_m : float
        24-hour rain depth, m (> 0).
    step_s : float
        Time step, s (> 0).
    name : str, optional
        Storm name; default ``nrcs_24h_<type>``.

    Returns
    -------
    Hyetograph

    Raises
    ------
    StormError
        For an unknown type, a depth <= 0 or a bad step.

    References
    ----------
    .. [1] U.S. Soil Conservation Service (1986), Urban Hydrology for Small Watersheds, TR-55,
       2nd ed., Appendix B.
    .. [2] NRCS (2019), National Engineering Handbook Part 630 Hydrology, Chapter 4, Storm
       Rainfall Depth and Distribution.
    .. [3] Chow, V. T., Maidment, D. R. and Mays, L. W. (1988), Applied Hydrology, sec. 14.4.
    """
    kind = str(distribution).strip().upper()
    if kind not in NRCS_DISTRIBUTIONS:
        raise StormError(
            f"distribution {distribution!r}", "is not an NRCS 24-hour type",
            f"use one of {list(NRCS_DISTRIBUTIONS)}",
        )
    where = name or f"nrcs_24h_{kind}"
    check_positive(depth_m, "depth", where)
    table = nrcs_24h_table()
    edges = step_edges(_DAY_S, step_s, where, pad=False)
    fraction = np.interp(edges / 3600.0, table["time_h"], table[kind])
    return Hyetograph(where, edges, np.diff(fraction) * depth_m)


def uniform(depth_m: float, duration_s: float, step_s: float, *, name: str | None = None
            ) -> Hyetograph:
    """Storm of constant intensity ``depth_m / duration_s`` (a shorter last step if needed)."""
    where = name or "uniform"
    check_positive(depth_m, "depth", where)
    edges = step_edges(duration_s, step_s, where, pad=False)
    return Hyetograph(where, edges, np.diff(edges) / duration_s * depth_m)



def alternating_block(
    idf: IdfFormula | IdfTable,
    duration_s: float,
    step_s: float,
    *,
    peak_position: float = 0.5,
    name: str | None = None,
) -> Hyetograph:
    """Alternating-block design storm from an intensity-duration curve.

    Block ``k`` is the increase of the depth-duration curve ``P(t) = i(t) t`` from
    ``(k - 1) dt`` to ``k dt``. The largest block goes in step ``floor(peak_position * n)``
    (the last step when that is ``n``); the next blocks, in decreasing order, go alternately
    before and after it, the remaining ones on the only side with room.

    Parameters
    ----------
    idf : IdfFormula or IdfTable
        Intensity-duration curve in SI.
    duration_s, step_s : float
        Storm duration and step, s; the duration must be a whole number of steps.
    peak_position : float
        Where the peak block sits, as a fraction of the duration (0-1).
    name : str, optional
        Storm name; default ``alternating_block_<minutes>min``.

    Raises
    ------
    StormError
        For a duration that is not a whole number of steps, a peak position outside 0-1,
        durations outside an IDF table, or a depth-duration curve that decreases.

    References
    ----------
    .. [1] Chow, V. T., Maidment, D. R. and Mays, L. W. (1988), Applied Hydrology, McGraw-Hill,
       sec. 14.3 (alternating block method).
    """
    where = name or f"alternating_block_{duration_s / 60:g}min"
    edges = _whole_steps(duration_s, step_s, where)
    _check_fraction(peak_position, where)
    blocks = np.diff(idf.depth_m(edges))
    if np.any(blocks < 0):
        raise StormError(where, "the IDF depth decreases with duration", "check the IDF curve")
    order = np.argsort(-blocks, kind="stable")
    depth = np.empty_like(blocks)
    depth[_alternating_positions(len(blocks), peak_position)] = blocks[order]
    return Hyetograph(where, edges, depth)


def _alternating_positions(n: int, peak_position: float) -> NDArray[np.intp]:
    """Step index for the 1st, 2nd, ... largest block."""
    peak = min(int(math.floor(peak_position * n)), n - 1)
    positions = [peak]
    for k in range(1, n):
        positions.extend(p for p in (peak - k, peak + k) if 0 <= p < n)
    return np.array(positions, dtype=np.intp)


def _whole_steps(duration_s: float, step_s: float, where: str) -> FloatArray:
    edges = step_edges(duration_s, step_s, where, pad=True)
    if abs(edges[-1] - duration_s) > REL_TOL * duration_s:
        raise StormError(
            where, f"duration {duration_s / 60:g} min is not a whole number of "
            f"{step_s / 60:g}-min steps", "pick a step that divides the duration",
        )
    edges[-1] = duration_s
    return edges


def _check_fraction(peak_position: float, where: str) -> None:
    if not (math.isfinite(peak_position) and 0.0 <= peak_position <= 1.0):
        raise StormError(where, f"peak position {peak_position!r} is outside 0-1",
                         "give a fraction of the duration between 0 and 1")


def chicago(
    idf: IdfFormula,
    duration_s: float,
    step_s: float,
    *,
    peak_position: float = 0.5,
    name: str | None = None,
) -> Hyetograph:
    """Chicago (Keifer and Chu) design storm for ``i = a / (t + b)**c``.

    With ``r`` the peak position and ``P(t) = a t / (t + b)**c`` the IDF depth, the
    instantaneous intensity a time ``tb`` before the peak is
    ``a((1 - c) tb / r + b) / (tb / r + b)**(1 + c)`` (``1 - r`` and ``ta`` after it). Its integral
    from the peak is ``r P(tb / r)``, so the cumulative depth is known in closed form and each step
    gets its exact integral; the storm total equals ``P(duration)``.

    Parameters
    ----------
    idf : IdfFormula
        The IDF formula (an IDF table has no closed form; use :func:`alternating_block`).
    duration_s, step_s : float
        Storm duration and step, s (a shorter last step if the step does not divide it).
    peak_position : float
        Peak time as a fraction of the duration (0-1).
    name : str, optional
        Storm name; default ``chicago_<minutes>min``.

    Raises
    ------
    StormError
        For an IDF table, a bad peak position or step, or an IDF depth that decreases.

    References
    ----------
    .. [1] Keifer, C. J. and Chu, H. H. (1957), Synthetic storm pattern for drainage design,
       Journal of the Hydraulics Division, ASCE, 83(HY4), 1332.1-1332.25.
    .. [2] Chow, V. T., Maidment, D. R. and Mays, L. W. (1988), Applied Hydrology, sec. 14.3.
    """
    where = name or f"chicago_{duration_s / 60:g}min"
    if not isinstance(idf, IdfFormula):
        raise StormError(where, "a Chicago storm needs an IDF formula {a, b, c}",
                         "give idf = {a, b, c} or use an alternating_block storm")
    _check_fraction(peak_position, where)
    edges = step_edges(duration_s, step_s, where, pad=False)
    cum = _chicago_cumulative_m(idf, edges, duration_s, peak_position)
    depth = np.diff(cum)
    if np.any(depth < -1e-12 * cum[-1]):
        raise StormError(where, "the IDF depth decreases with duration", "check the IDF curve")
    return Hyetograph(where, edges, np.maximum(depth, 0.0))


def _chicago_cumulative_m(idf: IdfFormula, t_s: FloatArray, duration_s: float, r: float
                          ) -> FloatArray:
    t_peak = r * duration_s
    before = np.maximum(t_peak - t_s, 0.0)  # time before the peak, s
    after = np.maximum(t_s - t_peak, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        left = np.where(before > 0, r * idf.depth_m(before / r), 0.0) if r > 0 else 0.0 * t_s
        right = np.where(after > 0, (1 - r) * idf.depth_m(after / (1 - r)), 0.0) if r < 1 \
            else 0.0 * t_s
    total_before = r * float(idf.depth_m(duration_s))
    return total_before - left + right


# --- The registry of design storm kinds ------------------------------------------------------


@dataclass(frozen=True)
class StormKey:
    """One key of a ``[[storms]]`` table and the builder argument it gives.

    ``quantity`` says how the key is read: ``"depth"`` (the project's depth unit,
    > 0), ``"minutes"`` (> 0, passed in s), ``"fraction"`` (0 to 1), ``"choice"``
    (one of ``choices``, upper case), ``"idf"`` (a table ``{a, b, c}``, ``a`` in the
    project's rate unit) or ``"idf_table"`` (the path of an IDF table CSV).
    """

    name: str
    arg: str
    quantity: Literal["depth", "minutes", "fraction", "choice", "idf", "idf_table"]
    default: float | None = None
    choices: tuple[str, ...] = ()


@dataclass(frozen=True)
class StormKind:
    """A design storm kind: its builder, its keys and the name a storm gets by default.

    ``build(**{key.arg: value}, name=name)`` makes the :class:`Hyetograph`;
    ``one_of`` lists optional keys of which exactly one must be given;
    ``default_name`` is a template over the key names (values as written, depths
    with their unit).
    """

    build: Callable[..., Hyetograph]
    required: tuple[StormKey, ...]
    optional: tuple[StormKey, ...] = ()
    one_of: tuple[str, ...] = ()
    default_name: str = ""

    @property
    def keys(self) -> tuple[StormKey, ...]:
        """Required keys first, then optional ones."""
        return (*self.required, *self.optional)


_DEPTH = StormKey("depth", "depth_m", "depth")
_DURATION = StormKey("duration_min", "duration_s", "minutes")
_PEAK = StormKey("peak_position", "peak_position", "fraction", default=0.5)
_IDF = StormKey("idf", "idf", "idf")
_IDF_TABLE = StormKey("idf_table", "idf", "idf_table")


def _step(default_min: float) -> StormKey:
    return StormKey("step_min", "step_s", "minutes", default=default_min)


#: Design storm kind -> its builder and keys (``kind = "..."`` in ``[[storms]]``).
KINDS: dict[str, StormKind] = {
    "nrcs_24h": StormKind(
        nrcs_24h, (StormKey("distribution", "distribution", "choice",
                            choices=NRCS_DISTRIBUTIONS), _DEPTH), (_step(6.0),),
        default_name="nrcs_24h_{distribution}_{depth}"),
    "alternating_block": StormKind(
        alternating_block, (_DURATION,), (_IDF, _IDF_TABLE, _step(5.0), _PEAK),
        one_of=("idf", "idf_table"), default_name="alternating_block_{duration_min}min"),
    "chicago": StormKind(chicago, (_IDF, _DURATION), (_step(5.0), _PEAK),
                         default_name="chicago_{duration_min}min"),
    "uniform": StormKind(uniform, (_DEPTH, _DURATION), (_step(5.0),),
                         default_name="uniform_{depth}_{duration_min}min"),
}
