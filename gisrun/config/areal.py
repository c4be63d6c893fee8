"""``[[storms]]`` kinds whose rain differs between subcatchments: the registry :data:`AREAL_KINDS`.

A kind of areal rain (rain gauges, a rain grid) reads its own files and weighs its sources
over the subcatchment polygons, so it is built once the subcatchment layer is read
(:func:`gisrun.workflow.inputs.read_storms`), not from the project file alone. Each
:class:`ArealKind` declares its keys, which of them name input files, and its builder; the
storm reader (:mod:`gisrun.config.storms`) checks the keys and names, and
:func:`build_areal_storm` turns the builder's :class:`~gisrun.storm.ArealRain` into a storm
whose own hyetograph is the basin's area-weighted mean (:func:`gisrun.storm.areal_storm`).

To add a kind: a builder ``build(table, subcatchments, units, memory_budget_mb) -> ArealRain``
(reading with :mod:`gisrun.io`, weighing with compute code; the run's memory budget in MB, or
None, for a builder that reads in blocks) and an entry in :data:`AREAL_KINDS`.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import geopandas as gpd
import numpy as np

from ..crs import ground_areas
from ..storm import ArealRain, Hyetograph, areal_storm
from ..units import UnitSystem
from .gauges import GAUGE_FILE_KEYS, GAUGE_KEYS, GAUGE_REQUIRED, build_gauges
from .rain_grid import RAIN_GRID_KEYS, build_rain_grid
from .reader import TableReader

__all__ = ["ArealKind", "AREAL_KINDS", "build_areal_storm", "ArealBuilder"]

#: ``build(table, subcatchments, units, memory_budget_mb)``: the table's rain per subcatchment
#: (every id of the layer, SI), its weights table and a description of its source.
ArealBuilder = Callable[[TableReader, gpd.GeoDataFrame, UnitSystem, float | None], ArealRain]


@dataclass(frozen=True)
class ArealKind:
    """A ``[[storms]]`` kind of areal rain: its keys and its builder."""

    #: Keys of the table besides ``name`` and ``kind``.
    keys: tuple[str, ...]
    #: Keys that must be given.
    required: tuple[str, ...]
    #: Keys whose value names an input file or folder (listed among the run's input files).
    file_keys: tuple[str, ...]
    build: ArealBuilder
    #: Name of a storm that gives none (``str.format`` with the table's text values).
    default_name: str


#: Kinds of areal rain, by the ``kind`` a ``[[storms]]`` table names.
AREAL_KINDS: dict[str, ArealKind] = {
    "rain_grid": ArealKind(keys=RAIN_GRID_KEYS, required=("path",), file_keys=("path",),
                           build=build_rain_grid, default_name="rain_grid"),
    "gauges": ArealKind(GAUGE_KEYS, GAUGE_REQUIRED, GAUGE_FILE_KEYS, build_gauges,
                        default_name="gauges"),
}


def build_areal_storm(kind: ArealKind, table: TableReader, subcatchments: gpd.GeoDataFrame,
                      units: UnitSystem, name: str | None,
                      memory_budget_mb: float | None = None) -> Hyetograph:
    """Build a storm of areal rain for ``subcatchments`` (a layer read by gisrun).

    The storm's own series is the mean of every subcatchment's rain weighted by ground area
    (:func:`gisrun.crs.ground_areas`). ``memory_budget_mb`` (the run's, if any) goes to the
    builder.

    Raises
    ------
    GisrunError
        Whatever the builder finds wrong, naming the table's key or file.
    """
    rain = kind.build(table, subcatchments, units, memory_budget_mb)
    ids = subcatchments["subcatchment_id"].to_numpy(dtype=object)
    area = np.zeros(len(rain.subcatchment_ids))
    area[rain.positions(ids, table.at)] = ground_areas(subcatchments.geometry).area_m2
    shown = {k: str(v) for k, v in table.data.items() if isinstance(v, str)}
    return areal_storm(name or kind.default_name.format(**shown), rain, area)
