"""Classed legends shared by every map of a run, so storms compare at a glance.

:func:`shared_classes` takes the values of one quantity under every storm and
returns one :class:`Classes` (round-numbered edges) that every map of that
quantity uses. Exact zeros get a class of their own, written ``0``; when every
value is the same the legend is that one value (``0`` for a storm with no runoff),
never ``-1e-06 - -5e-07``.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from matplotlib import colormaps
from matplotlib.ticker import MaxNLocator
from numpy.typing import NDArray

from ..model import RunResult
from ..units import from_si
from .display import human, human_range

__all__ = ["Classes", "RunClasses", "class_breaks", "doubling_breaks", "shared_classes",
           "run_classes",
           "MISSING_COLOUR"]

MISSING_COLOUR = "#d9d9d9"

ArrayLikeFloat = Sequence[float] | NDArray[np.float64] | pd.Series


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
        return np.array([lo, hi if hi > lo else lo])
    edges = MaxNLocator(nbins=n_classes, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi)
    edges = edges[(edges >= lo - (edges[1] - edges[0])) & (edges <= hi + (edges[1] - edges[0]))]
    if lo >= 0 and edges[0] < 0:
        edges = edges[edges >= 0] if (edges >= 0).sum() >= 2 else np.array([0.0, hi])
    if edges[0] > lo:
        edges = np.r_[lo, edges]
    if edges[-1] < hi:
        edges = np.r_[edges, hi]
    return np.asarray(edges, dtype=np.float64)


@dataclass(frozen=True)
class Classes:
    """Class edges of one quantity, a class ``0`` of exact zeros when asked, and colours."""

    edges: NDArray[np.float64]
    zero_class: bool = False
    cmap: str = "cividis"

    @property
    def single(self) -> bool:
        """True when every value is the same (one class, labelled with that value)."""
        return len(self.edges) == 2 and self.edges[0] == self.edges[1]

    @property
    def count(self) -> int:
        """Number of classes."""
        return (1 if self.single else len(self.edges) - 1) + int(self.zero_class)

    def labels(self) -> list[str]:
        """Legend text of each class, in class order."""
        if self.single:
            ranges = [human(float(self.edges[0]))]
        else:
            ranges = [human_range(a, b) for a, b in zip(self.edges[:-1], self.edges[1:],
                                                         strict=True)]
        return (["0"] if self.zero_class else []) + ranges

    def colours(self) -> list[tuple[float, float, float, float]]:
        """One RGBA colour per class (the colour map resampled to the classes)."""
        cm = colormaps[self.cmap].resampled(max(self.count, 2))
        return [cm(i) for i in range(self.count)] if self.count > 1 else [cm(0)]

    def index(self, values: ArrayLikeFloat) -> NDArray[np.int64]:
        """Class of each value (-1 where missing)."""
        v = np.asarray(values, dtype=np.float64)
        out = np.full(v.shape, -1, dtype=np.int64)
        finite = np.isfinite(v)
        offset = int(self.zero_class)
        if self.single:
            out[finite] = offset
        else:
            k = np.searchsorted(self.edges, v[finite], side="left") - 1
            out[finite] = np.clip(k, 0, len(self.edges) - 2) + offset
        if self.zero_class:
            out[finite & (v == 0)] = 0
        return out


def doubling_breaks(low: float, high: float, first: float = 15.0) -> NDArray[np.float64] | None:
    """Edges 0, ``first``, 2 ``first``, 4 ``first`` ... around ``low``-``high`` (None if too few).

    For times (minutes): a storm of 3 hours and one of 24 hours share one legend and
    still each spread over several classes.

    Examples
    --------
    >>> doubling_breaks(32.5, 700.0).tolist()
    [30.0, 60.0, 120.0, 240.0, 480.0, 960.0]
    """
    if not high > first:
        return None
    edges = [0.0, first]
    while edges[-1] < high:
        edges.append(edges[-1] * 2)
    start = max(i for i, e in enumerate(edges) if e <= max(low, 0.0))
    return np.asarray(edges[start:], dtype=np.float64)


def shared_classes(arrays: Iterable[ArrayLikeFloat], *, n_classes: int = 7,
                   cmap: str = "cividis", doubling: bool = False) -> Classes:
    """One set of classes spanning the values of every array (e.g. one quantity, every storm).

    Examples
    --------
    >>> c = shared_classes([[0.0, 0.0], [0.0]])
    >>> c.labels()
    ['0']
    >>> shared_classes([[0.0, 12.0], [30.0, 55.0]]).labels()
    ['0', '0–10', '10–20', '20–30', '30–40', '40–50', '50–60']
    """
    lo, hi, zeros, positives = np.inf, -np.inf, False, False
    for a in arrays:
        v = np.asarray(a, dtype=np.float64)
        v = v[np.isfinite(v)]
        if v.size == 0:
            continue
        zeros |= bool((v == 0).any())
        nonzero = v[v != 0]
        if nonzero.size:
            positives = True
            lo, hi = min(lo, float(nonzero.min())), max(hi, float(nonzero.max()))
    if not positives:
        return Classes(np.array([0.0, 0.0]) if zeros else np.array([0.0, 1.0]), cmap=cmap)
    if zeros and lo > 0:
        lo = 0.0
    edges = doubling_breaks(lo, hi) if doubling else None
    edges = class_breaks([lo, hi], n_classes) if edges is None else edges
    return Classes(edges, zero_class=zeros and lo == 0.0, cmap=cmap)


@dataclass(frozen=True)
class RunClasses:
    """The classes of every mapped quantity of a run, computed once from all its storms."""

    runoff_depth: Classes
    time_to_ponding: Classes
    cell_runoff_depth: Classes | None
    #: Rain depth of the storms whose rain differs between subcatchments; None without one.
    rain_depth: Classes | None = None


def run_classes(result: RunResult) -> RunClasses:
    """Classes of runoff depth (display unit), time to ponding (min) and cell runoff depth.

    Every storm's values count, so one colour means the same range on every map; the rain
    depth maps of storms with areal rain share theirs.
    Times to ponding are classed in doubling steps (15, 30, 60 ... min), so storms of
    very different durations still spread over several classes.
    """
    depth = result.project.units.depth
    runoff = [from_si(s.subcatchments["runoff_depth_m"].to_numpy(float), depth)
              for s in result.storms]
    ponding = [s.subcatchments["time_to_ponding_s"].to_numpy(float) / 60.0 for s in result.storms]
    cells = None
    if result.cells is not None:
        cells = shared_classes((from_si(_finite_range(a), depth)
                                for a in result.cells.runoff_depth_m), n_classes=7,
                               cmap="viridis")
    rain = [from_si(s.subcatchments["rain_depth_m"].to_numpy(float), depth)
            for s in result.storms if s.hyetograph.areal is not None]
    return RunClasses(shared_classes(runoff),
                      shared_classes(ponding, cmap="viridis", doubling=True), cells,
                      shared_classes(rain, cmap="Blues") if rain else None)


def _finite_range(values: NDArray[np.float64]) -> NDArray[np.float64]:
    """Smallest and largest value of an array, and 0 if it holds one.

    That is all :func:`shared_classes` needs of runoff depths (>= 0), without copying
    a large raster.
    """
    v = np.asarray(values)
    if not np.isfinite(v).any():
        return np.array([np.nan])
    extremes = [float(np.nanmin(v)), float(np.nanmax(v))]
    return np.array(extremes + ([0.0] if bool(np.any(v == 0)) else []))
