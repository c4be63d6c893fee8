"""``kind = "rain_grid"``: a storm from a stack of rain grids, its own rain per subcatchment.

The ``[[storms]]`` table names the stack (``path``: a NetCDF file, a multi-band GeoTIFF, or a
folder of GeoTIFFs) and what the stack does not say itself::

    [[storms]]
    kind = "rain_grid"
    path = "storms/radar_event.nc"
    variable = "rain_rate"          # NetCDF: the rain variable (if the file has several)
    # format = "netcdf"             # or "geotiff", "geotiff_folder"; inferred from the path
    # time_pattern = "rain_%Y%m%d_%H%M.tif"   # folder: the time in each file name (strptime)
    # rain_is = "intensity"         # or "depth"; checked against the unit
    # unit = "mm/h"                 # when the stack has no unit of its own
    # crs = "EPSG:32617"            # when the stack has no CRS of its own
    # start = "2026-07-01T00:00"    # GeoTIFF without band times: the first step's start
    # step_min = 5                  # the step (checked against the stack's own times)
    # time_marks = "end"            # a time marks the end of its step (or "start")
    # fill_gaps = false             # true: a nodata cell over a subcatchment takes the mean of
    #                               # the cells around it in that step

:func:`build_rain_grid` reads the stack's description (:func:`gisrun.io.rain_grid.open_rain_grid`),
weighs its cells over the subcatchments
(:func:`gisrun.grid.rain_weights.rain_grid_weights`) and makes the rain per subcatchment and
step (:func:`gisrun.storm.gridded.grid_rain_mix`: the used cells' depths, each
subcatchment's means made when its chunk runs).

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

import warnings

import geopandas as gpd

from ..errors import GisrunWarning
from ..grid.rain_weights import rain_grid_weights
from ..io.rain_grid import RainGridSettings, RainStack, open_rain_grid
from ..options import RAIN_GRID_FORMATS, RAIN_TIME_MARKS, RAIN_VALUES, Choices
from ..storm import ArealRain
from ..storm.gridded import KEPT_SHARE, block_bytes_for_budget, grid_rain_mix
from ..units import UnitSystem
from .reader import TableReader

__all__ = ["RAIN_GRID_KEYS", "build_rain_grid"]

#: Keys of a ``kind = "rain_grid"`` table besides ``name`` and ``kind``.
RAIN_GRID_KEYS = ("path", "format", "variable", "time_pattern", "rain_is", "unit", "crs",
                  "start", "step_min", "time_marks", "fill_gaps")


def build_rain_grid(table: TableReader, subcatchments: gpd.GeoDataFrame,
                    units: UnitSystem, memory_budget_mb: float | None = None) -> ArealRain:
    """The rain per subcatchment and step of the stack a ``[[storms]]`` table names.

    Parameters
    ----------
    table : TableReader
        The ``[[storms]]`` table (keys :data:`RAIN_GRID_KEYS`).
    subcatchments : GeoDataFrame
        The subcatchment layer as read (``subcatchment_id``, polygons with a CRS).
    units : UnitSystem
        The project's units (rain grids carry their own unit; not used).
    memory_budget_mb : float, optional
        The run's ``[project] memory_budget_mb``: the stack is read in blocks of
        :data:`gisrun.storm.gridded.BLOCK_SHARE` of it (the result does not depend on the
        block size); without it, blocks of :data:`gisrun.storm.gridded.BLOCK_BYTES`.

    Raises
    ------
    GisrunError
        For a bad key, or a stack that cannot be read, does not cover a subcatchment, or has
        nodata over one; one line naming the key or the file.
    """
    stack = open_rain_grid(rain_grid_settings(table))
    ids = subcatchments["subcatchment_id"].to_numpy(dtype=object)
    weights = rain_grid_weights(subcatchments.geometry, ids, stack)
    mix, notes = grid_rain_mix(weights, stack, block_bytes=block_bytes_for_budget(memory_budget_mb),
                               fill_gaps=table.flag("fill_gaps", default=False))
    for note in notes:
        warnings.warn(f"{table.at}: {note}", GisrunWarning, stacklevel=3)
    kept_mb = mix.values_m.nbytes / 2**20
    if memory_budget_mb is not None and kept_mb > KEPT_SHARE * memory_budget_mb:
        warnings.warn(f"{table.at}: the rain grid's {mix.values_m.shape[0]:,} cells over the "
                      f"subcatchments take {kept_mb:,.0f} MB for {mix.steps:,} steps, more than "
                      f"{KEPT_SHARE:.0%} of memory_budget_mb ({memory_budget_mb:g} MB), so the run "
                      "may use more memory than its budget; raise memory_budget_mb, or give a "
                      "shorter event or a coarser step", GisrunWarning, stacklevel=3)
    t = stack.transform
    source = (f"rain grid {stack.where} ({stack.width} x {stack.height} cells of "
              f"{abs(t.a):g} x {abs(t.e):g} {_axis_unit(stack)}, {stack.crs.name}; "
              f"{stack.steps} steps of {stack.step_s / 60:g} min from {stack.start}; "
              "exact area weights)")
    return ArealRain(mix, stack.step_s, weights.subcatchment_ids, source,
                     weights=weights.table(), start=stack.start)


def rain_grid_settings(table: TableReader) -> RainGridSettings:
    """What a ``kind = "rain_grid"`` table says about its stack (paths resolved)."""
    step_min = table.data.get("step_min")
    return RainGridSettings(
        path=table.path("path"),  # type: ignore[arg-type]  (required: None never comes back)
        format=_optional_choice(table, "format", RAIN_GRID_FORMATS),
        variable=table.string("variable", required=False),
        time_pattern=table.string("time_pattern", required=False),
        rain_is=_optional_choice(table, "rain_is", RAIN_VALUES),
        unit=table.string("unit", required=False),
        crs=table.string("crs", required=False),
        start=table.string("start", required=False),
        step_s=None if step_min is None else 60.0 * table.number("step_min", low=0.0,
                                                                   low_open=True),
        time_marks=table.choice("time_marks", RAIN_TIME_MARKS),
    )


def _optional_choice(table: TableReader, key: str, valid: Choices) -> str | None:
    if key not in table.data:
        return None
    return valid.pick(table.string(key), where=table.where(key), error=table.error)


def _axis_unit(stack: RainStack) -> str:
    crs = stack.crs
    return "degrees" if crs.is_geographic else crs.axis_info[0].unit_name
