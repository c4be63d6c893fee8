"""Cell-level values of a run on the soil raster's grid, made once while the inputs are open.

The per-unit results of every storm are mapped onto the soil (and cover)
cells band by band (:mod:`gisrun.grid.cells` does the arithmetic); the result
is a :class:`gisrun.model.CellRasters` that the writers turn into GeoTIFFs and
maps without opening an input again. Arrays larger than :data:`IN_MEMORY_BYTES`
live in a temporary file mapped into memory (removed when the arrays go), so a
large raster does not need its size in memory.
"""

from __future__ import annotations

import shutil
import tempfile
import weakref
from collections.abc import Callable, Sequence
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from numpy.typing import NDArray
from pyproj import CRS

from ..grid import cells as cellgrid
from ..grid.classes import ClassGrid, read_padded
from ..io.geotiff import grid_of
from ..model import CellRasters, Inputs
from ..project import Project

__all__ = ["IN_MEMORY_BYTES", "CELL_COLUMNS", "compute_cells", "slim_unit_results"]

#: Cell arrays above this size are mapped from a temporary file instead of held in memory.
IN_MEMORY_BYTES = 256 * 2**20
#: The unit-result columns the cell values are made from.
CELL_COLUMNS = ("subcatchment_id", "soil_class", "cover_class", "surface", "area_m2",
                "runoff_depth_m", "time_to_ponding_s")

Progress = Callable[[str, int, int], None]


def slim_unit_results(units: pd.DataFrame) -> pd.DataFrame:
    """Only the columns of one storm's unit results that the cell values need."""
    return units[list(CELL_COLUMNS)]


def compute_cells(project: Project, inputs: Inputs, unit_results: Sequence[pd.DataFrame],
                  *, progress: Progress | None = None) -> CellRasters:
    """Cell-level runoff depth and time to ponding of every storm, on the soil grid (SI).

    Parameters
    ----------
    project : Project
    inputs : Inputs
        The run's subcatchments and (open) class rasters.
    unit_results : sequence of DataFrame
        One frame per storm with :data:`CELL_COLUMNS`, run at the unit level
        (soil x cover x surface), also when the run combines parameters per
        subcatchment.
    progress : callable, optional
        Called as ``progress("cell rasters", rows_done, rows)``.
    """
    soil_labels = sorted(set(project.soil.codes.values()))
    cover_labels = (sorted(set(project.cover.codes.values())) if project.cover
                    else ["unspecified"])
    sub_ids = inputs.subcatchments["subcatchment_id"].astype(str).tolist()
    lookup = cellgrid.unit_lookup(unit_results, sub_ids, soil_labels=soil_labels,
                                  cover_labels=cover_labels,
                                  fill_dominant=project.nodata_rule == "dominant")
    plan = cellgrid.plan_cells(
        _grid_coordinates(inputs.subcatchments, inputs.soil), soil_grid=inputs.soil,
        cover_grid=inputs.cover, soil_codes=project.soil.codes,
        cover_codes=project.cover.codes if project.cover else None,
        soil_labels=soil_labels, cover_labels=cover_labels)
    shape = (len(unit_results), plan.height, plan.width)
    runoff, ponding = _allocate(shape), _allocate(shape)
    _fill(plan, lookup, inputs.soil, inputs.cover, runoff, ponding, progress)
    return CellRasters(grid=grid_of(inputs.soil),
                       runoff_depth_m=tuple(runoff[k] for k in range(shape[0])),
                       time_to_ponding_s=tuple(ponding[k] for k in range(shape[0])),
                       notes=(plan.note,) if plan.note else ())


def _fill(plan: cellgrid.CellPlan, lookup: cellgrid.UnitLookup, soil: ClassGrid,
          cover: ClassGrid | None, runoff: NDArray[np.float64], ponding: NDArray[np.float64],
          progress: Progress | None) -> None:
    step = cellgrid.rows_per_band(plan)
    for r0 in range(0, plan.height, step):
        r1 = min(r0 + step, plan.height)
        soil_block = read_padded(soil, (r0, r1), (0, plan.width))
        cover_block = None
        if cover is not None:
            rows, cols = plan.cover_window(r0, r1)
            cover_block = read_padded(cover, rows, cols)
        runoff[:, r0:r1], ponding[:, r0:r1] = cellgrid.band_values(
            plan, lookup, r0, soil_block, cover_block)
        if progress:
            progress("cell rasters", r1, plan.height)


def _allocate(shape: tuple[int, int, int]) -> NDArray[np.float64]:
    """An array of NaN, mapped from a temporary file when it is large."""
    if np.prod(shape, dtype=np.int64) * 8 <= IN_MEMORY_BYTES:
        return np.full(shape, np.nan)
    folder = Path(tempfile.mkdtemp(prefix="gisrun-cells-"))
    array = np.lib.format.open_memmap(folder / "cells.npy", mode="w+", dtype=np.float64,
                                      shape=shape)
    array[...] = np.nan
    weakref.finalize(array, shutil.rmtree, folder, True)
    return array


def _grid_coordinates(subs: gpd.GeoDataFrame, soil: ClassGrid) -> NDArray[np.object_]:
    """Polygons in the soil grid's (column, row) coordinates."""
    geoms = subs.geometry
    if not CRS.from_user_input(geoms.crs).equals(CRS.from_user_input(soil.crs)):
        geoms = geoms.to_crs(soil.crs)
    t = soil.transform
    return shapely.transform(geoms.to_numpy(), lambda xy: np.column_stack(
        ((xy[:, 0] - t.c) / t.a, (xy[:, 1] - t.f) / t.e)))
