"""Areal rain per subcatchment from a gridded rainfall product (all SI).

A rain grid reaches this module as a :class:`RainGrid`: its georeferencing, its steps and a
``read_steps`` method, the only door to the file (``gisrun.io.rain_grid.RainStack`` is the
file-backed one; tests pass arrays). :func:`grid_areal_depth` reads the stack in blocks of
steps, so memory holds one block, and gives each subcatchment the area-weighted mean of the
cells over its polygon: one sparse product per block with the weights of
:func:`gisrun.grid.rain_weights.rain_grid_weights`.

The mean of a block is :func:`gisrun.storm.areal.weighted_mean`'s, ``min + W (x - min)`` with
the smallest value of the cells used in each step (computed here in the sparse product's own
layout, subcatchments x steps, to spare a transpose): a grid whose cells all hold the same depth
gives exactly that depth to every subcatchment, whatever the rounding of the weights.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np
from numpy.typing import NDArray

from ..errors import StormError
from ..grid.rain_weights import RainGridGeometry, RainGridWeights

__all__ = ["RainGrid", "grid_areal_depth", "steps_per_block", "BLOCK_BYTES"]

#: Bytes of one block of grid steps held in memory while the areal rain is made (128 MB).
BLOCK_BYTES = 128 * 2**20


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
        Memory for one block of grid steps (the block's means per subcatchment come on top,
        and, when the stack takes more than one block, are copied into the result).

    Returns
    -------
    ndarray, shape (steps, subcatchments)
        In Fortran order: each subcatchment's steps lie together (a chunk of subcatchments
        takes its columns cheaply, and a block's product is the result without a transpose).

    Raises
    ------
    StormError
        If a cell a subcatchment uses is nodata or negative in some step.
    """
    k = steps_per_block(grid, block_bytes)
    if k >= grid.steps:
        return _block_means(weights, grid, 0, grid.steps).T
    out = np.empty((grid.steps, len(weights.subcatchment_ids)), dtype=np.float64, order="F")
    for first in range(0, grid.steps, k):
        stop = min(first + k, grid.steps)
        out.T[:, first:stop] = _block_means(weights, grid, first, stop)
    return out


def _block_means(weights: RainGridWeights, grid: RainGrid, first: int, stop: int
                 ) -> NDArray[np.float64]:
    """Means of steps ``first:stop``, ``(subcatchments, steps)``, as the sparse product makes it."""
    block = grid.read_steps(first, stop)
    cells_by_step = block.reshape(stop - first, -1).T[weights.cells]  # (cells, steps), C order
    del block
    _check_values(cells_by_step.T, weights, grid, first)
    low = cells_by_step.min(axis=0)
    cells_by_step -= low
    means = np.asarray(weights.matrix @ cells_by_step)
    means += low
    return means


def _check_values(values: NDArray[np.float64], weights: RainGridWeights, grid: RainGrid,
                  first: int) -> None:
    bad = ~np.isfinite(values)
    if bad.any():
        step, col = (int(v) for v in np.argwhere(bad)[0])
        sub = weights.subcatchment_ids[_first_user(weights, col)]
        raise StormError(grid.where,
                         f"has no rain value (nodata) at {grid.step_label(first + step)}"
                         f" in cell {_cell_name(weights, col)} used by subcatchment {sub!r}",
                         "fill the gap in the rain grid, or give a grid without nodata over the "
                         "subcatchments")
    if (values < 0).any():
        step, col = (int(v) for v in np.argwhere(values < 0)[0])
        raise StormError(grid.where, f"has rain {values[step, col]:g} m < 0 at "
                         f"{grid.step_label(first + step)} in cell {_cell_name(weights, col)}",
                         "give rain depths or intensities >= 0")


def _first_user(weights: RainGridWeights, col: int) -> int:
    return int(weights.matrix[:, [col]].tocoo().row.min())


def _cell_name(weights: RainGridWeights, col: int) -> str:
    cell = int(weights.cells[col])
    return f"r{cell // weights.grid_width}_c{cell % weights.grid_width}"
