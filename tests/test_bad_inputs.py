"""A catalogue of broken inputs: each gets one clear line, exit 2 and no traceback.

Every case starts from the tiny valid project of :mod:`bad_inputs_helpers` (invented data built
in ``tmp_path``), breaks one thing, and runs ``gisrun check`` and/or ``gisrun run`` in-process.
The answer must be exit code 2 and exactly one ``gisrun: error:`` line on standard error that
names the culprit (file, layer, field, row or id) and says what to do after a ``;``.
Problems that should not stop a run (repairable polygons, implausible storm depths, an override
row that matches nothing) are warnings, printed by ``check`` and recorded in the run table.
"""

from __future__ import annotations

import errno
import os
import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyogrio
import pytest
from affine import Affine
from bad_inputs_helpers import (
    X0,
    Y0,
    assert_one_clear_error,
    edit_toml,
    make_project,
    run_cli,
    soil_codes,
    square,
    warning_lines,
    write_raster,
    write_subcatchments,
)
from shapely.geometry import LineString, Polygon

BOTH = ("check", "run")


@dataclass(frozen=True)
class Case:
    """One way to break the tiny project."""

    breaks: Callable[[Path], object]  # (project folder) -> anything; edits files in place
    culprit: str | re.Pattern[str]  # must appear in the error line
    commands: tuple[str, ...] = BOTH
    target: str = "."  # what to pass as PROJECT, relative to the folder
    extra: tuple[str, ...] = ()  # more command-line options


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


def _both(*steps: Callable[[Path], object]) -> Callable[[Path], None]:
    def run_all(d: Path) -> None:
        for step in steps:
            step(d)
    return run_all


def _soil_becomes_folder(d: Path) -> None:
    (d / "soil.tif").unlink()
    (d / "soil.tif").mkdir()


_TWO = [square(0, 0, 50, 100), square(50, 0, 100, 100)]
_NODATA_WEST = soil_codes()
_NODATA_WEST[:, :5] = 255  # the whole of S1 has no soil data
_FLOAT_CODES = soil_codes().astype(np.float32)
_FLOAT_CODES[3, 3] = 1.5
_UNKNOWN_CODE = soil_codes()
_UNKNOWN_CODE[2, 2] = 7
_ROTATED = Affine(10.0, 2.0, X0, 0.0, -10.0, Y0 + 100.0)
_FAR_AWAY = Affine(10.0, 0.0, X0 + 50_000.0, 0.0, -10.0, Y0 + 100.0)

CASES: dict[str, Case] = {
    # --- missing and unreadable files --------------------------------------------------------
    "project file missing": Case(lambda d: None, "nothing.toml", target="nothing.toml"),
    "folder without project file": Case(_remove("gisrun.toml"), re.compile(r"holds no project")),
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
    "unknown per-subcatchment method": Case(
        _both(_polygons(_TWO, how=["green_ampt", "hortn"]),
              _toml('id_field = "code"', 'id_field = "code"\nmethod_field = "how"')),
        re.compile(r"how.*id=S2.*did you mean 'horton'")),
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
    args = [command, str(folder / case.target), *case.extra]
    if command == "run":
        args += ["--no-extras", "--quiet"]
    code, out, err = run_cli(capsys, args)
    assert_one_clear_error(code, err + out, case.culprit)
    if command == "run":  # nothing was written or left behind
        assert _files(folder) == before


def _files(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file()}


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
    "self-intersecting polygon is repaired": (_bowtie_s2, re.compile(r"sub\.gpkg.*repaired.*S2")),
    "invalid ring with a spike is repaired": (_ring_with_spike_s1,
                                              re.compile(r"sub\.gpkg.*repaired.*S1")),
    "absurd storm depth": (_absurd_storm, re.compile(r"storm\.csv.*world record")),
    "override for a class not in the project": (_override_for_absent_class,
                                                re.compile(r"over\.csv:line 2.*matches no unit")),
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
    code, out, err = run_cli(capsys, ["run", str(folder), "--output", str(target), "--no-extras"])
    assert code == 0, err
    assert "Traceback" not in err + out
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


# --- outputs: a full disk, and the checksum rows ----------------------------------------------

def test_full_disk_leaves_no_file_and_keeps_the_earlier_output(tmp_path, capsys, monkeypatch):
    import gisrun.io.geopackage as output

    folder = tmp_path / "project"
    make_project(folder)
    target = tmp_path / "out" / "result.gpkg"
    target.parent.mkdir()
    target.write_bytes(b"earlier output")

    def full(*_args: object, **_kw: object) -> None:
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(output, "write_layers_into", full)
    code, out, err = run_cli(capsys, ["run", str(folder), "--output", str(target), "--overwrite",
                                      "--no-extras", "--quiet"])
    line = assert_one_clear_error(code, err + out, "result.gpkg")
    assert "No space left on device" in line and "disk space" in line
    assert target.read_bytes() == b"earlier output"
    assert sorted(p.name for p in target.parent.iterdir()) == ["result.gpkg"]


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
