"""A small project with three subcatchments and three loss methods, for maps and the report.

Soil A in the west half, D in the east (10 m cells); cover open space with an impervious
column at x 20-25 m (5 m cells). ``S1`` uses the run's Green-Ampt, ``S2`` Horton and ``S3``
the curve number (chosen through the ``how`` attribute). Two storms: 1 mm, which fills
surface storage and makes no runoff anywhere, and 60 mm in an hour.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from shapely.geometry import box
from test_cellgrid import write_geotiff, write_polygons

TOML = """
[project]
name = "three methods"
units = "{units}"
output = "out/three.gpkg"
time_step_min = 5
[subcatchments]
path = "sub.gpkg"
layer = "subcatchments"
id_field = "sid"
method_field = "how"
[soil]
path = "soil.tif"
classification = "hydrologic_soil_group"
initial_saturation = 0.3
[soil.codes]
"1" = "A"
"4" = "D"
[cover]
path = "cover.tif"
[cover.codes]
"1" = "impervious"
"5" = "open_space_good"
[nodata]
rule = "omit"
max_fraction = 0.5
[method]
name = "green_ampt"
combine = "units"
[[storms]]
name = "drizzle"
kind = "uniform"
depth = {small}
duration_min = 60
[[storms]]
name = "heavy"
kind = "uniform"
depth = {big}
duration_min = 60
"""


def methods_project(folder: Path, *, units: str = "si") -> Path:
    """Write the project into ``folder``; returns the project file."""
    folder.mkdir(parents=True, exist_ok=True)
    soil = np.ones((6, 9), dtype=np.uint8)
    soil[:, 5:] = 4
    write_geotiff(folder / "soil.tif", soil, origin=(0.0, 60.0), cell=10.0, nodata=255)
    cover = np.full((12, 18), 5, dtype=np.uint8)
    cover[:, 4] = 1
    write_geotiff(folder / "cover.tif", cover, origin=(0.0, 60.0), cell=5.0, nodata=0)
    write_polygons(folder / "sub.gpkg", [box(0, 0, 30, 60), box(30, 0, 60, 60),
                                         box(60, 0, 90, 60)],
                   sid=["S1", "S2", "S3"], how=[None, "horton", "curve_number"])
    small, big = ("0.04", "2.4") if units == "us" else ("1", "60")
    (folder / "gisrun.toml").write_text(TOML.format(units=units, small=small, big=big))
    return folder / "gisrun.toml"
