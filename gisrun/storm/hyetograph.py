"""The :class:`Hyetograph` type and its resampling to the run step (all SI).

A hyetograph is rain depth per interval between time edges that start at 0. Inside gisrun
everything is SI (s, m, m/s); conversion happens in :mod:`gisrun.io.storm_csv` and
:mod:`gisrun.config.storms`. Design storms (:mod:`gisrun.storm.design`) build on it; every
builder conserves depth exactly by working on the cumulative depth curve and differencing it.

Rainfall from these storms feeds planning-level runoff estimates only; defer to local codes,
agency methods and a licensed engineer for design.

Examples
--------
>>> h = Hyetograph("steady", [0.0, 600.0, 1200.0], [0.002, 0.004])
>>> h.resample(300.0).round(6).tolist()
[0.001, 0.001, 0.002, 0.002]
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ..errors import StormError
from .areal import ArealRain
from .areal_reduction import AppliedReduction
from .mix import scaling_mix
from .timing import REL_TOL, FloatArray, check_positive, frozen_array, step_edges

__all__ = ["Hyetograph", "areal_storm", "reduced_storm", "MAX_STEPS", "check_step_count",
           "max_depth_in_window_m", "step_edges", "check_positive", "frozen_array", "REL_TOL",
           "FloatArray"]

#: Most time steps a storm may have on the run's step: 2 million is 3.8 years of 1-minute steps
#: (a rain array of 16 MB per unit); more is a typing slip (a time in seconds written as
#: minutes) that would otherwise try to allocate terabytes before anything is checked.
MAX_STEPS = 2_000_000


def check_step_count(duration_s: float, step_s: float, where: str, fix: str) -> None:
    """Stop before allocating when ``duration_s`` on ``step_s`` is more than :data:`MAX_STEPS`.

    Raises
    ------
    StormError
        Naming ``where``, the step count and ``fix``.
    """
    steps = duration_s / step_s
    if not steps <= MAX_STEPS:
        raise StormError(where, f"lasts {duration_s / 60:g} minutes, {steps:.3g} steps of "
                         f"{step_s / 60:g} minutes (at most {MAX_STEPS:,} are allowed)", fix)


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
    areal : ArealRain, optional
        Rain that differs between subcatchments (:mod:`gisrun.storm.areal`); the storm's own
        times and depths are then its basin mean (made by :func:`gisrun.storm.areal_storm`),
        and the run gives each subcatchment its own column.
    reduction : AppliedReduction, optional
        The areal reduction applied to the storm's point design depths (made by
        :func:`reduced_storm`), recorded for the outputs.

    Raises
    ------
    StormError
        If any of the above does not hold.
    """

    name: str
    time_s: FloatArray
    depth_m: FloatArray
    areal: ArealRain | None = None
    reduction: AppliedReduction | None = None

    def __post_init__(self) -> None:
        where = f"storm {self.name!r}"
        if not isinstance(self.name, str) or not self.name.strip():
            raise StormError("storm", "has no name", "give every storm a non-empty name")
        time_s = frozen_array(self.time_s)
        depth_m = frozen_array(self.depth_m)
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
        edges = step_edges(self.duration_s, dt_s, f"storm {self.name!r}", pad=True)
        depth = np.diff(self.cumulative_depth_m(edges))
        return np.maximum(depth, 0.0)

    def scaled(self, factor: float, *, name: str | None = None) -> Hyetograph:
        """Return the storm with every depth times ``factor`` (>= 0), e.g. areal reduction."""
        if not (math.isfinite(factor) and factor >= 0):
            raise StormError(
                f"storm {self.name!r}", f"scale factor {factor!r} is not >= 0", "use a factor >= 0"
            )
        areal = None if self.areal is None else self.areal.scaled(factor)
        return Hyetograph(name or self.name, self.time_s, self.depth_m * factor, areal=areal)


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


def max_depth_in_window_m(h: Hyetograph, window_s: float) -> float:
    """Largest rain depth (m) falling in any window of ``window_s`` seconds.

    The cumulative curve is piecewise linear, so the maximum occurs with a window edge on an
    interval edge; both alignments are checked.
    """
    starts = np.concatenate([h.time_s, h.time_s - window_s])
    depth = h.cumulative_depth_m(starts + window_s) - h.cumulative_depth_m(starts)
    return float(depth.max())


def areal_storm(name: str, rain: ArealRain, area_m2: ArrayLike) -> Hyetograph:
    """A storm carrying ``rain``; its own hyetograph is the area-weighted basin mean.

    Parameters
    ----------
    name : str
        Storm name.
    rain : ArealRain
        The rain per subcatchment.
    area_m2 : array_like
        Ground area of each of ``rain.subcatchment_ids``, m2 (weights of the basin mean).

    Raises
    ------
    StormError
        If the areas do not match the rain's subcatchments or are all zero.
    """
    area = np.asarray(area_m2, dtype=np.float64)
    if area.shape != (len(rain.subcatchment_ids),) or not np.all(area >= 0) or area.sum() <= 0:
        raise StormError(f"storm {name!r}", "subcatchment areas do not match its areal rain",
                         "give one ground area >= 0 per subcatchment of the rain")
    basin = rain.mix.mean_over(area / area.sum())
    return Hyetograph(name, rain.time_s, basin, areal=rain)


def reduced_storm(h: Hyetograph, applied: AppliedReduction, step_s: float,
                  area_m2: ArrayLike) -> Hyetograph:
    """The storm ``h`` (point design depths) times its areal reduction factors.

    One factor for all (``over = "basin"``, or equal factors) scales the storm
    (:meth:`Hyetograph.scaled`), so a factor of 1 gives the storm unchanged. Factors that
    differ make areal rain (:func:`areal_storm`): each subcatchment's column is the storm times
    its factor, on the storm's own step when its steps are all one length (else on the run's
    step ``step_s``), and the storm's own series is the basin mean weighted by ``area_m2``
    (each subcatchment's ground area, in ``applied``'s order).
    """
    factor = applied.factor
    if factor.size == 0 or np.all(factor == factor[0]):
        one = float(factor[0]) if factor.size else 1.0
        return dataclasses.replace(h.scaled(one), reduction=applied)
    steps = h.steps_s
    if np.all(np.abs(steps - steps[0]) <= REL_TOL * steps[0]):
        point, step = h.depth_m, float(steps[0])
    else:  # a shorter last step: the storm as the run will see it
        point, step = h.resample(step_s), step_s
    rain = ArealRain(scaling_mix(point, factor), step, applied.subcatchment_ids,
                     f"point design depths times each subcatchment's areal reduction factor "
                     f"({applied.relation})")
    return dataclasses.replace(areal_storm(h.name, rain, area_m2), reduction=applied)
