"""Rain that differs between subcatchments: :class:`ArealRain` and its weighted means (all SI).

An observed event seen by several gauges, or a gridded rainfall product, gives every
subcatchment its own areal rain: a depth per step and subcatchment, the area-weighted mean of
the sources (gauges or grid cells) over the polygon. :class:`ArealRain` holds that rain on a
fixed step as a :class:`gisrun.storm.mix.SourceMix` (the sources' series and their weights,
whose columns are made when asked for) with the weights table it came from. A storm carries it in
:attr:`gisrun.storm.Hyetograph.areal` (:func:`gisrun.storm.areal_storm`); the storm's own
hyetograph is then the basin's area-weighted mean, which the storm tables and plots show,
while the run gives each unit the column of its subcatchment, resampled onto the run's step
by :meth:`ArealRain.resample` exactly as ``Hyetograph.resample`` does a single series (same
operations, so a matrix of identical columns gives bit for bit the hyetograph's steps).

:func:`weighted_mean` takes a weighted mean as ``min + W (x - min)`` with the smallest source
value of each step, so identical sources give exactly their common value, whatever the
rounding of the weights (a gauge set with identical records reproduces the uniform storm
exactly), and the result is never below the smallest source.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.

Examples
--------
>>> rain = ArealRain(np.array([[1.0, 2.0], [3.0, 0.0]]) / 1000, 600.0, ("S1", "S2"),
...                  "two columns")
>>> rain.total_depth_m.tolist()
[0.004, 0.002]
>>> (rain.resample(300.0) * 1000).round(6).tolist()
[[0.5, 1.0], [0.5, 1.0], [1.5, 0.0], [1.5, 0.0]]
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from ..errors import StormError
from .mix import COLUMN_BLOCK, SourceMix, identity_mix
from .timing import FloatArray, check_positive, step_edges

__all__ = ["ArealRain", "WEIGHT_COLUMNS", "POINT_COLUMNS", "weighted_mean", "interpolate_columns"]

#: Columns of :attr:`ArealRain.weights`: the source (a gauge id, or a grid cell id), the
#: subcatchment, and the source's share of the subcatchment's areal rain.
WEIGHT_COLUMNS = ("source_id", "subcatchment_id", "weight")
#: Columns of :attr:`ArealRain.points`: where each point source (a gauge) lies.
POINT_COLUMNS = ("source_id", "x", "y")


@dataclass(frozen=True, eq=False)
class ArealRain:
    """Rain depth per step and subcatchment on a fixed step (SI).

    Parameters
    ----------
    mix : SourceMix or array_like
        Each subcatchment's rain: a :class:`~gisrun.storm.mix.SourceMix` (weighted sources,
        whose columns are made when asked for), or the depth matrix in metres, shape
        ``(steps, subcatchments)``, finite and >= 0 (held as :func:`identity_mix`).
    step_s : float
        The step, s (> 0); step ``k`` covers ``[k step_s, (k + 1) step_s)`` from the start.
    subcatchment_ids : sequence of str
        The subcatchment of each column, unique.
    source : str
        What the rain comes from, in words (``"3 gauges, Thiessen weights"``), for the report.
    weights : DataFrame, optional
        :data:`WEIGHT_COLUMNS`: which source gives what share of each subcatchment's rain (the
        output's weights layer); empty when not given.
    start : str, optional
        Date and time of the first step's start as written in the source (ISO 8601), if known.
    points : DataFrame, optional
        :data:`POINT_COLUMNS`: where each gauge lies, in the subcatchment layer's CRS (drawn on
        the rain map); empty for a rain grid or a table.

    Raises
    ------
    StormError
        If the matrix, step or ids do not hold the above.
    """

    mix: SourceMix
    step_s: float
    subcatchment_ids: tuple[str, ...]
    source: str
    weights: pd.DataFrame = dataclasses.field(
        default_factory=lambda: pd.DataFrame({c: [] for c in WEIGHT_COLUMNS}))
    start: str | None = None
    points: pd.DataFrame = dataclasses.field(
        default_factory=lambda: pd.DataFrame({c: [] for c in POINT_COLUMNS}))

    def __post_init__(self) -> None:
        where = f"areal rain ({self.source})"
        check_positive(self.step_s, "step", where)
        ids = tuple(str(i) for i in self.subcatchment_ids)
        mix = self.mix if isinstance(self.mix, SourceMix) else _checked_matrix(self.mix, ids,
                                                                                 where)
        if mix.steps == 0 or mix.size != len(ids):
            raise StormError(where, f"has rain of {mix.steps} steps for {mix.size} columns and "
                             f"{len(ids)} subcatchments", "give shape (steps, subcatchments)")
        if len(set(ids)) != len(ids):
            raise StormError(where, "names a subcatchment twice", "give each subcatchment once")
        for name, table, columns in (("weights", self.weights, WEIGHT_COLUMNS),
                                     ("points", self.points, POINT_COLUMNS)):
            missing = [c for c in columns if c not in table.columns]
            if missing:
                raise StormError(where, f"{name} table lacks {missing}",
                                 f"give the columns {list(columns)}")
        object.__setattr__(self, "mix", mix)
        object.__setattr__(self, "step_s", float(self.step_s))
        object.__setattr__(self, "subcatchment_ids", ids)
        object.__setattr__(self, "weights", self.weights[list(WEIGHT_COLUMNS)].copy())
        object.__setattr__(self, "points", self.points[list(POINT_COLUMNS)].copy())

    @property
    def steps(self) -> int:
        """Number of steps."""
        return self.mix.steps

    @property
    def depth_m(self) -> FloatArray:
        """Rain depth per step and subcatchment, m, ``(steps, subcatchments)``, made whole.

        Every column at once (8 bytes per step and subcatchment): for a look in a notebook or
        a test; a run makes a chunk's columns at a time (:meth:`resample` with ``columns``).
        """
        return self.mix.columns()

    @property
    def duration_s(self) -> float:
        """Steps times the step, s."""
        return self.steps * self.step_s

    @property
    def time_s(self) -> FloatArray:
        """Step edges from 0, s."""
        return np.arange(self.steps + 1, dtype=np.float64) * self.step_s

    @property
    def total_depth_m(self) -> FloatArray:
        """Storm depth of each subcatchment, m."""
        return self.mix.column_sums()

    def resample_steps(self, dt_s: float) -> int:
        """Number of steps :meth:`resample` gives on the step ``dt_s``."""
        return len(step_edges(self.duration_s, dt_s, f"areal rain ({self.source})", pad=True)) - 1

    def resample(self, dt_s: float, columns: NDArray[np.intp] | None = None) -> FloatArray:
        """Rain depth per run step of ``dt_s`` seconds, shape ``(steps, len(columns))``.

        The same operations as ``Hyetograph.resample`` on every column: the cumulative
        depth interpolated to the run's step edges and differenced, so each subcatchment's
        depth is conserved and a column equals its own hyetograph's resampling bit for bit.

        Parameters
        ----------
        dt_s : float
            The run's step, s (> 0).
        columns : ndarray of int, optional
            Columns to resample, in the order wanted (default all).
        """
        edges = step_edges(self.duration_s, dt_s, f"areal rain ({self.source})", pad=True)
        n = self.mix.size if columns is None else len(columns)
        out = np.empty((len(edges) - 1, n), dtype=np.float64, order="F")
        for start in range(0, n, COLUMN_BLOCK):  # bounds the temporaries
            block = slice(start, min(start + COLUMN_BLOCK, n))
            depth = self.mix.columns(block if columns is None else np.asarray(columns)[block])
            cum = np.concatenate([np.zeros((1, depth.shape[1])), np.cumsum(depth, axis=0)])
            out[:, block] = np.maximum(np.diff(interpolate_columns(edges, self.time_s, cum),
                                               axis=0), 0.0)
        return out

    def scaled(self, factor: float) -> ArealRain:
        """The same rain times ``factor`` (>= 0) in every step and subcatchment."""
        return dataclasses.replace(self, mix=self.mix.scaled(factor))

    def subset(self, columns: NDArray[np.intp]) -> ArealRain:
        """The rain of the subcatchments ``columns`` only (a run's chunk), to the bit.

        Shares this rain's source values (pickled, it takes only the sources those
        subcatchments use: :meth:`SourceMix.subset`); the weights and points tables (outputs of
        the whole run) are left out.
        """
        columns = np.asarray(columns, dtype=np.intp)
        return ArealRain(self.mix.subset(columns), self.step_s,
                         tuple(self.subcatchment_ids[i] for i in columns), self.source,
                         start=self.start)

    def positions(self, ids: ArrayLike, where: str) -> NDArray[np.intp]:
        """Column of each of ``ids``.

        Raises
        ------
        StormError
            Naming the first id this rain has no column for.
        """
        index = pd.Index(self.subcatchment_ids)
        wanted = pd.Index(np.asarray(ids, dtype=object).astype(str))
        pos = index.get_indexer(wanted)
        if np.any(pos < 0):
            first = wanted[int(np.argmax(pos < 0))]
            raise StormError(where, f"has no rain for subcatchment {first!r}",
                             "give rain for every subcatchment of the layer")
        return pos.astype(np.intp)


def interpolate_columns(x: FloatArray, xp: FloatArray, fp: FloatArray) -> FloatArray:
    """``np.interp(x, xp, fp[:, c])`` for every column ``c`` at once, bit for bit.

    ``xp`` increasing; ``x`` beyond its ends takes the end values, as ``np.interp`` does. The
    arithmetic is numpy's own (slope times offset plus the left value; a knot's own value on a
    knot), so a run of areal rain and of a single hyetograph agree exactly.
    """
    j = np.clip(np.searchsorted(xp, x, side="right") - 1, 0, len(xp) - 2)
    slope = (fp[j + 1] - fp[j]) / (xp[j + 1] - xp[j])[:, None]
    out = slope * (x - xp[j])[:, None] + fp[j]
    on_knot = x == xp[j]
    out[on_knot] = fp[j[on_knot]]
    out[x >= xp[-1]] = fp[-1]
    out[x < xp[0]] = fp[0]
    return out


def weighted_mean(values: FloatArray, weights: Any) -> FloatArray:
    """Weighted means of the columns of ``values``: ``min + (x - min) @ weights.T`` per row.

    Parameters
    ----------
    values : ndarray, shape (steps, sources)
        A value per step and source (a gauge's depth, a grid cell's depth).
    weights : ndarray or scipy sparse matrix, shape (targets, sources)
        Each target's weights of the sources, rows adding up to 1.

    Returns
    -------
    ndarray, shape (steps, targets)
        With ``min`` the smallest source value of each step: identical sources give exactly
        their value, and no mean falls below the smallest source.
    """
    values = np.asarray(values, dtype=np.float64)
    low = values.min(axis=1, keepdims=True)
    spread = weights @ (values - low).T  # (targets, steps); works for dense and sparse
    return low + np.asarray(spread).T



def _checked_matrix(depth_m: ArrayLike, ids: tuple[str, ...], where: str) -> SourceMix:
    """A depth matrix ``(steps, subcatchments)``, checked, as :func:`identity_mix`."""
    depth = np.asarray(depth_m, dtype=np.float64)
    if depth.ndim != 2 or depth.shape[0] == 0 or depth.shape[1] != len(ids):
        raise StormError(where, f"has a depth matrix of shape {depth.shape} for "
                         f"{len(ids)} subcatchments", "give shape (steps, subcatchments)")
    bad = ~np.isfinite(depth) | (depth < 0)
    if np.any(bad):
        k, j = (int(v) for v in np.argwhere(bad)[0])
        raise StormError(where, f"step {k + 1} of subcatchment {ids[j]!r} has rain "
                         f"{depth[k, j]!r}", "give depths >= 0")
    return identity_mix(depth)
