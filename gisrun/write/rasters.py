"""Cell-level GeoTIFFs of a run, written from the values the run already made.

Per storm, ``runoff_depth_<unit>_<storm>.tif`` (in the run's depth unit) and
``time_to_ponding_min_<storm>.tif`` on the soil raster's grid, from
:attr:`gisrun.model.RunResult.cells`; each band carries its description and unit (``mm`` or
``in``, ``min``). Nothing is read from the inputs.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from ..io.geotiff import write_float_rasters
from ..model import CellRasters, RunResult
from ..units import from_si

__all__ = ["write_cell_rasters", "cell_preview"]

Progress = Callable[[str, int, int], None]
#: Rows of the cell arrays converted and written at a time.
_BAND_ROWS = 512


def write_cell_rasters(result: RunResult, folder: Path, *, overwrite: bool = False,
                       progress: Progress | None = None) -> dict[str, dict[str, Path]]:
    """Write cell-level runoff and time-to-ponding GeoTIFFs of every storm.

    Returns
    -------
    dict
        storm name -> {"runoff": path, "time_to_ponding": path}.

    Raises
    ------
    ValueError
        If the run made no cell values (``run(..., cells=False)``).
    """
    cells = result.cells
    if cells is None:
        raise ValueError("this run made no cell values; run it with cells=True")
    depth_unit = result.project.units.depth
    targets, paths, labels = {}, {}, {}
    for k, storm in enumerate(result.storms):
        runoff = folder / f"runoff_depth_{depth_unit}_{storm.file_stem}.tif"
        ponding = folder / f"time_to_ponding_min_{storm.file_stem}.tif"
        targets[(k, "runoff")], targets[(k, "ponding")] = runoff, ponding
        labels[(k, "runoff")] = (f"runoff depth, {storm.name}", depth_unit)
        labels[(k, "ponding")] = (f"time to ponding, {storm.name}", "min")
        paths[storm.name] = {"runoff": runoff, "time_to_ponding": ponding}
    folder.mkdir(parents=True, exist_ok=True)
    write_float_rasters(targets, cells.grid, _bands(cells, depth_unit, progress),
                        overwrite=overwrite, labels=labels)
    return paths


def _bands(cells: CellRasters, depth_unit: str, progress: Progress | None
           ) -> Iterator[tuple[int, dict[tuple[int, str], NDArray[np.float64]]]]:
    height = cells.grid.height
    for r0 in range(0, height, _BAND_ROWS):
        r1 = min(r0 + _BAND_ROWS, height)
        arrays = {}
        for k, (runoff, ponding) in enumerate(zip(cells.runoff_depth_m, cells.time_to_ponding_s,
                                                  strict=True)):
            arrays[(k, "runoff")] = from_si(runoff[r0:r1], depth_unit)
            arrays[(k, "ponding")] = from_si(ponding[r0:r1], "min")
        if progress:
            progress("cell rasters", r1, height)
        yield r0, arrays


def cell_preview(cells: CellRasters, values: NDArray[np.float64], *, max_cells: int = 1_000_000
                 ) -> tuple[NDArray[np.float64], tuple[float, float, float, float]]:
    """A cell array decimated to about ``max_cells`` cells (nearest cell), for drawing.

    Returns
    -------
    values : ndarray
        NaN where there is no value.
    extent : tuple
        (xmin, xmax, ymin, ymax) in the grid's CRS, for ``imshow(extent=...)``.
    """
    grid = cells.grid
    step = max(1.0, float(np.sqrt(grid.width * grid.height / max_cells)))
    rows = max(1, int(grid.height / step))
    cols = max(1, int(grid.width / step))
    pick_r = np.minimum(((np.arange(rows) + 0.5) * grid.height / rows).astype(np.intp),
                        grid.height - 1)
    pick_c = np.minimum(((np.arange(cols) + 0.5) * grid.width / cols).astype(np.intp),
                        grid.width - 1)
    t = grid.transform
    xs = (t.c, t.c + t.a * grid.width)
    ys = (t.f, t.f + t.e * grid.height)
    extent = (min(xs), max(xs), min(ys), max(ys))
    return np.asarray(values[np.ix_(pick_r, pick_c)], dtype=np.float64), extent
