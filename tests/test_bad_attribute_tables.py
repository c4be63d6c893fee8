"""Bad attribute tables of a keyed soil raster: one clear line, exit 2, nothing written.

In the style of ``test_bad_inputs.py``: every case starts from the tiny valid project of
:mod:`bad_inputs_helpers` with its soil raster turned into map-unit keys (101 in the west half,
202 in the east half) and a valid ``units.csv``, breaks one thing, and runs ``gisrun check``
and ``gisrun run``.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest
from bad_inputs_helpers import (
    assert_one_clear_error,
    edit_toml,
    make_project,
    run_cli,
    write_raster,
)

GOOD_CSV = "key,hydrologic_soil_group,ks_mm_per_h\n101,A,\n202,B,5.0\n"


def keyed_project(folder: Path) -> Path:
    project = make_project(folder)
    keys = np.full((10, 10), 101, dtype=np.int32)
    keys[:, 5:] = 202
    write_raster(folder / "soil.tif", keys, nodata=-1)
    (folder / "units.csv").write_text(GOOD_CSV)
    edit_toml(project, '[soil.codes]\n"1" = "A"\n"2" = "B"\n', 'attributes = "units.csv"\n')
    return project


def _csv(text: str) -> Callable[[Path], None]:
    return lambda d: (d / "units.csv").write_text(text)


def _toml(old: str, new: str) -> Callable[[Path], None]:
    return lambda d: edit_toml(d / "gisrun.toml", old, new)


def _unknown_key(d: Path) -> None:
    keys = np.full((10, 10), 101, dtype=np.int32)
    keys[:, 5:] = 202
    keys[3, 3] = 303
    write_raster(d / "soil.tif", keys, nodata=-1)


CASES: dict[str, tuple[Callable[[Path], None], str | re.Pattern[str]]] = {
    "attribute file missing": (_toml('"units.csv"', '"gone.csv"'),
                               re.compile(r"gone\.csv: does not exist")),
    "key column missing": (_toml('attributes = "units.csv"',
                                 'attributes = "units.csv"\nattributes_key = "mukey"'),
                           re.compile(r"units\.csv: has no key column 'mukey'")),
    "bad unit in a conductivity column": (
        _csv("key,hydrologic_soil_group,ks_mm_per_hr\n101,A,\n202,B,5\n"),
        re.compile(r"units\.csv:ks_mm_per_hr: has a unit gisrun does not know.*ks_mm_per_h")),
    "bad unit in a depth column": (
        _csv("key,hydrologic_soil_group,water_table_depth_yd\n101,A,\n202,B,5\n"),
        re.compile(r"water_table_depth_yd: has a unit.*water_table_depth_cm")),
    "duplicate keys": (_csv("key,hydrologic_soil_group\n101,A\n202,B\n101,C\n"),
                       re.compile(r"units\.csv:line 4:key: key 101 is also on line 2")),
    "key not a whole number": (_csv("key,hydrologic_soil_group\n101,A\n20x,B\n"),
                               re.compile(r"line 3:key: key '20x' is not a whole number")),
    "unknown group": (_csv("key,hydrologic_soil_group\n101,A\n202,E\n"),
                      re.compile(r"line 3:hydrologic_soil_group: value 'E' is not known")),
    "no group and nothing to derive it from": (
        _csv("key,hydrologic_soil_group\n101,A\n202,\n"),
        re.compile(r"units\.csv:line 3: gives no hydrologic_soil_group")),
    "conductivity not a number": (_csv("key,hydrologic_soil_group,ks_mm_per_h\n101,A,\n202,B,x\n"),
                                  re.compile(r"line 3:ks_mm_per_h: value 'x'")),
    "key in the raster but not in the table": (_unknown_key,
                                               re.compile(r"soil\.tif: holds keys 303 that its "
                                                          r"attribute table units\.csv")),
    "codes and attributes both": (_toml('attributes = "units.csv"',
                                        'attributes = "units.csv"\n[soil.codes]\n"1" = "A"'),
                                  re.compile(r"\[soil\]\.codes: is given together")),
    "unlisted_keys not a rule": (_toml('attributes = "units.csv"',
                                       'attributes = "units.csv"\nunlisted_keys = "skip"'),
                                 re.compile(r"\[soil\]\.unlisted_keys")),
    "raster table missing": (_toml('attributes = "units.csv"', 'attributes = "raster"'),
                             re.compile(r"soil\.tif\.aux\.xml: does not exist")),
    "GeoPackage table missing": (_toml('attributes = "units.csv"',
                                       'attributes = "sub.gpkg"\nattributes_layer = "units"'),
                                 re.compile(r"sub\.gpkg:units: is not a table")),
}


@pytest.mark.parametrize("command", ["check", "run"])
@pytest.mark.parametrize("name", list(CASES))
def test_bad_attribute_table_gets_one_clear_line(tmp_path, capsys, name, command):
    breaks, culprit = CASES[name]
    folder = tmp_path / "project"
    keyed_project(folder)
    breaks(folder)
    before = {p: p.read_bytes() for p in folder.rglob("*") if p.is_file()}
    args = [command, str(folder)] + (["--no-extras", "--quiet"] if command == "run" else [])
    code, out, err = run_cli(capsys, args)
    assert_one_clear_error(code, err + out, culprit)
    assert {p: p.read_bytes() for p in folder.rglob("*") if p.is_file()} == before


def test_the_valid_keyed_project_runs(tmp_path, capsys):
    folder = tmp_path / "project"
    keyed_project(folder)
    code, out, err = run_cli(capsys, ["check", str(folder)])
    assert code == 0, err
    assert "units.csv: 2 soil keys in 2 class(es)" in err + out


def test_check_lists_unlisted_keys_that_count_as_nodata(tmp_path, capsys):
    folder = tmp_path / "project"
    keyed_project(folder)
    _unknown_key(folder)
    edit_toml(folder / "gisrun.toml", 'attributes = "units.csv"',
              'attributes = "units.csv"\nunlisted_keys = "nodata"')
    code, out, err = run_cli(capsys, ["check", str(folder)])
    assert code == 0, err
    assert re.search(r"soil\.tif.*keys 303 are not in units\.csv; their cells count as nodata",
                     err + out), err + out
