"""Areal rain per subcatchment from a gridded rainfall product (all SI).

A rain grid reaches this module as a :class:`RainGrid`: its georeferencing, its steps, the
factor from its stored values to depths and a ``read_stored`` method, the only door to the file
(``gisrun.io.rain_grid.RainStack`` is the file-backed one; tests pass arrays).
:func:`grid_rain_mix` reads the stack once, in blocks of steps as stored (float32 stays
float32), and in one pass over each block makes the depths of the cells the subcatchments use,
each cell's series together, and checks them; each subcatchment's area-weighted mean of the
cells over its polygon (the weights of :func:`gisrun.grid.rain_weights.rain_grid_weights`) is
then made when a chunk of subcatchments runs (:class:`gisrun.storm.mix.SourceMix`), never for
all of them at once.

The mean is :func:`gisrun.storm.areal.weighted_mean`'s, ``min + W (x - min)`` with the
smallest value of the cells used in each step: a grid whose cells all hold the same depth
gives exactly that depth to every subcatchment, whatever the rounding of the weights. The
compiled kernels (:mod:`gisrun.storm.mix_kernels`) give, to the bit, what scipy's sparse
product of the shifted block gives.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np
from numpy.typing import NDArray
from scipy import ndimage

from ..errors import StormError
from ..grid.rain_weights import RainGridGeometry, RainGridWeights
from .gridded_kernels import BLOCK_NODATA, scan_block
from .mix import SourceMix
from .mix_kernels import gather_block

__all__ = ["RainGrid", "grid_rain_mix", "grid_areal_depth", "fill_block_gaps", "steps_per_block",
           "block_bytes_for_budget", "BLOCK_BYTES", "BLOCK_SHARE", "KEPT_SHARE"]

#: Bytes of one block of grid steps held in memory while the areal rain is made, when no
#: memory budget is given (128 MB).
BLOCK_BYTES = 128 * 2**20
#: Share of the run's memory budget (``[project] memory_budget_mb``) given to one block of grid
#: steps: a tenth (150 MB of the default 1500 MB), leaving the rest to the kept cells (used
#: cells x steps, 8 bytes each, which no block size changes) and to what the run holds besides.
BLOCK_SHARE = 0.1
#: Share of the run's memory budget the kept cells (used cells x steps, 8 bytes each) may take
#: before the run says it may overrun its budget (common practice: half, leaving the rest to
#: the chunks).
KEPT_SHARE = 0.5
#: The eight cells around a cell (:func:`fill_block_gaps`).
_NEIGHBOURS = np.array([[1.0, 1.0, 1.0], [1.0, 0.0, 1.0], [1.0, 1.0, 1.0]])


class RainGrid(RainGridGeometry, Protocol):
    """A stack of rain grids on a fixed step (see ``gisrun.io.rain_grid.RainStack``)."""

    steps: int
    step_s: float
    #: A stored value times this is the step's rain depth in m (1.0 for a stack of depths).
    to_depth_m: float

    def read_stored(self, first: int, stop: int) -> NDArray[np.floating]:
        """Values of steps ``first:stop`` as stored, ``(k, height, width)``; NaN: nodata.

        float32 or float64; times :attr:`to_depth_m` they are rain depths in m.
        """

    def step_label(self, step: int) -> str:
        """The time of step ``step`` as the source writes it, for messages."""


def steps_per_block(grid: RainGrid, block_bytes: int = BLOCK_BYTES) -> int:
    """Steps of ``grid`` that fit in ``block_bytes`` as float64 (at least one)."""
    return max(1, int(block_bytes // max(8 * grid.width * grid.height, 1)))


def block_bytes_for_budget(memory_budget_mb: float | None) -> int:
    """Bytes of one block of grid steps: :data:`BLOCK_SHARE` of the budget (MB), if any."""
    if memory_budget_mb is None:
        return BLOCK_BYTES
    return int(BLOCK_SHARE * memory_budget_mb * 2**20)


def grid_rain_mix(weights: RainGridWeights, grid: RainGrid, *, block_bytes: int = BLOCK_BYTES,
                  fill_gaps: bool = False) -> tuple[SourceMix, tuple[str, ...]]:
    """The grid's rain as a :class:`~gisrun.storm.mix.SourceMix` over its used cells.

    Reads the stack ``block_bytes`` at a time as stored and, in one pass over each block
    (:func:`gisrun.storm.mix_kernels.gather_block`), keeps the used cells' depths (each stored
    value widened to float64 times ``grid.to_depth_m``, the bits ``RainStack.read_steps``
    gives), a cell's series together (used cells x steps, 8 bytes each: at most the stack's
    own size as float64), checks every one and takes each step's smallest.
    Each subcatchment's means are then made when asked for (:meth:`SourceMix.columns`), a
    chunk of subcatchments at a time in a run.

    Parameters
    ----------
    weights : RainGridWeights
        The cells' weights per subcatchment on ``grid``.
    grid : RainGrid
        The rain stack.
    block_bytes : int
        Memory for one block of grid steps while reading.
    fill_gaps : bool
        Fill a used cell without a value (nodata) in a step with the mean of the cells around
        it that have one in that step (:func:`fill_block_gaps`); otherwise it is an error.

    Returns
    -------
    (SourceMix, notes)
        The mix, and what was filled, in words (empty when nothing was).

    Raises
    ------
    StormError
        If a cell a subcatchment uses is negative in some step, or nodata (without
        ``fill_gaps``, or with none of the cells around it holding a value).
    """
    k = steps_per_block(grid, block_bytes)
    filled: list[tuple[int, str]] = []
    kept = np.empty((weights.cells.size, grid.steps), dtype=np.float64)
    low = np.zeros(grid.steps, dtype=np.float64)
    for first in range(0, grid.steps, k):
        stop = min(first + k, grid.steps)
        block = np.ascontiguousarray(grid.read_stored(first, stop).reshape(stop - first, -1))
        if gather_block(block, weights.cells, first, grid.to_depth_m, kept, low[first:stop]):
            continue
        block = np.multiply(block, grid.to_depth_m, dtype=np.float64)  # depths, to fill or name
        if fill_gaps:
            filled.append(fill_block_gaps(block, weights, grid, first))
            if gather_block(block, weights.cells, first, 1.0, kept, low[first:stop]):
                continue
        _raise_first_bad(block, weights, grid, first)
    low[np.isinf(low)] = 0.0  # no cell used: nothing subtracted
    count = sum(n for n, _ in filled)
    notes = (f"{count} missing value(s) of the rain grid in cells the subcatchments use were "
             f"filled with the mean of the cells around them (fill_gaps = true), the first at "
             f"{filled[0][1]}",) if count else ()
    return SourceMix(kept, weights.matrix, low), notes


def fill_block_gaps(block: NDArray[np.float64], weights: RainGridWeights, grid: RainGrid,
                    first: int) -> tuple[int, str]:
    """Fill each used cell without a value (NaN) with the mean of its neighbours', in place.

    The neighbours are the (up to) eight cells around it on the grid that hold a value
    (finite, >= 0) in the same step, each counting once (common practice for isolated gaps
    in a radar product; filled values are not used to fill others).

    Returns
    -------
    (count, where)
        How many values were filled, and the first's time and cell, in words.

    Raises
    ------
    StormError
        Naming the first gap (by step, then cell) none of whose neighbours has a value.
    """
    gap = np.isnan(block[:, weights.cells])
    count, where = 0, ""
    for j in np.flatnonzero(gap.any(axis=1)):
        plane = block[j].reshape(grid.height, grid.width)
        ok = np.isfinite(plane) & (plane >= 0)
        total = ndimage.convolve(np.where(ok, plane, 0.0), _NEIGHBOURS, mode="constant")
        around = ndimage.convolve(ok.astype(np.float64), _NEIGHBOURS, mode="constant")
        cols = np.flatnonzero(gap[j])
        cells = weights.cells[cols]
        lonely = np.flatnonzero(around.flat[cells] == 0)
        if lonely.size:
            col = int(cols[lonely[0]])
            sub = weights.subcatchment_ids[_first_user(weights, col)]
            raise StormError(grid.where, f"has no rain value (nodata) at "
                             f"{grid.step_label(first + j)} in cell {_cell_name(weights, col)} "
                             f"used by subcatchment {sub!r}, nor any of the cells around it "
                             "(fill_gaps fills a gap from its neighbours)",
                             "fill the gap in the rain grid, or give a grid with values over "
                             "the subcatchments")
        block[j, cells] = total.flat[cells] / around.flat[cells]
        where = where or f"{grid.step_label(first + j)} in cell {_cell_name(weights, int(cols[0]))}"
        count += cells.size
    return count, where


def grid_areal_depth(weights: RainGridWeights, grid: RainGrid, *,
                     block_bytes: int = BLOCK_BYTES) -> NDArray[np.float64]:
    """Rain depth per step and subcatchment, every one at once, in m.

    :func:`grid_rain_mix`'s columns, made whole: ``(steps, subcatchments)``, Fortran order.
    A run does not make it (each chunk makes its own columns); it is here for a notebook and
    for the tests, which check it to the bit against scipy's sparse product.

    Raises
    ------
    StormError
        If a cell a subcatchment uses is nodata or negative in some step.
    """
    return grid_rain_mix(weights, grid, block_bytes=block_bytes)[0].columns()


def _raise_first_bad(block: NDArray[np.float64], weights: RainGridWeights, grid: RainGrid,
                     first: int) -> None:
    """Name the first bad used value of a block (by step, then by column), as a StormError."""
    status, step, col = scan_block(block, weights.cells, np.empty(block.shape[0]))
    _raise_bad_value(status, block[step, weights.cells[col]], weights, grid, first + step, col)


def _raise_bad_value(status: int, value: float, weights: RainGridWeights, grid: RainGrid,
                     step: int, col: int) -> None:
    if status == BLOCK_NODATA:
        sub = weights.subcatchment_ids[_first_user(weights, col)]
        raise StormError(grid.where,
                         f"has no rain value (nodata) at {grid.step_label(step)}"
                         f" in cell {_cell_name(weights, col)} used by subcatchment {sub!r}",
                         "fill the gap in the rain grid, or give a grid without nodata over the "
                         "subcatchments")
    to_depth = grid.to_depth_m
    stored = "" if to_depth == 1.0 else f" (stored value {value / to_depth:g})"
    raise StormError(grid.where, f"has rain {value:g} m < 0{stored} at "
                     f"{grid.step_label(step)} in cell {_cell_name(weights, col)}",
                     "give rain depths or intensities >= 0, or declare a value that marks "
                     "missing data as the file's nodata (NetCDF _FillValue or missing_value, "
                     "the GeoTIFF's nodata)")


def _first_user(weights: RainGridWeights, col: int) -> int:
    return int(weights.matrix[:, [col]].tocoo().row.min())


def _cell_name(weights: RainGridWeights, col: int) -> str:
    cell = int(weights.cells[col])
    return f"r{cell // weights.grid_width}_c{cell % weights.grid_width}"
