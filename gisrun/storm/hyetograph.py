"""Storms: the :class:`Hyetograph` type, design storms and resampling to the run step.

A hyetograph is rain depth per interval between time edges that start at 0. Inside gisrun
everything is SI (s, m, m/s); conversion happens in :mod:`gisrun.io.storm_csv` and
:mod:`gisrun.config.storms`. Design storms are built from their published definitions; every
builder conserves depth exactly by working on the cumulative depth curve and differencing it.

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
from dataclasses import dataclass
from functools import cache
from importlib import resources
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import StormError

__all__ = [
    "Hyetograph",
    "IdfFormula",
    "IdfTable",
    "NRCS_DISTRIBUTIONS",
    "nrcs_24h_table",
    "nrcs_24h",
    "alternating_block",
    "chicago",
    "uniform",
    "max_depth_in_window_m",
]

FloatArray = NDArray[np.float64]
Distribution = Literal["I", "IA", "II", "III"]
NRCS_DISTRIBUTIONS: tuple[str, ...] = ("I", "IA", "II", "III")
_DAY_S = 86400.0
_REL_TOL = 1e-9  # relative tolerance for "the duration is a whole number of steps"


@dataclass(frozen=True, eq=False)
class Hyetograph:
    """Rain depth per interval of a storm.

    Parameters
    ----------
    name : str
        Storm name (non-empty).
    time_s : array_like
        Interval edges in seconds from the storm start: starts at 0, strictly increasing,
        at least two edges.
    depth_m : array_like
        Rain depth in metres in each interval, ``len(time_s) - 1`` finite values >= 0.

    Raises
    ------
    StormError
        If any of the above does not hold.
    """

    name: str
    time_s: FloatArray
    depth_m: FloatArray

    def __post_init__(self) -> None:
        where = f"storm {self.name!r}"
        if not isinstance(self.name, str) or not self.name.strip():
            raise StormError("storm", "has no name", "give every storm a non-empty name")
        time_s = _frozen_array(self.time_s)
        depth_m = _frozen_array(self.depth_m)
        _check_times(time_s, where)
        _check_depths(depth_m, len(time_s) - 1, where)
        object.__setattr__(self, "time_s", time_s)
        object.__setattr__(self, "depth_m", depth_m)

    @property
    def total_depth_m(self) -> float:
        """Total rain depth in metres."""
        return float(self.depth_m.sum())

    @property
    def duration_s(self) -> float:
        """Storm duration in seconds (the last edge)."""
        return float(self.time_s[-1])

    @property
    def steps_s(self) -> FloatArray:
        """Length of each interval in seconds."""
        return np.diff(self.time_s)

    @property
    def intensity_m_per_s(self) -> FloatArray:
        """Mean rain intensity in each interval, m/s."""
        return self.depth_m / self.steps_s

    @property
    def peak_intensity_m_per_s(self) -> float:
        """Largest interval-mean intensity, m/s."""
        return float(self.intensity_m_per_s.max())

    def cumulative_depth_m(self, at_time_s: ArrayLike) -> FloatArray:
        """Cumulative depth (m) at the given times (s); the rain is uniform within an interval."""
        cum = np.concatenate([[0.0], np.cumsum(self.depth_m)])
        return np.interp(np.asarray(at_time_s, dtype=np.float64), self.time_s, cum)

    def resample(self, dt_s: float) -> FloatArray:
        """Rain depth per fixed step of ``dt_s`` seconds covering the whole storm.

        The intensity is taken as constant within each interval and integrated over the new steps
        by differencing the cumulative depth, so the total is conserved. A storm that is not a
        whole number of steps gets a last step padded with zero rain.

        Parameters
        ----------
        dt_s : float
            Step length in seconds, > 0.

        Returns
        -------
        ndarray
            Depth in metres per step, ``ceil(duration_s / dt_s)`` values.

        Raises
        ------
        StormError
            If ``dt_s`` is not a positive finite number.
        """
        edges = _step_edges(self.duration_s, dt_s, f"storm {self.name!r}", pad=True)
        depth = np.diff(self.cumulative_depth_m(edges))
        return np.maximum(depth, 0.0)

    def scaled(self, factor: float, *, name: str | None = None) -> Hyetograph:
        """Return the storm with every depth times ``factor`` (>= 0), e.g. areal reduction."""
        if not (math.isfinite(factor) and factor >= 0):
            raise StormError(
                f"storm {self.name!r}", f"scale factor {factor!r} is not >= 0", "use a factor >= 0"
            )
        return Hyetograph(name or self.name, self.time_s, self.depth_m * factor)


def _frozen_array(values: ArrayLike) -> FloatArray:
    arr = np.array(values, dtype=np.float64, copy=True)
    arr.setflags(write=False)
    return arr


def _check_times(time_s: FloatArray, where: str) -> None:
    if time_s.ndim != 1 or time_s.size < 2:
        raise StormError(where, "needs at least one interval", "give at least two time edges")
    if not np.all(np.isfinite(time_s)) or time_s[0] != 0.0:
        raise StormError(where, "times must be finite and start at 0", "fix the time edges")
    if np.any(np.diff(time_s) <= 0):
        row = int(np.argmax(np.diff(time_s) <= 0)) + 1
        raise StormError(where, f"time edge {row} does not increase", "sort or fix the times")


def _check_depths(depth_m: FloatArray, n: int, where: str) -> None:
    if depth_m.shape != (n,):
        raise StormError(where, f"has {depth_m.size} depths for {n} intervals",
                         "give one depth per interval")
    bad = ~np.isfinite(depth_m) | (depth_m < 0)
    if np.any(bad):
        i = int(np.argmax(bad))
        raise StormError(where, f"interval {i + 1} has rain {depth_m[i]!r}", "use depths >= 0")


def _step_edges(duration_s: float, step_s: float, where: str, *, pad: bool) -> FloatArray:
    """Edges ``0, dt, 2 dt, ...``; the last is ``n dt`` when ``pad``, else the duration."""
    if not (math.isfinite(step_s) and step_s > 0):
        raise StormError(where, f"step {step_s!r} s is not positive", "use a step > 0")
    if not (math.isfinite(duration_s) and duration_s > 0):
        raise StormError(where, f"duration {duration_s!r} s is not positive", "use a duration > 0")
    ratio = duration_s / step_s
    n = round(ratio) if abs(ratio - round(ratio)) <= _REL_TOL * ratio else math.ceil(ratio)
    n = max(n, 1)
    edges = np.arange(n + 1, dtype=np.float64) * step_s
    if not pad:
        edges[-1] = duration_s
    return edges


def max_depth_in_window_m(h: Hyetograph, window_s: float) -> float:
    """Largest rain depth (m) falling in any window of ``window_s`` seconds.

    The cumulative curve is piecewise linear, so the maximum occurs with a window edge on an
    interval edge; both alignments are checked.
    """
    starts = np.concatenate([h.time_s, h.time_s - window_s])
    depth = h.cumulative_depth_m(starts + window_s) - h.cumulative_depth_m(starts)
    return float(depth.max())


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
    _check_positive(depth_m, "depth", where)
    table = nrcs_24h_table()
    edges = _step_edges(_DAY_S, step_s, where, pad=False)
    fraction = np.interp(edges / 3600.0, table["time_h"], table[kind])
    return Hyetograph(where, edges, np.diff(fraction) * depth_m)


def uniform(depth_m: float, duration_s: float, step_s: float, *, name: str | None = None
            ) -> Hyetograph:
    """Storm of constant intensity ``depth_m / duration_s`` (a shorter last step if needed)."""
    where = name or "uniform"
    _check_positive(depth_m, "depth", where)
    edges = _step_edges(duration_s, step_s, where, pad=False)
    return Hyetograph(where, edges, np.diff(edges) / duration_s * depth_m)


def _check_positive(value: float, what: str, where: str) -> None:
    if not (isinstance(value, (int, float, np.floating)) and math.isfinite(value) and value > 0):
        raise StormError(where, f"{what} {value!r} is not a positive number", f"give a {what} > 0")


# --- Intensity-duration-frequency curves -----------------------------------------------------


@dataclass(frozen=True)
class IdfFormula:
    """Intensity-duration curve ``i = a / (t + b)**c`` with ``t`` in minutes.

    Parameters
    ----------
    a_m_per_s : float
        ``a`` expressed so that ``i`` comes out in m/s (multiply a value in mm/h by
        ``gisrun.units.to_si(1, "mm_per_h")``); > 0.
    b_min : float
        ``b`` in minutes, >= 0.
    c : float
        Exponent, > 0.

    Examples
    --------
    >>> f = IdfFormula(a_m_per_s=1.0, b_min=0.0, c=0.5)
    >>> float(f.intensity_m_per_s(3600.0))  # 1 / sqrt(60)
    0.12909944487358055
    """

    a_m_per_s: float
    b_min: float
    c: float

    def __post_init__(self) -> None:
        ok = (math.isfinite(self.a_m_per_s) and self.a_m_per_s > 0 and math.isfinite(self.b_min)
              and self.b_min >= 0 and math.isfinite(self.c) and self.c > 0)
        if not ok:
            raise StormError(
                f"idf {{a={self.a_m_per_s}, b={self.b_min}, c={self.c}}}",
                "needs a > 0, b >= 0 and c > 0", "check the IDF coefficients",
            )

    def intensity_m_per_s(self, duration_s: ArrayLike) -> FloatArray:
        """Average intensity (m/s) over a duration (s)."""
        t_min = np.asarray(duration_s, dtype=np.float64) / 60.0
        return self.a_m_per_s / (t_min + self.b_min) ** self.c

    def depth_m(self, duration_s: ArrayLike) -> FloatArray:
        """Depth (m) of the most intense burst of a duration (s); 0 at duration 0."""
        d = np.asarray(duration_s, dtype=np.float64)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(d > 0, self.intensity_m_per_s(d) * d, 0.0)


@dataclass(frozen=True, eq=False)
class IdfTable:
    """Intensity-duration pairs, interpolated linearly in log(duration)-log(intensity).

    Parameters
    ----------
    duration_s : array_like
        Durations in seconds, strictly increasing, > 0, at least two.
    intensity_m_per_s : array_like
        Average intensity (m/s) for each duration, > 0.
    """

    duration_s: FloatArray
    table_intensity_m_per_s: FloatArray

    def __post_init__(self) -> None:
        d, i = _frozen_array(self.duration_s), _frozen_array(self.table_intensity_m_per_s)
        ok = (d.ndim == 1 and d.size >= 2 and i.shape == d.shape and np.all(np.isfinite(d))
              and np.all(np.isfinite(i)) and np.all(d > 0) and np.all(i > 0)
              and np.all(np.diff(d) > 0))
        if not ok:
            raise StormError(
                "idf table", "needs >= 2 rows of increasing durations > 0 with intensities > 0",
                "fix the IDF table",
            )
        object.__setattr__(self, "duration_s", d)
        object.__setattr__(self, "table_intensity_m_per_s", i)

    def intensity_m_per_s(self, duration_s: ArrayLike) -> FloatArray:
        """Average intensity (m/s) over a duration (s) inside the tabulated range."""
        d = np.asarray(duration_s, dtype=np.float64)
        lo, hi = self.duration_s[0], self.duration_s[-1]
        if np.any(d < lo * (1 - _REL_TOL)) or np.any(d > hi * (1 + _REL_TOL)):
            raise StormError(
                "idf table", f"durations {d.min() / 60:g}-{d.max() / 60:g} min are needed but the "
                f"table covers {lo / 60:g}-{hi / 60:g} min", "extend the table or change the step",
            )
        log_i = np.interp(np.log(d), np.log(self.duration_s), np.log(self.table_intensity_m_per_s))
        return np.exp(log_i)

    def depth_m(self, duration_s: ArrayLike) -> FloatArray:
        """Depth (m) of the most intense burst of a duration (s); 0 at duration 0."""
        d = np.asarray(duration_s, dtype=np.float64)
        out = np.zeros_like(d)
        positive = d > 0
        out[positive] = self.intensity_m_per_s(d[positive]) * d[positive]
        return out


# --- IDF-based design storms -----------------------------------------------------------------


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
    edges = _step_edges(duration_s, step_s, where, pad=True)
    if abs(edges[-1] - duration_s) > _REL_TOL * duration_s:
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
    edges = _step_edges(duration_s, step_s, where, pad=False)
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
