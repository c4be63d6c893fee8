"""A catalogue of broken inputs: each gets one clear line, exit 2 and no traceback.

Every case starts from the tiny valid project of :mod:`bad_inputs_helpers` (invented data built
in ``tmp_path``), breaks one thing, and runs ``gisrun check`` and/or ``gisrun run`` in-process.
The answer must be exit code 2 and exactly one ``gisrun: error:`` line on standard error that
names the culprit (file, layer, field, row or id) and says what to do after a ``;``.
Problems that should not stop a run (repairable polygons, implausible storm depths, an override
row that matches nothing) are warnings, printed by ``check`` and recorded in the run table.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import rasterio
from affine import Affine
from bad_inputs_helpers import (
    CRS,
    X0,
    Y0,
    assert_one_clear_error,
    edit_toml,
    make_project,
    run_cli,
    soil_codes,
    square,
    warning_lines,
    write_rain_grid,
    write_raster,
    write_subcatchments,
)
from polygon_helpers import soil_layer
from shapely.geometry import LineString, Point, Polygon

from gisrun.errors import GisrunWarning

BOTH = ("check", "run")


@dataclass(frozen=True)
class Case:
    """One way to break the tiny project."""

    breaks: Callable[[Path], object]  # (project folder) -> anything; edits files in place
    culprit: str | re.Pattern[str]  # must appear in the error line
    commands: tuple[str, ...] = BOTH
    target: str = "."  # what to pass as PROJECT, relative to the folder
    extra: tuple[str, ...] = ()  # more command-line options (for run)


def _toml(old: str, new: str) -> Callable[[Path], None]:
    return lambda d: edit_toml(d / "gisrun.toml", old, new)


def _write(name: str, text: str | bytes) -> Callable[[Path], None]:
    def write(d: Path) -> None:
        path = d / name
        path.unlink(missing_ok=True)
        if isinstance(text, bytes):
            path.write_bytes(text)
        else:
            path.write_text(text)
    return write


def _remove(name: str) -> Callable[[Path], None]:
    return lambda d: (d / name).unlink()


def _polygons(geoms: list, ids: list | None = None, **kw: object) -> Callable[[Path], None]:
    def write(d: Path) -> None:
        (d / "sub.gpkg").unlink()
        write_subcatchments(d / "sub.gpkg", geoms, ids=ids, **kw)
    return write


def _soil(codes: np.ndarray, **kw: object) -> Callable[[Path], None]:
    def write(d: Path) -> None:
        (d / "soil.tif").unlink()
        write_raster(d / "soil.tif", codes, **kw)
    return write


def _with_overrides(text: str) -> Callable[[Path], None]:
    def write(d: Path) -> None:
        (d / "over.csv").write_text(text)
        with open(d / "gisrun.toml", "a") as handle:
            handle.write('\n[parameters]\noverrides = "over.csv"\n')
    return write


def _append(text: str) -> Callable[[Path], None]:
    return lambda d: (d / "gisrun.toml").write_text((d / "gisrun.toml").read_text() + "\n" + text)


def _imp_grid(values: np.ndarray, **kw: object) -> Callable[[Path], None]:
    return lambda d: write_raster(d / "imp.tif", values.astype(np.float32), **kw)


def _both(*steps: Callable[[Path], object]) -> Callable[[Path], None]:
    def run_all(d: Path) -> None:
        for step in steps:
            step(d)
    return run_all


def _add_storm(name: str) -> Callable[[Path], None]:
    def add(d: Path) -> None:
        with open(d / "gisrun.toml", "a") as handle:
            handle.write(f'\n[[storms]]\nname = "{name}"\nkind = "uniform"\ndepth = 5\n'
                         'duration_min = 60\n')
    return add


def _rain_grid(toml: str = "", **kw: object) -> Callable[[Path], None]:
    """A second storm from a rain grid ``rain.nc`` written with ``write_rain_grid(**kw)``."""
    def add(d: Path) -> None:
        write_rain_grid(d / "rain.nc", **kw)
        with open(d / "gisrun.toml", "a") as handle:
            handle.write(f'\n[[storms]]\nname = "radar"\nkind = "rain_grid"\npath = "rain.nc"\n'
                         f"{toml}")
    return add


def _rain_tif(descriptions: list[str], toml: str = 'unit = "mm/h"\n',
              missing_at: tuple[int, int, int] | None = None) -> Callable[[Path], None]:
    """A second storm from a multi-band GeoTIFF ``rain.tif`` (25 m cells, 10 mm/h), each band
    described by the time given; -9999 (no nodata declared) at ``missing_at``."""
    def add(d: Path) -> None:
        values = np.full((len(descriptions), 4, 4), 10.0, dtype=np.float32)
        if missing_at is not None:
            values[missing_at] = -9999.0
        with rasterio.open(d / "rain.tif", "w", driver="GTiff", height=4, width=4,
                           count=len(descriptions), dtype="float32", crs=CRS,
                           transform=Affine(25.0, 0.0, X0, 0.0, -25.0, Y0 + 100.0)) as dst:
            dst.write(values)
            for band, text in enumerate(descriptions, start=1):
                dst.set_band_description(band, text)
        with open(d / "gisrun.toml", "a") as handle:
            handle.write(f'\n[[storms]]\nname = "radar"\nkind = "rain_grid"\npath = "rain.tif"\n'
                         f"{toml}")
    return add


def _output_linked_to(name: str) -> Callable[[Path], None]:
    """The output path is a second name (hard link) of an input file."""
    def link(d: Path) -> None:
        (d / "out").mkdir()
        os.link(d / name, d / "out" / "result.gpkg")
    return link


def _soil_becomes_folder(d: Path) -> None:
    (d / "soil.tif").unlink()
    (d / "soil.tif").mkdir()


_TWO = [square(0, 0, 50, 100), square(50, 0, 100, 100)]
_SOUTH_UP = Affine(10.0, 0.0, X0, 0.0, 10.0, Y0)  # origin at the south-west corner, rows go north


def _truncated_soil(d: Path) -> None:
    """A GeoTIFF whose header is whole but whose cell data stops half-way (a cut-off copy)."""
    (d / "soil.tif").unlink()
    fine = np.kron(soil_codes(), np.ones((20, 20), dtype=np.uint8))  # 0.5 m cells, same area
    write_raster(d / "soil.tif", fine, transform=Affine(0.5, 0.0, X0, 0.0, -0.5, Y0 + 100.0))
    data = (d / "soil.tif").read_bytes()
    (d / "soil.tif").write_bytes(data[: len(data) // 2])


def _soil_nodata_zero_also_mapped(d: Path) -> None:
    codes = soil_codes()
    codes[0, 0] = 0
    _soil(codes, nodata=0)(d)
    edit_toml(d / "gisrun.toml", '"1" = "A"', '"0" = "A"\n"1" = "A"')
_NODATA_WEST = soil_codes()
_NODATA_WEST[:, :5] = 255  # the whole of S1 has no soil data
_FLOAT_CODES = soil_codes().astype(np.float32)
_FLOAT_CODES[3, 3] = 1.5
_UNKNOWN_CODE = soil_codes()
_UNKNOWN_CODE[2, 2] = 7
_ROTATED = Affine(10.0, 2.0, X0, 0.0, -10.0, Y0 + 100.0)
_FAR_AWAY = Affine(10.0, 0.0, X0 + 50_000.0, 0.0, -10.0, Y0 + 100.0)

_GAUGE_STORM = ('[[storms]]\nname = "observed"\nkind = "gauges"\ngauges = "gauges.gpkg"\n'
                'id_field = "gauge_id"\nrecords = "{records}"\n')


def _gauge_records(depth: dict[str, list[float | None]], step_min: int = 5) -> str:
    lines = ["time," + ",".join(depth)]
    for k in range(len(next(iter(depth.values())))):
        minutes = 360 + (k + 1) * step_min
        cells = ["" if v[k] is None else f"{v[k]:g}" for v in depth.values()]
        lines.append(f"2026-05-14T{minutes // 60:02d}:{minutes % 60:02d}," + ",".join(cells))
    return "\n".join(lines) + "\n"


def _gauges(records: dict[str, str], at: tuple[tuple[float, float], ...] = (
        (X0 + 25, Y0 + 50), (X0 + 75, Y0 + 50))) -> Callable[[Path], None]:
    """Two invented gauges (over the tiny project unless ``at`` says where, in its CRS), the
    records files given, a gauge storm."""
    def write(d: Path) -> None:
        points = gpd.GeoDataFrame({"gauge_id": ["G1", "G2"]}, crs=CRS,
                                  geometry=[Point(x, y) for x, y in at])
        pyogrio.write_dataframe(points, d / "gauges.gpkg", layer="gauges")
        for name, text in records.items():
            (d / name).parent.mkdir(exist_ok=True)
            (d / name).write_text(text)
        target = "records" if len(records) > 1 else next(iter(records))
        edit_toml(d / "gisrun.toml", 'name = "steady"\nkind = "file"\npath = "storm.csv"\n',
                  _GAUGE_STORM.format(records=target)[len('[[storms]]\n'):])
    return write


_TWO_GAUGES = {"G1": [1.0, 2.0, 0.0], "G2": [0.5, 1.0, 0.0]}


def _reduced(table: str) -> Callable[[Path], None]:
    """The tiny project's storm as a 5 mm uniform design storm with an areal reduction table."""
    return _toml('kind = "file"\npath = "storm.csv"', 'kind = "uniform"\ndepth = 5\n'
                 f'duration_min = 60\nareal_reduction = {table}')


CASES: dict[str, Case] = {
    # --- missing and unreadable files --------------------------------------------------------
    "project file missing": Case(lambda d: None, "nothing.toml", target="nothing.toml"),
    "folder without project file": Case(_remove("gisrun.toml"), re.compile(r"holds no project")),
    "overlap share outside 0-1": Case(
        _toml('id_field = "code"', 'id_field = "code"\nmax_overlap_fraction = 2'),
        re.compile(r"\[subcatchments\]\.max_overlap_fraction")),
    "project file not TOML": Case(_write("gisrun.toml", "[project\nname = 1\n"), "gisrun.toml"),
    "project file not UTF-8": Case(_write("gisrun.toml", b"[project]\nname = '\xff\xfe'\n"),
                                   "gisrun.toml"),
    "subcatchment file missing": Case(_remove("sub.gpkg"), "sub.gpkg"),
    "subcatchment file is not a vector file": Case(_write("sub.gpkg", b"not a geopackage"),
                                                   "sub.gpkg"),
    "soil raster missing": Case(_remove("soil.tif"), "soil.tif"),
    "soil raster is garbage": Case(_write("soil.tif", b"II*\x00garbage"), "soil.tif"),
    "soil raster is a folder": Case(_soil_becomes_folder, "soil.tif"),
    "cover raster missing": Case(_remove("cover.tif"), "cover.tif"),
    "storm file missing": Case(_remove("storm.csv"), re.compile(r"storm\.csv.*does not exist")),
    "storm file not UTF-8": Case(_write("storm.csv", b"time_min,depth_mm\n5,\xff\n"), "storm.csv"),
    "override file missing": Case(
        _toml("[method]", '[parameters]\noverrides = "gone.csv"\n\n[method]'), "gone.csv"),
    "relative path that does not exist": Case(
        _toml('path = "sub.gpkg"', 'path = "../elsewhere/sub.gpkg"'), "elsewhere"),
    # --- subcatchment polygons ----------------------------------------------------------------
    "vector without CRS": Case(_polygons(_TWO, crs=None), re.compile(r"sub\.gpkg.*CRS")),
    "mixed geometry types": Case(
        _polygons([_TWO[0], LineString([(X0, Y0), (X0 + 50, Y0 + 50)])]), "id=S2"),
    "empty layer": Case(_polygons([], ids=[]), re.compile(r"sub\.gpkg.*no features")),
    "null id": Case(_polygons(_TWO, ids=["S1", None]), re.compile(r"sub\.gpkg.*code.*no id")),
    "empty id": Case(_polygons(_TWO, ids=["S1", "  "]), re.compile(r"code.*empty id")),
    "duplicate ids": Case(_polygons(_TWO, ids=["S1", "S1"]), re.compile(r"code.*'S1'")),
    "id field missing": Case(_toml('id_field = "code"', 'id_field = "cod"'),
                             re.compile(r"sub\.gpkg.*cod.*did you mean 'code'")),
    "layer missing": Case(_toml('layer = "subcatchments"', 'layer = "basins"'), "basins"),
    "empty geometry": Case(_polygons([_TWO[0], Polygon()]), "id=S2"),
    "zero-area polygon": Case(
        _polygons([_TWO[0], Polygon([(X0, Y0), (X0 + 10, Y0), (X0 + 20, Y0)])]), "id=S2"),
    # issue 15 item 12: overlapping subcatchments were accepted and their rain counted twice
    "subcatchments overlap above the share": Case(
        _polygons([square(0, 0, 50, 100), square(40, 0, 100, 100)]),
        re.compile(r"sub\.gpkg:id=S1,S2: these subcatchments overlap by 1000 m2 \(20\.00% "
                   r"of the smaller\).*max_overlap_fraction = 0\.01")),
    "unknown per-subcatchment method": Case(
        _both(_polygons(_TWO, how=["green_ampt", "hortn"]),
              _toml('id_field = "code"', 'id_field = "code"\nmethod_field = "how"')),
        re.compile(r"how.*id=S2.*did you mean 'horton'")),
    # issue 15 item 6: a number in the method field was silently the run's default method
    "per-subcatchment method is a number": Case(
        _both(_polygons(_TWO, how=[3, None]),
              _toml('id_field = "code"', 'id_field = "code"\nmethod_field = "how"')),
        re.compile(r"sub\.gpkg:how:id=S1: method 3(\.0)? is not a loss method name")),
    # --- rasters ------------------------------------------------------------------------------
    "soil raster without CRS": Case(_soil(soil_codes(), crs=None),
                                    re.compile(r"soil\.tif.*CRS")),
    "rotated soil raster": Case(_soil(soil_codes(), transform=_ROTATED),
                                re.compile(r"soil\.tif.*rotated")),
    "float soil codes": Case(_soil(_FLOAT_CODES), re.compile(r"soil\.tif.*non-integer.*1\.5")),
    "unknown soil code": Case(_soil(_UNKNOWN_CODE), re.compile(r"soil\.tif.*codes 7")),
    "unknown cover code": Case(
        lambda d: write_raster(d / "cover.tif", np.full((10, 10), 6, dtype=np.uint8)),
        re.compile(r"cover\.tif.*codes 6")),
    "cover raster without CRS": Case(
        lambda d: write_raster(d / "cover.tif", np.full((10, 10), 5, dtype=np.uint8), crs=None),
        re.compile(r"cover\.tif.*CRS")),
    "soil code mapped to an unknown class": Case(
        _toml('"2" = "B"', '"2" = "Q"'), re.compile(r"gisrun\.toml:\[soil\.codes\]\.\"2\".*'Q'")),
    "cover code mapped to an unknown class": Case(
        _toml('"5" = "open_space_good"', '"5" = "open_space_god"'),
        re.compile(r"\[cover\.codes\]\.\"5\".*did you mean 'open_space_good'")),
    "texture label under hydrologic soil groups": Case(
        _toml('"1" = "A"', '"1" = "silt loam"'), re.compile(r"\[soil\.codes\]\.\"1\"")),
    "all nodata over one subcatchment": Case(_soil(_NODATA_WEST, nodata=255), "S1"),
    # issue 15 item 5: with nothing to fill from, S1 reported 0 mm of rain and of runoff
    "all nodata over one subcatchment, rule dominant, no maximum": Case(
        _both(_soil(_NODATA_WEST, nodata=255), _toml("max_fraction = 0.25", "max_fraction = 1.0")),
        re.compile(r"soil\.tif.*subcatchment\(s\) S1 lie wholly outside.*'dominant'")),
    "raster does not overlap the polygons": Case(_soil(soil_codes(), transform=_FAR_AWAY),
                                                 re.compile(r"S1|soil\.tif")),
    # --- storms -------------------------------------------------------------------------------
    "negative rain": Case(_write("storm.csv", "time_min,depth_mm\n5,1\n10,-2\n"),
                          re.compile(r"storm\.csv:row 2.*negative")),
    "NaN rain": Case(_write("storm.csv", "time_min,depth_mm\n5,1\n10,nan\n"),
                     re.compile(r"storm\.csv:row 2")),
    "non-numeric rain": Case(_write("storm.csv", "time_min,depth_mm\n5,1\n10,lots\n"),
                             re.compile(r"storm\.csv:row 2.*lots")),
    "times not increasing": Case(_write("storm.csv", "time_min,depth_mm\n5,1\n10,1\n10,1\n"),
                                 re.compile(r"storm\.csv:row 3.*increase")),
    "rain column without units": Case(_write("storm.csv", "time_min,rain\n5,1\n10,1\n"),
                                      re.compile(r"storm\.csv:header.*'rain'")),
    "storm file empty": Case(_write("storm.csv", ""), re.compile(r"storm\.csv.*empty")),
    "storm file separated by semicolons": Case(
        _write("storm.csv", "time_min;depth_mm\n5;1\n10;1\n"),
        re.compile(r"storm\.csv:header.*separates them by ';': save it with commas")),
    "unknown storm kind": Case(_toml('kind = "file"', 'kind = "flie"'),
                               re.compile(r"gisrun\.toml:\[\[storms\]\] 1\.kind.*'file'")),
    "negative design storm depth": Case(
        _toml('kind = "file"\npath = "storm.csv"',
              'kind = "uniform"\ndepth = -5\nduration_min = 60'),
        re.compile(r"gisrun\.toml:\[\[storms\]\] 1\.depth")),
    "two storms with one name": Case(
        lambda d: (d / "gisrun.toml").write_text((d / "gisrun.toml").read_text() + (
            '\n[[storms]]\nname = "steady"\nkind = "uniform"\ndepth = 5\nduration_min = 60\n')),
        re.compile(r"\[\[storms\]\] 2.*'steady'")),
    "storm names that differ only in case": Case(
        _add_storm("Steady"),
        re.compile(r"\[\[storms\]\].*'steady' and 'Steady'.*'runoff_steady'")),
    "storm names that differ only in punctuation": Case(
        _add_storm("steady!"),
        re.compile(r"\[\[storms\]\].*'steady' and 'steady!'.*'runoff_steady'")),
    "rain grid not covering a subcatchment": Case(
        _rain_grid(width_m=50.0), re.compile(r"rain\.nc:precip: does not cover subcatchment "
                                             r"'S2' \(100\.0% of 'S2'")),
    "rain grid with an unknown time unit": Case(
        _rain_grid(time_units="fortnights since 2026-07-01"),
        re.compile(r"rain\.nc:time: time units 'fortnights since 2026-07-01' are not "
                   r"understood")),
    "rain grid step not the stated one": Case(
        _rain_grid("step_min = 10\n"),
        re.compile(r"rain\.nc:precip: has a step of 5 min but the project file says "
                   r"step_min = 10")),
    "rain grid with an irregular step": Case(
        _rain_grid(minutes=[5.0, 10.0, 20.0]),
        re.compile(r"rain\.nc:precip: has an irregular time step: 5 min at first, 10 min")),
    "rain grid with nodata over a subcatchment": Case(
        _rain_grid(nodata_at=(1, 2, 3)),
        re.compile(r"rain\.nc:precip: has no rain value \(nodata\) at time "
                   r"2026-07-01T00:10:00 in cell r2_c3 used by subcatchment 'S2'")),
    "rain grid with a whole step of nodata, fill_gaps on": Case(
        _rain_grid("fill_gaps = true\n", nodata_at=(1, slice(None), slice(None))),
        re.compile(r"rain\.nc:precip: has no rain value \(nodata\) at time "
                   r"2026-07-01T00:10:00 in cell r0_c0 used by subcatchment 'S1', nor any of "
                   r"the cells around it")),
    "rain grid times going back after the second step": Case(
        _rain_grid(minutes=[5.0, 10.0, 5.0]),  # was "irregular time step: ... -5 min"
        re.compile(r"rain\.nc:precip: times do not increase \(2026-07-01T00:10:00, then "
                   r"2026-07-01T00:05:00\)")),
    "rain grid band times with and without a UTC offset": Case(  # was an internal TypeError
        _rain_tif(["2026-07-01T00:05:00Z", "2026-07-01T00:10:00", "2026-07-01T00:15:00"]),
        re.compile(r"rain\.tif: has times with and without a UTC offset \(2026-07-01T00:05:00"
                   r"\+00:00, step 2 2026-07-01T00:10:00\)")),
    "rain grid with -9999 for missing data, no nodata declared": Case(  # said only "-0.83325 m"
        _rain_tif(["2026-07-01T00:05:00", "2026-07-01T00:10:00"], missing_at=(1, 2, 3)),
        re.compile(r"rain\.tif: has rain -0\.83325 m < 0 \(stored value -9999\) at time "
                   r"2026-07-01T00:10:00 in cell r2_c3; .* declare a value that marks missing "
                   r"data as the file's nodata")),
    "rain grid's own CRS and another in the project file": Case(  # the project's was ignored
        _rain_grid('crs = "EPSG:32616"\n'),
        re.compile(r"rain\.nc:precip: has its own CRS \(WGS 84 / UTM zone 17N\) but the project "
                   r"file says crs = 'EPSG:32616', which puts the grid [\d,]+ m away; leave crs "
                   r"out")),
    "rain grid in an unknown unit": Case(
        _rain_grid(units="furlongs"), re.compile(r"rain\.nc:precip: rain unit 'furlongs'")),
    # --- parameter overrides ------------------------------------------------------------------
    "zero conductivity": Case(_with_overrides("soil_class,ks_mm_per_h\nA,0\n"),
                              re.compile(r"over\.csv:line 2:ks_mm_per_h")),
    "negative conductivity": Case(_with_overrides("soil_class,ks_mm_per_h\nA,-3\n"),
                                  re.compile(r"over\.csv:line 2:ks_mm_per_h: value -3 ")),
    "porosity above one": Case(_with_overrides("soil_class,effective_porosity\nA,1.5\n"),
                               re.compile(r"over\.csv:line 2:effective_porosity")),
    "negative porosity": Case(_with_overrides("soil_class,total_porosity\nB,-0.1\n"),
                              re.compile(r"over\.csv:line 2:total_porosity")),
    "moisture deficit above one": Case(_with_overrides("soil_class,moisture_deficit\nA,1.2\n"),
                                       re.compile(r"over\.csv:line 2:moisture_deficit")),
    "negative moisture deficit": Case(
        _with_overrides("# site tests\nsoil_class,moisture_deficit\nA,0.2\nB,-0.05\n"),
        re.compile(r"over\.csv:line 4:moisture_deficit")),
    "override range low above high": Case(
        _with_overrides("soil_class,ks_mm_per_h_low,ks_mm_per_h_high\nA,9,1\n"),
        re.compile(r"over\.csv:line 2:ks_mm_per_h_low")),
    "override range without its low end": Case(
        _with_overrides("soil_class,ks_mm_per_h_high\nA,9\n"),
        re.compile(r"over\.csv:ks_mm_per_h_high")),
    "override range missing the value used": Case(
        _both(_with_overrides("soil_class,ks_mm_per_h_low,ks_mm_per_h_high\nA,1,2\n"),
              _toml("[method]", "[uncertainty]\nsamples = 4\n\n[method]")),
        re.compile(r"over\.csv:line 2:ks_m_per_s_low/_high")),
    # --- uncertainty runs ---------------------------------------------------------------------
    "uncertainty with one sample": Case(_toml("[method]", "[uncertainty]\nsamples = 1\n\n[method]"),
                                        re.compile(r"\[uncertainty\]\.samples")),
    "uncertainty percentiles not ascending": Case(
        _toml("[method]", "[uncertainty]\nsamples = 4\npercentiles = [50, 10]\n\n[method]"),
        re.compile(r"\[uncertainty\]\.percentiles")),
    "uncertainty with composite parameters": Case(
        _toml('name = "green_ampt"', 'name = "green_ampt"\ncombine = "composite"\n\n'
              '[uncertainty]\nsamples = 4'),
        re.compile(r"\[uncertainty\]")),
    "uncertainty tornado id unknown": Case(
        _toml("[method]", '[uncertainty]\nsamples = 4\nsensitivity_subcatchments = ["S9"]\n'
              "\n[method]"),
        re.compile(r"\[uncertainty\]\.sensitivity_subcatchments.*S9")),
    "override value not a number": Case(_with_overrides("soil_class,suction_head_mm\nA,deep\n"),
                                        re.compile(r"over\.csv:line 2:suction_head_mm")),
    "unknown override column": Case(_with_overrides("soil_class,ks_mmh\nA,3\n"),
                                    re.compile(r"over\.csv:ks_mmh")),
    "override row without a key": Case(_with_overrides("note,ks_mm_per_h\nx,3\n"),
                                       re.compile(r"over\.csv:line 2")),
    # --- project file keys and types ----------------------------------------------------------
    "unknown key": Case(_toml('id_field = "code"', 'idfield = "code"'),
                        re.compile(r"\[subcatchments\]\.idfield.*did you mean 'id_field'")),
    "unknown table": Case(_toml("[nodata]", "[no_data]"),
                          re.compile(r"gisrun\.toml:\[no_data\].*did you mean 'nodata'")),
    "wrong type for a number": Case(_toml("time_step_min = 5", 'time_step_min = "five"'),
                                    re.compile(r"\[project\]\.time_step_min")),
    "wrong type for a path": Case(_toml('path = "soil.tif"', "path = 3"),
                                  re.compile(r"\[soil\]\.path")),
    "codes not a table": Case(_toml('[soil.codes]\n"1" = "A"\n"2" = "B"\n', ""),
                              re.compile(r"\[soil\]\.codes")),
    "code key not a number": Case(_toml('"1" = "A"', '"one" = "A"'),
                                  re.compile(r"\[soil\.codes\]\.one")),
    "unknown method with a near miss": Case(_toml('name = "green_ampt"', 'name = "green_amp"'),
                                            re.compile(r"\[method\]\.name.*'green_ampt'")),
    "saturation outside 0-1": Case(
        _toml('classification = "hydrologic_soil_group"',
              'classification = "hydrologic_soil_group"\ninitial_saturation = 1.5'),
        re.compile(r"\[soil\]\.initial_saturation")),
    "negative time step": Case(_toml("time_step_min = 5", "time_step_min = -5"),
                               re.compile(r"time_step_min")),
    "unknown lumped parameter choice": Case(
        _toml("[method]", '[method]\nlumped_parameters = "area_weightd"'),
        re.compile(r"\[method\]\.lumped_parameters.*did you mean 'area_weighted'")),
    "unknown series store": Case(_toml("time_step_min = 5", 'time_step_min = 5\nseries = "parqet"'),
                                 re.compile(r"\[project\]\.series.*did you mean 'parquet'")),
    # --- issue 14: inputs that stopped with an internal error or a misleading line -----------
    "south-up soil raster": Case(_soil(soil_codes()[::-1], transform=_SOUTH_UP),
                                 re.compile(r"soil\.tif.*south-up")),
    "truncated soil GeoTIFF": Case(_truncated_soil,
                                   re.compile(r"soil\.tif.*cannot be read.*ends early")),
    "soil nodata value also a mapped code": Case(
        _soil_nodata_zero_also_mapped,
        re.compile(r"soil\.tif.*nodata value 0 is also a class code")),
    "20-digit raster code": Case(_toml('"1" = "A"', '"1" = "A"\n"12345678901234567890" = "A"'),
                                 re.compile(r"\[soil\.codes\]\.12345678901234567890.*64 bits")),
    "storm header names time_min twice": Case(
        _write("storm.csv", "time_min,time_min\n5,1\n10,1\n"),
        re.compile(r"storm\.csv:header: names the column 'time_min' twice")),
    "override column twice": Case(
        _with_overrides("soil_class,ks_mm_per_h,ks_mm_per_h\nA,3,4\n"),
        re.compile(r"over\.csv:line 1:ks_mm_per_h: column appears twice")),
    "UTM coordinates labelled EPSG:4326": Case(
        _polygons(_TWO, crs="EPSG:4326"), re.compile(r"sub\.gpkg.*id=S1.*outside longitude")),
    "NaN vertex": Case(_polygons([_TWO[0], Polygon([(X0, Y0), (X0 + 50, Y0), (np.nan, Y0 + 9),
                                                     (X0, Y0 + 100)])]),
                       re.compile(r"sub\.gpkg.*id=S2.*NaN or infinite")),
    "infinite vertex": Case(_polygons([_TWO[0], Polygon([(X0, Y0), (X0 + 50, Y0),
                                                          (np.inf, Y0 + 9), (X0, Y0 + 100)])]),
                            re.compile(r"sub\.gpkg.*id=S2.*NaN or infinite")),
    "coordinates of 1e30": Case(
        _polygons([_TWO[0], Polygon([(X0, Y0), (1e30, Y0), (1e30, Y0 + 9), (X0, Y0 + 9)])]),
        re.compile(r"sub\.gpkg.*id=S2.*off the Earth")),
    "storm row at 1e12 minutes": Case(_write("storm.csv", "time_min,depth_mm\n5,1\n1e12,1\n"),
                                      re.compile(r"\[\[storms\]\] 1 \(steady\).*2e\+11 steps")),
    "uniform storm of 1e9 minutes": Case(
        _toml('kind = "file"\npath = "storm.csv"', 'kind = "uniform"\ndepth = 5\n'
              "duration_min = 1e9"), re.compile(r"\[\[storms\]\] 1\.duration_min.*2e\+08 steps")),
    "areal reduction on a storm file": Case(
        _toml('path = "storm.csv"\n', 'path = "storm.csv"\n'
              'areal_reduction = { relation = "fixed_factor", factor = 0.9 }\n'),
        re.compile(r"\[\[storms\]\] 1\.areal_reduction: does not apply to kind 'file': "
                   r"areal reduction applies to point design depths")),
    "unknown areal reduction relation": Case(
        _reduced('{ relation = "arr2020", over = "basin" }'),
        re.compile(r"areal_reduction\.relation: unknown areal reduction relation 'arr2020'")),
    "areal reduction without its AEP": Case(
        _reduced('{ relation = "arr2019_short_duration", over = "basin" }'),
        re.compile(r"areal_reduction\.annual_exceedance_probability: relation "
                   r"'arr2019_short_duration' needs it")),
    "areal reduction over an unknown area": Case(
        _reduced('{ relation = "factor_table", table = "f.csv", over = "town" }'),
        re.compile(r"areal_reduction\.over: unknown areal reduction scope 'town'")),
    "areal reduction factor table missing": Case(
        _reduced('{ relation = "factor_table", table = "f.csv", over = "basin" }'),
        re.compile(r"areal_reduction\.table: .*f\.csv: cannot be read: it does not exist")),
    "subcatchment outside the areal reduction table": Case(
        _both(_reduced('{ relation = "factor_table", table = "f.csv", over = "subcatchment" }'),
              _write("f.csv", "area_km2,duration_min,factor\n1,30,0.9\n10,30,0.8\n"
                     "1,120,0.95\n10,120,0.85\n")),
        re.compile(r"storm 'steady', subcatchment 'S1' \(0\.005 km2, 60 min\): "
                   r"factor_table: f\.csv: has areas 1-10 km2")),
    "250-character storm name": Case(_toml('name = "steady"', f'name = "{"s" * 250}"'),
                                     re.compile(r"\[\[storms\]\].*250 characters")),
    "output named .shp": Case(_toml('output = "out/result.gpkg"', 'output = "out/result.shp"'),
                              re.compile(r"\[project\]\.output.*result\.shp.*not a \.gpkg")),
    "output without an extension": Case(
        _toml('output = "out/result.gpkg"', 'output = "out/result"'),
        re.compile(r"\[project\]\.output.*out/result\).*\.gpkg")),
    "--output named .shp": Case(lambda d: None, re.compile(r"--output.*x\.shp.*\.gpkg"),
                                commands=("run",), extra=("--output", "x.shp")),
    "cover raster over the west half only": Case(
        lambda d: write_raster(d / "cover.tif", np.full((10, 5), 5, dtype=np.uint8)),
        re.compile(r"cover\.tif.*covers only part of subcatchments S2")),
    "infinite time step": Case(_toml("time_step_min = 5", "time_step_min = inf"),
                               re.compile(r"gisrun\.toml:\[project\]\.time_step_min: is inf")),
    "infinite memory budget": Case(
        _toml("time_step_min = 5", "time_step_min = 5\nmemory_budget_mb = inf"),
        re.compile(r"\[project\]\.memory_budget_mb: is inf")),
    "curve number Ia/S of 0.1": Case(
        _with_overrides("soil_class,initial_abstraction_ratio\nA,0.1\n"),
        re.compile(r"over\.csv:line 2:initial_abstraction_ratio: value 0\.1")),
    # --- issue 18: impervious-share grid ------------------------------------------------------
    "impervious grid without its scale": Case(
        _append('[impervious]\npath = "imp.tif"\n'),
        re.compile(r"gisrun\.toml:\[impervious\]\.scale: is missing.*\"percent\"")),
    "impervious scale misspelt": Case(
        _append('[impervious]\npath = "imp.tif"\nscale = "percnt"\n'),
        re.compile(r"\[impervious\]\.scale.*did you mean 'percent'")),
    "impervious grid missing": Case(
        _append('[impervious]\npath = "imp.tif"\nscale = "percent"\n'),
        re.compile(r"imp\.tif.*file not found")),
    "impervious value above 100 percent": Case(
        _both(_imp_grid(np.full((10, 10), 140.0)),
              _append('[impervious]\npath = "imp.tif"\nscale = "percent"\n')),
        re.compile(r"imp\.tif.*value 140, outside 0-100 for \[impervious\] scale = 'percent'")),
    "impervious percent grid read as a fraction": Case(
        _both(_imp_grid(np.full((10, 10), 40.0)),
              _append('[impervious]\npath = "imp.tif"\nscale = "fraction"\n')),
        re.compile(r"imp\.tif.*value 40, outside 0-1")),
    "impervious grid mostly nodata": Case(
        _both(_imp_grid(np.where(np.arange(10)[None, :] < 4, -9.0, 30.0) + np.zeros((10, 1)),
                        nodata=-9.0),
              _append('[impervious]\npath = "imp.tif"\nscale = "percent"\n')),
        re.compile(r"imp\.tif.*subcatchments S1 \(80\.0%\) above \[nodata\] max_fraction")),
    "disconnected share above one": Case(
        _append("[impervious]\ndisconnected_fraction = 1.5\n"),
        re.compile(r"\[impervious\]\.disconnected_fraction: is 1\.5, outside \[0, 1\]")),
    "disconnected share by an unknown cover": Case(
        _append("[impervious.disconnected_by_cover]\nopen_spcae_good = 0.5\n"),
        re.compile(r"disconnected_by_cover\.open_spcae_good.*did you mean 'open_space_good'")),
    "run-on target misspelt": Case(
        _append('[impervious]\ndisconnected_fraction = 0.5\nrunon_to = "subcatchmnt"\n'),
        re.compile(r"\[impervious\]\.runon_to.*did you mean 'subcatchment'")),
    "disconnection with composite parameters": Case(
        _both(_toml('name = "green_ampt"', 'name = "green_ampt"\ncombine = "composite"'),
              _append("[impervious]\ndisconnected_fraction = 0.5\n")),
        re.compile(r"\[method\]\.combine: is 'composite'.*use combine = \"units\"")),
    "disconnection with uncertainty bands": Case(
        _append("[impervious]\ndisconnected_fraction = 0.5\n[uncertainty]\nsamples = 20\n"),
        re.compile(r"gisrun\.toml:\[uncertainty\]: runs each soil x cover part on its own")),
    "disconnected share in the layer not a number": Case(
        _both(_polygons(_TWO, roofs=["lots", "0.2"]),
              _append('[impervious]\ndisconnected_field = "roofs"\n')),
        re.compile(r"sub\.gpkg:roofs:id=S1: disconnected share 'lots' is not a number")),
    "disconnected share field missing": Case(
        _append('[impervious]\ndisconnected_field = "roof"\n'), re.compile(r"roof")),
    "empty impervious table": Case(_append('[impervious]\nrunon_to = "unit"\n'),
                                   re.compile(r"\[impervious\]: names neither")),
    # --- rain gauges --------------------------------------------------------------------------
    "gauge record missing": Case(
        _gauges({"records.csv": _gauge_records({"G1": [1.0, 2.0, 0.0]})}),
        re.compile(r"records.*has no record for gauge 'G2'")),
    "unknown gauge id": Case(
        _gauges({"records.csv": _gauge_records({**_TWO_GAUGES, "G9": [1.0, 1.0, 1.0]})}),
        re.compile(r"gauge id 'G9' is not in gauges\.gpkg")),
    "gauge record gap without fill_gaps": Case(
        _gauges({"records.csv": _gauge_records({"G1": [1.0, None, 0.0], "G2": [1, 1, 0]})}),
        re.compile(r"records\.csv:G1: has no value at 2026-05-14T06:10.*fill_gaps = true")),
    "gauge records of mismatched step": Case(
        _gauges({"records/G1.csv": _gauge_records({"G1": [1.0, 2.0, 0.0]}),
                 "records/G2.csv": _gauge_records({"G2": [1.0, 2.0, 0.0]}, step_min=10)}),
        re.compile(r"G2\.csv: has a 10-min step.*mismatched step")),
    "gauges in degrees in a layer that says metres (a CRS mix-up)": Case(
        _gauges({"records.csv": _gauge_records(_TWO_GAUGES)}, at=((-80.5, 39.6), (-80.4, 39.6))),
        re.compile(r"\[\[storms\]\] 1\.gauges: gauge 'G1' lies 4,\d{3},\d{3} CRS units from the "
                   r"subcatchments.*check the gauge layer's CRS")),
    # --- outputs ------------------------------------------------------------------------------
    "output under a regular file": Case(
        _both(_write("blocker", "a file, not a folder"),
              _toml('output = "out/result.gpkg"', 'output = "blocker/result.gpkg"')),
        re.compile(r"blocker: is a file, not a folder"), commands=("run",)),
    "output path is a folder": Case(
        _both(lambda d: (d / "out" / "result.gpkg").mkdir(parents=True),
              _toml("[project]", "[project]")),
        re.compile(r"result\.gpkg: is a folder"), commands=("run",), extra=("--overwrite",)),
    "output exists without --overwrite": Case(
        _both(lambda d: (d / "out").mkdir(), _write("out/result.gpkg", "earlier result")),
        re.compile(r"result\.gpkg.*already exists.*--overwrite"), commands=("run",)),
    "output is the soil raster": Case(
        _toml('output = "out/result.gpkg"', 'output = "soil.tif"'),
        # refused as an input of the run, or first as not a GeoPackage name: either stops it
        re.compile(r"soil\.tif(: would replace an input of this run \(soil raster|\): is not "
                   r"a \.gpkg)"),
        extra=("--overwrite",)),
    "output is the subcatchment file": Case(
        _toml('output = "out/result.gpkg"', 'output = "sub.gpkg"'),
        re.compile(r"sub\.gpkg: would replace an input of this run \(subcatchment file"),
        extra=("--overwrite",)),
    "output is the project file": Case(
        _toml('output = "out/result.gpkg"', 'output = "gisrun.toml"'),
        re.compile(r"gisrun\.toml(: would replace an input of this run \(project file|\): is "
                   r"not a \.gpkg)"),
        extra=("--overwrite",)),
    "output is a hard link to the cover raster": Case(
        _output_linked_to("cover.tif"),
        re.compile(r"result\.gpkg: would replace an input of this run \(cover raster"),
        extra=("--overwrite",)),
    # issue 18: soil polygon layers
    "soil layer class field missing": Case(
        soil_layer(field="soil_group"), re.compile(r"soil\.gpkg:soils:group: no such field")),
    "soil layer class field of a date type": Case(
        soil_layer(field="group2", group=np.array(["2020-01-01", "2021-01-01"],
                                                  dtype="datetime64[ms]")),
        re.compile(r"soil\.gpkg:soils:group: is a datetime64.*text or whole-number field")),
    "soil layer class unknown": Case(
        soil_layer(labels=["A", "Q"]), re.compile(r"soil\.gpkg:soils:group: holds 'Q'")),
    "soil layer code missing from the code table": Case(
        soil_layer(labels=[1, 7], keep_codes=True),
        re.compile(r"soil\.gpkg:soils:group: holds codes 7 that .*\[soil\]\.codes")),
    "soil layer polygons overlap": Case(
        soil_layer([square(0, 0, 60, 100), square(50, 0, 100, 100)]),
        re.compile(r"soil\.gpkg:soils:fid=1,2: features 1 and 2 overlap by 1000 m2")),
    "soil layer of lines": Case(
        soil_layer([LineString([(X0, Y0), (X0 + 50, Y0 + 50)]),
                    LineString([(X0 + 50, Y0), (X0 + 99, Y0 + 50)])]),
        re.compile(r"soil\.gpkg:soils:fid=1.*are not polygons")),
    "soil layer leaves a subcatchment uncovered": Case(
        soil_layer([square(0, 0, 50, 100), square(50, 0, 60, 100)]),
        re.compile(r"soil\.gpkg:soils: nodata or outside-layer \(gap\) share.*S2 \(80\.0%\)"
                   r".*draw polygons over the gaps")),
    "soil layer name unknown": Case(
        _both(soil_layer(), _toml('layer = "soils"', 'layer = "soil"')),
        re.compile(r"soil\.gpkg:soil: no such layer")),
}

PARAMS = [pytest.param(name, command, id=f"{command}: {name}")
          for name, case in CASES.items() for command in case.commands]


def test_catalogue_is_large_enough():
    assert len(CASES) >= 40


@pytest.mark.parametrize(("name", "command"), PARAMS)
def test_bad_input_gets_one_clear_line(tmp_path, capsys, name, command):
    case = CASES[name]
    folder = tmp_path / "project"
    make_project(folder)
    case.breaks(folder)
    before = _files(folder)
    args = [command, str(folder / case.target), *(case.extra if command == "run" else ())]
    if command == "run":
        args += ["--no-extras", "--quiet"]
    code, out, err = run_cli(capsys, args)
    assert_one_clear_error(code, err + out, case.culprit)
    if command == "run":  # nothing was written or left behind
        assert _files(folder) == before


#: Cases that only ``run`` can refuse: they depend on its command-line options.
RUN_OPTIONS_ONLY = {"output exists without --overwrite": "check has no --overwrite",
                    "--output named .shp": "check has no --output"}


@pytest.mark.parametrize("name", [n for n, c in CASES.items()
                                  if "run" in c.commands and n not in RUN_OPTIONS_ONLY])
def test_check_finds_what_run_refuses(tmp_path, capsys, name):
    """Wherever run exits 2, check (which reads the same project) must fail too."""
    case = CASES[name]
    folder = tmp_path / "project"
    make_project(folder)
    case.breaks(folder)
    code, _, err = run_cli(capsys, ["run", str(folder / case.target), *case.extra,
                                    "--no-extras", "--quiet"])
    assert code == 2, err
    code, out, err = run_cli(capsys, ["check", str(folder / case.target)])
    assert code == 2, (name, err + out)
    assert any(line.startswith("gisrun: error:") for line in err.splitlines()), err


def _files(folder: Path) -> dict[str, bytes | None]:
    """Every file's bytes and every folder (None) under ``folder``: nothing may be left behind."""
    return {str(p.relative_to(folder)): p.read_bytes() if p.is_file() else None
            for p in sorted(folder.rglob("*"))}


# --- problems that warn and let the run go on -------------------------------------------------

def _bowtie_s2(d: Path) -> None:
    x, y = X0 + 50, Y0
    bowtie = Polygon([(x, y), (x + 50, y + 100), (x + 50, y), (x, y + 100)])
    (d / "sub.gpkg").unlink()
    write_subcatchments(d / "sub.gpkg", [_TWO[0], bowtie])


def _ring_with_spike_s1(d: Path) -> None:
    x, y = X0, Y0
    spike = Polygon([(x, y), (x + 50, y), (x + 50, y + 100), (x + 25, y + 100), (x + 25, y + 120),
                     (x + 25, y + 100), (x, y + 100)])
    (d / "sub.gpkg").unlink()
    write_subcatchments(d / "sub.gpkg", [spike, _TWO[1]])


def _absurd_storm(d: Path) -> None:
    (d / "storm.csv").write_text("time_min,depth_mm\n30,600\n60,10\n")


def _override_for_absent_class(d: Path) -> None:
    _with_overrides("soil_class,ks_mm_per_h\nC,2.5\n")(d)


WARNING_CASES = {
    # the run's summary printed "gisrun.toml:[] 2" (rich read "[[storms]]" as markup)
    "rain grid gap filled from the cells around it": (
        _rain_grid("fill_gaps = true\n", nodata_at=(1, 2, 3)),
        re.compile(r"gisrun\.toml:\[\[storms\]\] 2: 1 missing value\(s\) of the rain grid .* "
                   r"the first at time 2026-07-01T00:10:00 in cell r2_c3")),
    "self-intersecting polygon is repaired": (_bowtie_s2, re.compile(r"sub\.gpkg.*repaired.*S2")),
    "invalid ring with a spike is repaired": (_ring_with_spike_s1,
                                              re.compile(r"sub\.gpkg.*repaired.*S1")),
    "absurd storm depth": (_absurd_storm, re.compile(r"storm\.csv.*world record")),
    # issue 15 item 12: an overlap below the share is reported (a warning and a run_info row)
    "subcatchments overlap a little": (
        _polygons([square(0, 0, 50, 100), square(49.9, 0, 100, 100)]),
        re.compile(r"sub\.gpkg: subcatchments S1 and S2 overlap by 10 m2 \(0\.20% of the "
                   r"smaller\)")),
    # issue 15 item 6: a rain scale of 1e6 gave 10,000,000 mm of rain without a word
    "rain scale makes the storm implausible": (
        _both(_polygons(_TWO, factor=[1e6, 1.0]),
              lambda d: (d / "gisrun.toml").write_text((d / "gisrun.toml").read_text()
                                                       + '\n[rain_scale]\nfield = "factor"\n')),
        re.compile(r"sub\.gpkg:factor:id=S1 \(rain scale 1e\+06 x storm 'steady'\).*world record")),
    "override for a class not in the project": (_override_for_absent_class,
                                                re.compile(r"over\.csv:line 2.*matches no unit")),
    "soil layer polygon is repaired": (
        # a spike into the square: make_valid keeps the square, drops the spike (no area)
        soil_layer([square(0, 0, 50, 100), Polygon([(X0 + 50, Y0), (X0 + 100, Y0),
                                                    (X0 + 100, Y0 + 100), (X0 + 50, Y0 + 100),
                                                    (X0 + 50, Y0 + 50), (X0 + 70, Y0 + 50),
                                                    (X0 + 50, Y0 + 50)])]),
        re.compile(r"soil\.gpkg:soils: repaired 1 invalid polygon.*feature ids \[2\]")),
}


@pytest.mark.parametrize("name", list(WARNING_CASES))
def test_warning_lets_the_run_finish_and_is_recorded(tmp_path, capsys, name):
    breaks, pattern = WARNING_CASES[name]
    folder = tmp_path / "project"
    make_project(folder)
    breaks(folder)
    code, out, err = run_cli(capsys, ["check", str(folder)])
    assert code == 0, err
    assert any(pattern.search(line) for line in warning_lines(err)), err
    target = tmp_path / "result.gpkg"
    with warnings.catch_warnings(record=True) as shown:
        warnings.simplefilter("always")
        code, out, err = run_cli(capsys, ["run", str(folder), "--output", str(target),
                                          "--no-extras"])
    assert code == 0, err
    assert "Traceback" not in err + out
    # the summary prints it; Python did too, with gisrun's file, line and source line
    assert not [w for w in shown if issubclass(w.category, GisrunWarning)]
    assert pattern.search(" ".join(out.split())), out  # the summary shows it too
    info = pyogrio.read_dataframe(target, layer="run_info")
    noted = info.loc[info["key"] == "warning", "value"].tolist()
    assert any(pattern.search(note) for note in noted), noted


def test_repaired_polygon_keeps_its_area(tmp_path, capsys):
    # the bowtie over x 50-100 m is two triangles of 50 m x 50 m / 2 = 1250 m2 each
    folder = tmp_path / "project"
    make_project(folder)
    _bowtie_s2(folder)
    target = tmp_path / "result.gpkg"
    code, _, err = run_cli(capsys, ["run", str(folder), "--output", str(target), "--no-extras",
                                    "--quiet"])
    assert code == 0, err
    out = pyogrio.read_dataframe(target, layer="runoff_steady", read_geometry=False)
    area = dict(zip(out["subcatchment_id"], out["area_m2"], strict=True))
    assert area["S2"] == pytest.approx(2500.0, rel=1e-9)
    assert area["S1"] == pytest.approx(5000.0, rel=1e-9)


# --- geographic CRS: runs with geodesic areas -------------------------------------------------

def test_geographic_polygons_run_with_geodesic_areas(tmp_path, capsys):
    import geopandas as gpd
    from pyproj import Geod

    folder = tmp_path / "project"
    make_project(folder)
    lonlat = gpd.GeoSeries(_TWO, crs="EPSG:32617").to_crs("EPSG:4326")
    _polygons(list(lonlat), crs="EPSG:4326")(folder)
    target = tmp_path / "result.gpkg"
    code, _, err = run_cli(capsys, ["run", str(folder), "--output", str(target), "--no-extras",
                                    "--quiet"])
    assert code == 0, err
    out = pyogrio.read_dataframe(target, layer="runoff_steady", read_geometry=False)
    geod = Geod(ellps="WGS84")
    expected = [abs(geod.geometry_area_perimeter(g)[0]) for g in lonlat]
    np.testing.assert_allclose(out["area_m2"], expected, rtol=1e-6)
    # a 50 m x 100 m UTM square on the central meridian is 5000 / 0.9996**2 m2 on the ellipsoid
    # (UTM scale factor 0.9996, common practice), never a planar area in square degrees
    np.testing.assert_allclose(out["area_m2"], 5000.0 / 0.9996**2, rtol=1e-3)


# --- options that need an extra that is not installed ------------------------------------------

@pytest.mark.parametrize("option", [("--workers", "2"), ("--scheduler", "synchronous"),
                                    ("--scheduler", "tcp://127.0.0.1:8786")])
def test_dask_options_without_dask_get_one_clear_line(tmp_path, capsys, monkeypatch, option):
    folder = tmp_path / "project"
    make_project(folder)
    for name in ("dask", "distributed"):  # as if the dask extra were not installed
        monkeypatch.setitem(sys.modules, name, None)
    before = _files(folder)
    code, out, err = run_cli(capsys, ["run", str(folder), *option, "--quiet"])
    assert_one_clear_error(code, err + out, re.compile(rf"{option[0]}: needs dask.*gisrun\[dask\]"))
    assert _files(folder) == before and not (folder / "out").exists()


# --- outputs: a full disk, and the checksum rows ----------------------------------------------

def _mounted_tmpfs(tmp_path: Path, size: str):
    """A real file system of ``size`` (tmpfs). Mounting needs root (as in CI), else skip."""
    if os.geteuid() != 0:
        pytest.skip("mounting a small file system needs root")
    mount = tmp_path / "small"
    mount.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(mount)],
                          capture_output=True, check=False)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.decode().strip()}")
    yield mount
    subprocess.run(["umount", str(mount)], check=True)


@pytest.fixture
def small_disk(tmp_path):
    """128 KiB: too small for the tiny project's GeoPackage."""
    yield from _mounted_tmpfs(tmp_path, "128k")


@pytest.fixture
def disk_for_the_geopackage_only(tmp_path):
    """256 KiB: the tiny project's GeoPackage fits, its maps and rasters do not."""
    yield from _mounted_tmpfs(tmp_path, "256k")


def test_full_disk_leaves_no_file_and_keeps_the_earlier_output(tmp_path, capsys, small_disk):
    """GDAL's own failure on a full file system ("database or disk is full"), not a mock."""
    folder = tmp_path / "project"
    make_project(folder)
    target = small_disk / "result.gpkg"
    target.write_bytes(b"earlier output")
    code, out, err = run_cli(capsys, ["run", str(folder), "--output", str(target), "--overwrite",
                                      "--no-extras", "--quiet"])
    line = assert_one_clear_error(code, err + out, "result.gpkg")
    assert "the disk is full" in line and "free disk space" in line
    assert target.read_bytes() == b"earlier output"
    assert sorted(p.name for p in small_disk.iterdir()) == ["result.gpkg"]


def test_full_disk_while_writing_extras_leaves_nothing(tmp_path, capsys,
                                                      disk_for_the_geopackage_only):
    folder = tmp_path / "project"
    make_project(folder)
    target = disk_for_the_geopackage_only / "result.gpkg"
    code, out, err = run_cli(capsys, ["run", str(folder), "--output", str(target), "--quiet"])
    line = assert_one_clear_error(code, err + out, "result_files")
    assert "No space left on device" in line and "free disk space" in line
    assert list(disk_for_the_geopackage_only.iterdir()) == []


def test_changing_an_input_changes_its_checksum_row(tmp_path, capsys):
    import hashlib

    folder = tmp_path / "project"
    make_project(folder)

    def checksums(target: Path) -> dict[str, str]:
        code, _, err = run_cli(capsys, ["run", str(folder), "--output", str(target),
                                        "--no-extras", "--quiet"])
        assert code == 0, err
        info = pyogrio.read_dataframe(target, layer="run_info")
        return {k: v for k, v in zip(info["key"], info["value"], strict=True)
                if k.startswith("sha256:")}

    first = checksums(tmp_path / "a.gpkg")
    assert first["sha256:storm.csv"] == hashlib.sha256((folder / "storm.csv").read_bytes()
                                                       ).hexdigest()
    assert {"sha256:gisrun.toml", "sha256:sub.gpkg", "sha256:soil.tif",
            "sha256:cover.tif"} <= set(first)
    (folder / "storm.csv").write_text("time_min,intensity_mm_per_h\n0,0\n30,20\n60,20\n")
    second = checksums(tmp_path / "b.gpkg")
    assert second["sha256:storm.csv"] != first["sha256:storm.csv"]
    unchanged = {k: v for k, v in first.items() if k != "sha256:storm.csv"}
    assert {k: second[k] for k in unchanged} == unchanged
