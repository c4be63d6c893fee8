"""Turn the tiny project of :mod:`bad_inputs_helpers` into one with a soil polygon layer.

Invented test data: the soil raster's two halves (group A west of x = 50 m, B east of it) drawn
as two polygons in ``soil.gpkg``, layer ``soils``, class field ``group``.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import geopandas as gpd
from bad_inputs_helpers import CRS, edit_toml, square

CODES_TABLE = '[soil.codes]\n"1" = "A"\n"2" = "B"\n'


def soil_layer(geoms: Sequence[Any] | None = None, labels: Sequence[Any] | None = None, *,
               field: str = "group", keep_codes: bool = False, crs: str = CRS,
               **fields: Sequence[Any]) -> Callable[[Path], None]:
    """Write ``soil.gpkg`` and point ``[soil]`` at it (``class_field = "group"``)."""
    def write(d: Path) -> None:
        shapes = list(geoms) if geoms is not None else [square(0, 0, 50, 100),
                                                         square(50, 0, 100, 100)]
        data = {field: list(labels) if labels is not None else ["A", "B"], **fields}
        gpd.GeoDataFrame(data, geometry=shapes, crs=crs).to_file(
            d / "soil.gpkg", layer="soils", engine="pyogrio")
        edit_toml(d / "gisrun.toml", 'path = "soil.tif"',
                  'path = "soil.gpkg"\nlayer = "soils"\nclass_field = "group"')
        if not keep_codes:
            edit_toml(d / "gisrun.toml", CODES_TABLE, "")
    return write
