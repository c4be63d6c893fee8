"""Areal rain per subcatchment from a gridded rainfall product (all SI).

A rain grid reaches this module as a :class:`RainGrid`: its georeferencing, its steps and a
``read_steps`` method, the only door to the file (``gisrun.io.rain_grid.RainStack`` is the
file-backed one; tests pass arrays). :func:`grid_areal_depth` reads the stack in blocks of
steps, so memory holds one block, and gives each subcatchment the area-weighted mean of the
cells over its polygon with the weights of :func:`gisrun.grid.rain_weights.rain_grid_weights`.

The mean of a block is :func:`gisrun.storm.areal.weighted_mean`'s, ``min + W (x - min)`` with
the smallest value of the cells used in each step: a grid whose cells all hold the same depth
gives exactly that depth to every subcatchment, whatever the rounding of the weights. The
compiled kernels of :mod:`gisrun.storm.gridded_kernels` check the block and make the means
straight into the result, to the bit what scipy's sparse product of the shifted block gives.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np
from numpy.typing import NDArray

from ..errors import StormError
from ..grid.rain_weights import RainGridGeometry, RainGridWeights
from .gridded_kernels import BLOCK_NODATA, BLOCK_OK, TILE_BYTES, plan_tiles, scan_block, tile_means

__all__ = ["RainGrid", "grid_areal_depth", "steps_per_block", "block_bytes_for_budget",
           "BLOCK_BYTES", "BLOCK_SHARE"]

#: Bytes of one block of grid steps held in memory while the areal rain is made, when no
#: memory budget is given (128 MB).
BLOCK_BYTES = 128 * 2**20
#: Share of the run's memory budget (``[project] memory_budget_mb``) given to one block of grid
#: steps: a tenth (150 MB of the default 1500 MB), leaving the rest to the result (subcatchments
#: x steps, 8 bytes each, which no block size changes) and to what the run holds besides.
BLOCK_SHARE = 0.1


class RainGrid(RainGridGeometry, Protocol):
    """A stack of rain grids on a fixed step (see ``gisrun.io.rain_grid.RainStack``)."""

    steps: int
    step_s: float

    def read_steps(self, first: int, stop: int) -> NDArray[np.float64]:
        """Rain depth in m of steps ``first:stop``, shape ``(k, height, width)``; NaN: nodata."""

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


def grid_areal_depth(weights: RainGridWeights, grid: RainGrid, *,
                     block_bytes: int = BLOCK_BYTES) -> NDArray[np.float64]:
    """Rain depth per step and subcatchment: the weighted mean of the cells, in m.

    Parameters
    ----------
    weights : RainGridWeights
        The cells' weights per subcatchment on ``grid``.
    grid : RainGrid
        The rain stack, read ``block_bytes`` at a time.
    block_bytes : int
        Memory for one block of grid steps (the result and a tile buffer of
        :data:`gisrun.storm.gridded_kernels.TILE_BYTES` come on top).

    Returns
    -------
    ndarray, shape (steps, subcatchments)
        In Fortran order: each subcatchment's steps lie together (a chunk of subcatchments
        takes its columns cheaply, and each block's means are written in place).

    Raises
    ------
    StormError
        If a cell a subcatchment uses is nodata or negative in some step.
    """
    k = steps_per_block(grid, block_bytes)
    matrix = weights.matrix
    order, tile_start, slot, cols_start, cols = plan_tiles(
        matrix.indptr, matrix.indices, weights.cells,
        max(1, TILE_BYTES // (8 * min(k, max(grid.steps, 1)))))
    shape = (grid.steps, len(weights.subcatchment_ids))
    out = np.empty(shape, dtype=np.float64, order="F") if grid.steps == 0 else None
    for first in range(0, grid.steps, k):
        stop = min(first + k, grid.steps)
        block, low = _checked_block(weights, grid, first, stop)
        if out is None:  # made after the first read, whose own temporaries are then gone
            out = np.empty(shape, dtype=np.float64, order="F")
        tile_means(order, tile_start, cols_start, cols, matrix.indptr, slot, matrix.data, block,
                   low, out.T[:, first:stop])
    return out


def _checked_block(weights: RainGridWeights, grid: RainGrid, first: int, stop: int
                   ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Steps ``first:stop`` as ``(steps, cells of the grid)`` and their smallest used values."""
    block = np.ascontiguousarray(grid.read_steps(first, stop).reshape(stop - first, -1),
                                 dtype=np.float64)
    low = np.empty(stop - first, dtype=np.float64)
    status, step, col = scan_block(block, weights.cells, low)
    if status != BLOCK_OK:
        _raise_bad_value(status, block[step, weights.cells[col]], weights, grid, first + step,
                         col)
    return block, low


def _raise_bad_value(status: int, value: float, weights: RainGridWeights, grid: RainGrid,
                     step: int, col: int) -> None:
    if status == BLOCK_NODATA:
        sub = weights.subcatchment_ids[_first_user(weights, col)]
        raise StormError(grid.where,
                         f"has no rain value (nodata) at {grid.step_label(step)}"
                         f" in cell {_cell_name(weights, col)} used by subcatchment {sub!r}",
                         "fill the gap in the rain grid, or give a grid without nodata over the "
                         "subcatchments")
    raise StormError(grid.where, f"has rain {value:g} m < 0 at "
                     f"{grid.step_label(step)} in cell {_cell_name(weights, col)}",
                     "give rain depths or intensities >= 0")


def _first_user(weights: RainGridWeights, col: int) -> int:
    return int(weights.matrix[:, [col]].tocoo().row.min())


def _cell_name(weights: RainGridWeights, col: int) -> str:
    cell = int(weights.cells[col])
    return f"r{cell // weights.grid_width}_c{cell % weights.grid_width}"
