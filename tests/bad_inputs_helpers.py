"""Builders for a tiny valid project in ``tmp_path``, and helpers to break it one way at a time.

Every file here is invented test data: two 50 m x 100 m subcatchments side by side on a
10 x 10 grid of 10 m cells (soil group A in the west half, B in the east half), one land-cover
class everywhere, and a uniform 10 mm/h storm for an hour.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
import rasterio
import xarray as xr
from pyproj import CRS as _CRS
from rasterio.transform import from_origin
from shapely.geometry import box

from gisrun.cli.main import main

CRS = "EPSG:32617"
CRS_CF = _CRS(CRS).to_cf()
#: South-west corner of the tiny grid (UTM 17N, on the central meridian; invented location).
X0, Y0 = 500_000.0, 4_000_000.0

PROJECT_TOML = """\
[project]
name = "tiny"
units = "si"
output = "out/result.gpkg"
time_step_min = 5

[subcatchments]
path = "sub.gpkg"
layer = "subcatchments"
id_field = "code"

[soil]
path = "soil.tif"
classification = "hydrologic_soil_group"

[soil.codes]
"1" = "A"
"2" = "B"

[cover]
path = "cover.tif"

[cover.codes]
"5" = "open_space_good"

[nodata]
rule = "dominant"
max_fraction = 0.25

[method]
name = "green_ampt"

[[storms]]
name = "steady"
kind = "file"
path = "storm.csv"
"""

STORM_CSV = "time_min,intensity_mm_per_h\n0,0\n15,10\n30,10\n45,10\n60,10\n"


def write_raster(path: Path, codes: np.ndarray, *, crs: str | None = CRS,
                 nodata: float | None = None, transform: Any = None) -> Path:
    """Write a one-band GeoTIFF covering the 100 m x 100 m square from (X0, Y0), 10 m cells."""
    codes = np.asarray(codes)
    t = transform if transform is not None else from_origin(X0, Y0 + 100.0, 10.0, 10.0)
    profile = {"driver": "GTiff", "height": codes.shape[0], "width": codes.shape[1], "count": 1,
               "dtype": codes.dtype, "transform": t, "nodata": nodata}
    if crs is not None:
        profile["crs"] = crs
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(codes, 1)
    return path


def write_rain_grid(path: Path, *, width_m: float = 100.0, minutes: list[float] | None = None,
                    time_units: str = "minutes since 2026-07-01 00:00:00",
                    units: str = "mm h-1", nodata_at: tuple[int, int, int] | None = None,
                    value: float = 10.0) -> Path:
    """A CF NetCDF rain grid (xarray) of 25 m cells over the tiny project, ``width_m`` wide."""
    minutes = [5.0, 10.0, 15.0] if minutes is None else minutes
    x = X0 + 12.5 + 25.0 * np.arange(int(width_m // 25))
    y = Y0 + 100.0 - 12.5 - 25.0 * np.arange(4)
    values = np.full((len(minutes), y.size, x.size), value)
    if nodata_at is not None:
        values[nodata_at] = np.nan
    ds = xr.Dataset(
        {"precip": (("time", "y", "x"), values, {"units": units, "grid_mapping": "crs"})},
        coords={"time": ("time", np.array(minutes), {"units": time_units}),
                "y": ("y", y, {"standard_name": "projection_y_coordinate"}),
                "x": ("x", x, {"standard_name": "projection_x_coordinate"})})
    ds["crs"] = ((), 0, CRS_CF)
    ds.to_netcdf(path)
    return path


def soil_codes() -> np.ndarray:
    """Code 1 (group A) in the west half, 2 (group B) in the east half."""
    codes = np.ones((10, 10), dtype=np.uint8)
    codes[:, 5:] = 2
    return codes


def square(x0: float, y0: float, x1: float, y1: float) -> Any:
    """A rectangle in metres from the grid's south-west corner."""
    return box(X0 + x0, Y0 + y0, X0 + x1, Y0 + y1)


def write_subcatchments(path: Path, geoms: list[Any] | None = None, *, ids: list[Any] | None = None,
                        crs: str | None = CRS, layer: str = "subcatchments",
                        **fields: list[Any]) -> Path:
    """Write the polygon layer (default: two squares side by side, ids S1 and S2)."""
    geoms = geoms if geoms is not None else [square(0, 0, 50, 100), square(50, 0, 100, 100)]
    ids = ids if ids is not None else [f"S{i + 1}" for i in range(len(geoms))]
    gdf = gpd.GeoDataFrame({"code": ids, **fields}, geometry=geoms, crs=crs)
    gdf.to_file(path, layer=layer, engine="pyogrio")
    return path


def make_project(folder: Path) -> Path:
    """Write the tiny valid project into ``folder``; return the project file."""
    folder.mkdir(parents=True, exist_ok=True)
    write_subcatchments(folder / "sub.gpkg")
    write_raster(folder / "soil.tif", soil_codes())
    write_raster(folder / "cover.tif", np.full((10, 10), 5, dtype=np.uint8))
    (folder / "storm.csv").write_text(STORM_CSV)
    (folder / "gisrun.toml").write_text(PROJECT_TOML)
    return folder / "gisrun.toml"


def edit_toml(project: Path, old: str, new: str) -> None:
    """Replace one exact piece of the project file (fails if it is not there)."""
    text = project.read_text()
    assert old in text, old
    project.write_text(text.replace(old, new, 1))


def run_cli(capsys: Any, args: list[str]) -> tuple[int, str, str]:
    """Run the command line in-process; return (exit code, stdout, stderr)."""
    code = main(args)
    out = capsys.readouterr()
    return code, out.out, out.err


def error_lines(stderr: str) -> list[str]:
    """The ``gisrun: error:`` lines of standard error."""
    return [line for line in stderr.splitlines() if line.startswith("gisrun: error:")]


def warning_lines(stderr: str) -> list[str]:
    """The ``gisrun: warning:`` lines of standard error."""
    return [line for line in stderr.splitlines() if line.startswith("gisrun: warning:")]


def assert_one_clear_error(code: int, stderr: str, culprit: str | re.Pattern[str]) -> str:
    """Exit 2, exactly one error line, naming ``culprit``, with a fix after ';', no traceback."""
    assert code == 2, stderr
    assert "Traceback" not in stderr, stderr
    lines = error_lines(stderr)
    assert len(lines) == 1, stderr
    line = lines[0]
    if isinstance(culprit, re.Pattern):
        assert culprit.search(line), (culprit.pattern, line)
    else:
        assert culprit in line, (culprit, line)
    # "<where>: <problem>; <what to do>": a non-empty fix follows the last ';'
    assert ";" in line and line.rsplit(";", 1)[1].strip(), line
    return line
