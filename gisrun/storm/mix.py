"""Rain per subcatchment as weighted means of a few sources, made a few columns at a time (SI).

A rain grid's cells, or a set of rain gauges, are the *sources* of an areal rain: each
subcatchment's depth in a step is ``low + sum_i w_i (x_i - low)`` over its sources, with ``w``
its weights and ``low`` the step's smallest source value (see
:func:`gisrun.storm.areal.weighted_mean`: sources that agree give exactly their value).
:class:`SourceMix` keeps the sources' depths (steps x sources), the weights (a CSR matrix,
subcatchments x sources) and ``low``, and makes the columns of any subcatchments on demand
(:meth:`SourceMix.columns`) with the compiled kernels of :mod:`gisrun.storm.mix_kernels`.
The matrix of every subcatchment and step (28.8 million values for 100,000 subcatchments x
288 steps, 2.5 times the bytes of a 1 km grid over them) is never needed whole: a run makes
each chunk's columns when the chunk runs (:meth:`SourceMix.subset`: in one process a chunk's
mix shares the run's sources and weights and names its rows; sent to another, it takes its own
weights and the sources they use, and nothing more).

Two more mixes hold what is not a mean, with ``low = 0``, to the bit:

- :func:`identity_mix`: a depth matrix given whole; each column is the matrix's own
  (``0 + 1 (x - 0) + 0 = x``);
- :func:`scaling_mix`: one series times a factor per subcatchment (areal reduction factors);
  each column is ``f x`` (``0 + f (x - 0) + 0``), as ``x * f`` gives it.

A column's value never depends on which other columns are made with it, nor on how they are
cut into blocks: the kernel runs each subcatchment's sum over its CSR row in storage order.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import sparse

from ..errors import StormError
from .mix_kernels import mix_columns
from .timing import FloatArray

__all__ = ["SourceMix", "identity_mix", "scaling_mix", "gauge_mix", "COLUMN_BLOCK"]

#: Columns made at once by :meth:`SourceMix.column_sums` and :meth:`SourceMix.mean_over`
#: (bounds their temporaries: 8192 columns of 288 steps are 19 MB).
COLUMN_BLOCK = 8192

Rows = NDArray[np.intp] | slice | None


@dataclass(frozen=True, eq=False)
class SourceMix:
    """Each subcatchment's rain as a weighted mean of sources (SI).

    Parameters
    ----------
    values_m : ndarray, shape (sources, steps)
        Each source's rain depth in each step, m, a source's series together (C order;
        checked by whoever makes the mix: finite and >= 0 wherever a weight uses it).
    matrix : scipy.sparse.csr_array, shape (rows, sources)
        Weights of the sources (finite, >= 0), a row per subcatchment; a row of a mean adds up
        to 1.
    low_m : ndarray, shape (steps,)
        Taken off each used source value before weighting and added back after, m (>= 0 and
        at most each step's smallest used value; 0 for a mix that is not a mean).
    factors : tuple of float
        Multiplied into every column, in order, after the mean (:meth:`scaled`).
    rows : ndarray of int, optional
        The rows of ``matrix`` that are this mix's subcatchments, in order (default: every
        row). A chunk's mix (:meth:`subset`) shares its run's sources and weights and names
        its rows.

    Raises
    ------
    StormError
        If the shapes disagree, a row is out of range, or a weight or ``low_m`` is not a
        finite number >= 0.
    """

    values_m: FloatArray
    matrix: sparse.csr_array
    low_m: FloatArray
    factors: tuple[float, ...] = ()
    rows: NDArray[np.int64] | None = None

    def __post_init__(self) -> None:
        values = np.ascontiguousarray(self.values_m, dtype=np.float64)
        matrix = sparse.csr_array(self.matrix)
        matrix.indices = matrix.indices.astype(np.int64, copy=False)
        matrix.indptr = matrix.indptr.astype(np.int64, copy=False)
        low = np.ascontiguousarray(self.low_m, dtype=np.float64)
        if values.ndim != 2 or low.shape != (values.shape[1],) or \
                matrix.shape[1] != values.shape[0]:
            raise StormError("areal rain", f"has sources of shape {values.shape}, weights of "
                             f"shape {matrix.shape} and {low.size} step minima",
                             "give (sources, steps), (subcatchments, sources) and (steps,)")
        for what, data in (("a weight", matrix.data), ("a step minimum", low)):
            bad = ~(np.isfinite(data) & (data >= 0))
            if np.any(bad):
                raise StormError("areal rain", f"has {what} of {float(data[np.argmax(bad)])!r}",
                                 "give finite values >= 0")
        rows = None if self.rows is None else np.array(self.rows, dtype=np.int64).reshape(-1)
        if rows is not None and rows.size and not 0 <= rows.min() <= rows.max() < \
                matrix.shape[0]:
            raise StormError("areal rain", f"names rows {rows.min()} to {rows.max()} of "
                             f"weights of {matrix.shape[0]} rows", "give rows in range")
        self._set(values, matrix, low, tuple(float(f) for f in self.factors), rows)

    def _set(self, values: FloatArray, matrix: sparse.csr_array, low: FloatArray,
             factors: tuple[float, ...], rows: NDArray[np.int64] | None) -> None:
        """Fill the fields of a checked mix.

        Arrays as read-only views: what was handed in keeps its own flags.
        """
        views = [None if a is None else a.view() for a in (values, low, rows)]
        for view in views:
            if view is not None:
                view.setflags(write=False)
        for name, value in (("values_m", views[0]), ("matrix", matrix), ("low_m", views[1]),
                            ("factors", factors), ("rows", views[2])):
            object.__setattr__(self, name, value)

    @property
    def steps(self) -> int:
        """Number of steps."""
        return int(self.values_m.shape[1])

    @property
    def size(self) -> int:
        """Number of subcatchments (columns)."""
        return int(self.matrix.shape[0] if self.rows is None else self.rows.size)

    def columns(self, rows: Rows = None) -> FloatArray:
        """Rain depth per step of the subcatchments ``rows`` (default all), m.

        Returns
        -------
        ndarray, shape (steps, len(rows))
            Fortran order: each subcatchment's steps lie together.
        """
        picked = self._picked(rows)
        out = np.empty((self.steps, picked.size), dtype=np.float64, order="F")
        if out.size == 0:
            return out
        m = self.matrix
        mix_columns(picked, m.indptr, m.indices, m.data, self.values_m, self.low_m, out.T)
        for factor in self.factors:
            out *= factor
        return out

    def subset(self, rows: NDArray[np.intp]) -> SourceMix:
        """The mix of the subcatchments ``rows`` only; its columns are theirs here, to the bit.

        Shares this mix's sources and weights (no copy, nothing checked again); pickled (a
        chunk sent to another process), it takes only its own weights and the sources they use.
        """
        mix = object.__new__(SourceMix)
        mix._set(self.values_m, self.matrix, self.low_m, self.factors,
                 self._picked(np.asarray(rows)))
        return mix

    def __reduce__(self) -> tuple[type[SourceMix], tuple[object, ...]]:
        """Pickle its own weights and the sources they use, and nothing more.

        The columns made after are the same, to the bit.
        """
        m = self.matrix if self.rows is None else self.matrix[self.rows]
        used = np.unique(m.indices)
        kept = sparse.csr_array((m.data, np.searchsorted(used, m.indices), m.indptr),
                                shape=(m.shape[0], used.size))
        return SourceMix, (self.values_m[used], kept, self.low_m, self.factors)

    def scaled(self, factor: float) -> SourceMix:
        """The same rain times ``factor`` (>= 0) in every step and subcatchment."""
        return replace(self, factors=(*self.factors, float(factor)))

    def column_sums(self) -> FloatArray:
        """Each subcatchment's depth over all steps, m (its column summed, block by block)."""
        out = np.empty(self.size, dtype=np.float64)
        for start in range(0, self.size, COLUMN_BLOCK):
            block = slice(start, min(start + COLUMN_BLOCK, self.size))
            out[block] = self.columns(block).sum(axis=0)
        return out

    def mean_over(self, share: ArrayLike) -> FloatArray:
        """The ``share``-weighted mean of the columns per step, m: ``min + (x - min) @ share``.

        ``share`` (one per subcatchment, adding up to 1). ``min`` is each step's smallest
        column, so columns that agree give exactly their value. Made in blocks of
        :data:`COLUMN_BLOCK` columns, two passes; with one block it is
        :func:`gisrun.storm.areal.weighted_mean`'s own arithmetic.
        """
        share = np.asarray(share, dtype=np.float64)
        blocks = [slice(s, min(s + COLUMN_BLOCK, self.size))
                  for s in range(0, self.size, COLUMN_BLOCK)]
        if len(blocks) == 1:
            values = self.columns()
            low = values.min(axis=1, keepdims=True)
            return (low + (share[None, :] @ (values - low).T).T)[:, 0]
        low = np.full((self.steps, 1), np.inf)
        for block in blocks:
            np.minimum(low, self.columns(block).min(axis=1, keepdims=True), out=low)
        spread = np.zeros((1, self.steps))
        for block in blocks:
            spread += share[None, block] @ (self.columns(block) - low).T
        return (low + spread.T)[:, 0]

    def _picked(self, rows: Rows) -> NDArray[np.int64]:
        """The rows of :attr:`matrix` of this mix's subcatchments ``rows`` (default all).

        ``rows`` as numpy indexes them (positions, negative from the end, a slice or a
        boolean mask); a position out of range is an IndexError (the kernel reads what it is
        given unchecked).
        """
        n = self.size
        if rows is None:
            return np.arange(n, dtype=np.int64) if self.rows is None else self.rows
        if isinstance(rows, slice):
            local = np.arange(*rows.indices(n), dtype=np.int64)
        else:
            local = np.asarray(rows)
            if local.dtype == np.bool_ and local.shape != (n,):
                raise IndexError(f"a mask of shape {local.shape} for {n} subcatchments")
            local = np.flatnonzero(local) if local.dtype == np.bool_ else \
                local.astype(np.int64, copy=False).reshape(-1)
            if local.size and not -n <= local.min() <= local.max() < n:
                raise IndexError(f"a position of {local.min()} to {local.max()} is out of "
                                 f"range for {n} subcatchments")
            local = np.where(local < 0, local + n, local)
        return local if self.rows is None else self.rows[local]


def identity_mix(depth_m: ArrayLike) -> SourceMix:
    """The mix whose columns are ``depth_m``'s own, ``(steps, subcatchments)``, to the bit.

    Holds a copy of ``depth_m``, by series (the caller's array may change after).
    """
    depth = np.asarray(depth_m, dtype=np.float64)
    n = depth.shape[1] if depth.ndim == 2 else 0
    eye = sparse.csr_array((np.ones(n), np.arange(n, dtype=np.int64),
                            np.arange(n + 1, dtype=np.int64)), shape=(n, n))
    return SourceMix(np.ascontiguousarray(depth.T), eye,
                     np.zeros(depth.shape[0] if depth.ndim else 0))


def scaling_mix(series_m: ArrayLike, factor: ArrayLike) -> SourceMix:
    """The mix whose column ``i`` is ``series_m * factor[i]`` (factors >= 0), to the bit."""
    series = np.asarray(series_m, dtype=np.float64).reshape(1, -1)
    factor = np.asarray(factor, dtype=np.float64).reshape(-1)
    n = factor.size
    column = sparse.csr_array((factor, np.zeros(n, dtype=np.int64),
                               np.arange(n + 1, dtype=np.int64)), shape=(n, 1))
    return SourceMix(series, column, np.zeros(series.shape[1]))


def gauge_mix(depth_m: ArrayLike, weights: ArrayLike) -> SourceMix:
    """The mix of gauge records ``(steps, gauges)`` (finite, >= 0) by dense ``weights``.

    ``weights`` (subcatchments x gauges, rows adding up to 1; zeros are left out). ``low`` is
    each step's smallest record, as :func:`gisrun.storm.areal.weighted_mean` takes it: gauges
    with identical records give exactly their value.
    """
    depth = np.asarray(depth_m, dtype=np.float64)
    low = depth.min(axis=1) if depth.shape[1] else np.zeros(depth.shape[0])
    return SourceMix(np.ascontiguousarray(depth.T),
                     sparse.csr_array(np.asarray(weights, dtype=np.float64)), low)
