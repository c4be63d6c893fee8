"""The ``[[storms]]`` kind ``gauges``: an observed event from rain gauges, rain per subcatchment.

::

    [[storms]]
    name = "event_2026_05_14"
    kind = "gauges"
    gauges = "storms/gauges.gpkg"        # a point layer (any GDAL vector), with a CRS
    id_field = "gauge_id"
    records = "storms/gauge_records.csv" # time column + one column per gauge id, or a folder
    weighting = "thiessen"               # or "inverse_distance" (from each polygon's centroid)
    power = 2                            # inverse distance only
    fill_gaps = false                    # true: fill a gauge's gaps from the others

Every gauge of the layer needs a record and every record a gauge. Gauge weights per
subcatchment come from :mod:`gisrun.storm.gauges` (Thiessen 1911 by exact polygon
intersection, or Shepard 1968 inverse distance), computed in the subcatchments' CRS (in a
UTM zone for a longitude-latitude layer). A gap in a record stops the run naming the gauge and
the time, unless ``fill_gaps = true``, which fills it from the other gauges by the same
weighting and says so in a warning. Reading: :mod:`gisrun.io.gauges`.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

import warnings

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from ..errors import GisrunWarning, StormError
from ..io.gauges import GaugeRecords, read_gauge_points, read_gauge_records
from ..options import GAUGE_WEIGHTINGS, RAIN_TIME_MARKS, RAIN_VALUES
from ..storm import ArealRain, gauge_mix
from ..storm.gauges import fill_gaps, gauge_weights
from ..units import UnitSystem
from .reader import TableReader

__all__ = ["GAUGE_KEYS", "GAUGE_REQUIRED", "GAUGE_FILE_KEYS", "build_gauges", "FAR_FACTOR",
           "FAR_M"]

GAUGE_KEYS = ("gauges", "layer", "id_field", "records", "weighting", "power", "fill_gaps",
              "rain_is", "time_marks")
GAUGE_REQUIRED = ("gauges", "id_field", "records")
GAUGE_FILE_KEYS = ("gauges", "records")
#: Gauges farther from the subcatchments than this many times the subcatchments' extent are
#: taken for a CRS mix-up (longitude-latitude coordinates in a projected layer, say).
FAR_FACTOR = 10.0
#: ... unless they lie within this distance (m): a small site's gauges may stand several km off,
#: many times its extent, while a mix-up of degrees, feet and metres puts them hundreds to
#: thousands of km away.
FAR_M = 100_000.0


def build_gauges(table: TableReader, subcatchments: gpd.GeoDataFrame,
                 units: UnitSystem, memory_budget_mb: float | None = None) -> ArealRain:
    """Rain per subcatchment from a ``kind = "gauges"`` table (see the module docstring).

    ``memory_budget_mb`` is part of every areal builder's signature; gauge records are small
    and are read whole.

    Raises
    ------
    GisrunError
        One line naming the file, key, gauge or time: a missing record or gauge, an unknown
        gauge id, a gap without ``fill_gaps``, a mismatched step, gauges far from the
        subcatchments, two gauges at one place.
    """
    points = read_gauge_points(table.path("gauges"), id_field=table.string("id_field"),
                               layer=table.string("layer", required=False))
    records = read_gauge_records(table.path("records"), units=units,
                                 rain_is=table.choice("rain_is", RAIN_VALUES),
                                 time_marks=table.choice("time_marks", RAIN_TIME_MARKS))
    weighting = table.choice("weighting", GAUGE_WEIGHTINGS)
    power = table.number("power", default=2.0, low=0.0, low_open=True)
    ids = _matched(points, records, table)
    gauges, polygons = _planar(points.set_index("gauge_id").loc[list(ids)], subcatchments,
                               table)
    weights = gauge_weights(weighting, gauges, ids, polygons, power)
    order = [records.ids.index(g) for g in ids]
    depth = records.depth_m[:, order]
    if np.isnan(depth).any():
        depth = _filled(depth, records, ids, gauges, weighting, power, table)
    sub_ids = subcatchments["subcatchment_id"].astype(str).tolist()
    how = ("Thiessen polygons" if weighting == "thiessen"
           else f"inverse distance from each centroid, power {power:g}")
    return ArealRain(gauge_mix(depth, weights), records.step_s, sub_ids,
                     f"{len(ids)} rain gauges ({table.data['records']}), {how}",
                     _weight_table(weights, ids, sub_ids), start=records.start,
                     points=_point_table(points.set_index("gauge_id").loc[list(ids)],
                                         subcatchments))


def _point_table(points: gpd.GeoDataFrame, subcatchments: gpd.GeoDataFrame) -> pd.DataFrame:
    """The gauges' coordinates in the subcatchment layer's CRS, for the rain map."""
    geometry = points.geometry
    if subcatchments.crs is not None and geometry.crs is not None:
        geometry = geometry.to_crs(subcatchments.crs)
    return pd.DataFrame({"source_id": [str(i) for i in points.index],
                         "x": geometry.x.to_numpy(float), "y": geometry.y.to_numpy(float)})


def _matched(points: gpd.GeoDataFrame, records: GaugeRecords, table: TableReader
             ) -> tuple[str, ...]:
    """The gauge ids, layer order; every gauge has a record and every record a gauge."""
    layer = points["gauge_id"].tolist()
    no_record = [g for g in layer if g not in records.ids]
    if no_record:
        raise StormError(table.where("records"), f"has no record for gauge {no_record[0]!r} "
                         f"of {table.data['gauges']}", "add its record (a column or a "
                         f"{no_record[0]}.csv), or remove the gauge from the layer")
    unknown = [g for g in records.ids if g not in layer]
    if unknown:
        raise StormError(table.where("records"), f"gauge id {unknown[0]!r} is not in "
                         f"{table.data['gauges']} (field {table.data['id_field']})",
                         f"use one of {layer[:10]}, or add the gauge to the layer")
    return tuple(layer)


def _planar(points: gpd.GeoDataFrame, subcatchments: gpd.GeoDataFrame, table: TableReader
            ) -> tuple[np.ndarray, np.ndarray]:
    """Gauges and polygons in one planar CRS, gauges checked to lie near the subcatchments."""
    polygons = subcatchments.geometry
    if polygons.crs is not None and polygons.crs.is_geographic:
        polygons = polygons.to_crs(polygons.estimate_utm_crs())
    gauges = points.geometry.to_crs(polygons.crs)
    minx, miny, maxx, maxy = polygons.total_bounds
    size = max(maxx - minx, maxy - miny)
    distance = shapely.distance(gauges.to_numpy(), shapely.box(minx, miny, maxx, maxy))
    unit_m = float(polygons.crs.axis_info[0].unit_conversion_factor) if polygons.crs else 1.0
    far = np.flatnonzero(~(distance <= max(FAR_FACTOR * size, FAR_M / unit_m)))
    if far.size:
        raise StormError(table.where("gauges"), f"gauge {points.index[far[0]]!r} lies "
                         f"{distance[far[0]]:,.0f} CRS units from the subcatchments, "
                         f"{distance[far[0]] / size:,.0f} times their extent",
                         "check the gauge layer's CRS and coordinates")
    return gauges.to_numpy(), polygons.to_numpy()


def _filled(depth: np.ndarray, records: GaugeRecords, ids: tuple[str, ...],
            gauges: np.ndarray, weighting: str, power: float, table: TableReader) -> np.ndarray:
    """Fill the gaps when the table says so; otherwise stop at the first, naming it."""
    if not table.flag("fill_gaps", default=False):
        step, g = (int(v) for v in np.argwhere(np.isnan(depth))[0])
        raise StormError(f"{records.files[records.ids.index(ids[g])]}:{ids[g]}",
                         f"has no value at {records.times[step]} (step {step + 1})",
                         "complete the record, or set fill_gaps = true in the [[storms]] table "
                         "to fill it from the other gauges")
    filled, notes = fill_gaps(depth, gauges, ids, weighting, power)
    for note in notes:
        warnings.warn(f"{table.at}: {note}", GisrunWarning, stacklevel=3)
    return filled


def _weight_table(weights: np.ndarray, ids: tuple[str, ...], sub_ids: list[str]
                  ) -> pd.DataFrame:
    rows, cols = np.nonzero(weights)
    return pd.DataFrame({"source_id": np.asarray(ids, dtype=object)[cols],
                         "subcatchment_id": np.asarray(sub_ids, dtype=object)[rows],
                         "weight": weights[rows, cols]})
