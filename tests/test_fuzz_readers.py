"""Fuzzing the readers: whatever a user's file holds, only a GisrunError (or a warning) comes out.

Hypothesis builds project files (random text, and random tables of valid and invalid keys with
values of every TOML type), storm CSVs (random headers, rows and values: NaN, negative, huge,
text, clock times) and polygon layers (random rings: degenerate, self-intersecting, repeated
points). Each goes to its reader; any exception other than :class:`gisrun.errors.GisrunError`
is a bug (a traceback where the user should get one clear line).
"""

from __future__ import annotations

import math
import warnings
from typing import Any

import geopandas as gpd
import pytest
import shapely
from bad_inputs_helpers import PROJECT_TOML, make_project
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from gisrun.config.project import _SCHEMA, load_project
from gisrun.errors import GisrunError
from gisrun.io.storm_csv import read_hyetograph_csv
from gisrun.io.vector import read_subcatchments
from gisrun.units import unit_system

#: End-to-end, dask, memory, interrupt and fuzz tests: `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow

FUZZ = settings(max_examples=30, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.function_scoped_fixture,
                                       HealthCheck.too_slow])


def _only_gisrun_errors(call: Any, *args: Any, **kwargs: Any) -> object:
    """Call a reader; a GisrunError is a fine answer, anything else fails the test."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return call(*args, **kwargs)
        except GisrunError as err:
            text = str(err)
            assert "\n" not in text and ": " in text and "; " in text, text
            return err


# --- project files ----------------------------------------------------------------------------

def _toml_key(key: str) -> str:
    return key if key.replace("_", "").isalnum() and key.isascii() else _toml_string(key)


def _toml_string(text: str) -> str:
    escaped = "".join(ch if ch.isprintable() and ch not in '"\\' else f"\\u{ord(ch):04x}"
                      for ch in text)
    return f'"{escaped}"'


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return _toml_string(value)
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_toml_key(k)} = {_toml_value(v)}" for k, v in value.items()) + "}"
    raise TypeError(value)


def _dump(doc: dict[str, Any]) -> str:
    """A small TOML writer: top-level scalars, then each table as an inline table."""
    return "\n".join(f"{_toml_key(k)} = {_toml_value(v)}" for k, v in doc.items()) + "\n"


_SCALARS = st.one_of(
    st.booleans(), st.integers(-10**6, 10**6), st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=12), st.sampled_from(["sub.gpkg", "soil.tif", "storm.csv", "A", "green_ampt",
                                           "si", "us", "texture", "EPSG:32617", "../x", ""]))
_VALUES = st.recursive(_SCALARS, lambda inner: st.one_of(
    st.lists(inner, max_size=3), st.dictionaries(st.text(max_size=6), inner, max_size=3)),
    max_leaves=6)
_SECTIONS = [s for s in _SCHEMA if s]


@st.composite
def project_documents(draw: st.DrawFn) -> dict[str, Any]:
    """Tables of the project schema (and a few unknown ones) with valid and invalid keys."""
    doc: dict[str, Any] = {}
    for section in draw(st.lists(st.sampled_from([*_SECTIONS, "soils", "project "]),
                                 max_size=8, unique=True)):
        if section == "storms":
            doc["storms"] = draw(st.lists(st.dictionaries(
                st.sampled_from(["kind", "name", "depth", "duration_min", "path", "idf",
                                 "distribution", "step_min", "knid"]), _VALUES, max_size=5),
                max_size=3))
            continue
        keys = [*_SCHEMA.get(section, ()), "codes", "nmae", "crs "]
        doc[section] = draw(st.dictionaries(st.sampled_from(keys), _VALUES, max_size=6))
    return doc


@FUZZ
@given(text=st.text(max_size=300))
def test_random_text_as_project_file(tmp_path, text):
    path = tmp_path / "gisrun.toml"
    path.write_text(text, encoding="utf-8")
    _only_gisrun_errors(load_project, path)


@FUZZ
@given(doc=project_documents())
def test_random_project_structures(tmp_path, doc):
    path = tmp_path / "gisrun.toml"
    path.write_text(_dump(doc), encoding="utf-8")
    _only_gisrun_errors(load_project, path)


@FUZZ
@given(data=st.data())
def test_valid_project_with_one_value_changed(tmp_path, data):
    import tomllib

    doc = tomllib.loads(PROJECT_TOML)
    section = data.draw(st.sampled_from(["project", "subcatchments", "soil", "cover", "nodata",
                                         "method"]))
    key = data.draw(st.sampled_from(sorted(doc[section]) + ["codes"]))
    doc[section][key] = data.draw(_VALUES)
    path = tmp_path / "gisrun.toml"
    path.write_text(_dump(doc), encoding="utf-8")
    _only_gisrun_errors(load_project, path)


# --- storm CSVs -------------------------------------------------------------------------------

_HEADERS = st.sampled_from(["time_min", "time_h", "time", "intensity_mm_per_h", "depth_mm",
                            "cumulative_depth_in", "intensity", "depth", "rain", "", "Time_Min"])
_CELLS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-5, 10**9).map(str),
    st.sampled_from(["", "nan", "NaN", "-0", "1e308", "1e-320", "inf", "abc", "12:30", "24:00",
                     "2024-05-01T10:00", "1,5", " 3 ", "0x10", "\u0663"]),
    st.text(alphabet=st.characters(blacklist_categories=["Cs"]), max_size=6),
)


@FUZZ
@given(header=st.lists(_HEADERS, min_size=0, max_size=3),
       rows=st.lists(st.lists(_CELLS, min_size=0, max_size=3), max_size=8),
       comment=st.booleans(), units=st.sampled_from([None, "si", "us"]))
def test_random_storm_csv(tmp_path, header, rows, comment, units):
    import csv
    import io

    buffer = io.StringIO()
    writer = csv.writer(buffer)
    if comment:
        buffer.write("# name: fuzzed storm\n")
    writer.writerow(header)
    writer.writerows(rows)
    path = tmp_path / "storm.csv"
    path.write_text(buffer.getvalue(), encoding="utf-8")
    system = unit_system(units) if units else None
    result = _only_gisrun_errors(read_hyetograph_csv, path, units=system)
    if not isinstance(result, GisrunError):  # a storm that reads is a valid hyetograph
        assert (result.depth_m >= 0).all() and (result.time_s[1:] > result.time_s[:-1]).all()


@FUZZ
@given(data=st.binary(max_size=200))
def test_random_bytes_as_storm_csv(tmp_path, data):
    path = tmp_path / "storm.csv"
    path.write_bytes(data)
    _only_gisrun_errors(read_hyetograph_csv, path, units=unit_system("si"))


# --- polygon layers ---------------------------------------------------------------------------

_COORD = st.one_of(st.integers(0, 4).map(float), st.floats(0.0, 100.0, allow_nan=False))
_RING = st.lists(st.tuples(_COORD, _COORD), min_size=0, max_size=7)


@st.composite
def polygons(draw: st.DrawFn) -> shapely.Geometry:
    ring = draw(_RING)
    kind = draw(st.sampled_from(["polygon", "polygon", "with hole", "multi", "empty"]))
    if kind == "empty" or len(ring) < 3:
        return shapely.Polygon()
    if kind == "with hole":
        return shapely.Polygon(ring, [draw(st.lists(st.tuples(_COORD, _COORD), min_size=3,
                                                    max_size=5))])
    if kind == "multi":
        other = draw(st.lists(st.tuples(_COORD, _COORD), min_size=3, max_size=5))
        return shapely.MultiPolygon([shapely.Polygon(ring), shapely.Polygon(other)])
    return shapely.Polygon(ring)


@FUZZ
@given(geoms=st.lists(polygons(), min_size=1, max_size=4),
       ids=st.lists(st.one_of(st.none(), st.sampled_from(["A", "B", "", " "]),
                              st.integers(0, 3)), min_size=4, max_size=4))
def test_random_polygons(tmp_path, geoms, ids):
    path = tmp_path / "sub.gpkg"
    path.unlink(missing_ok=True)
    id_values = [None if v is None else str(v) for v in ids[:len(geoms)]]
    gdf = gpd.GeoDataFrame({"code": id_values}, geometry=geoms, crs="EPSG:32617")
    try:
        gdf.to_file(path, layer="subcatchments", engine="pyogrio")
    except Exception:  # noqa: BLE001 - a layer GDAL itself will not write is no reader input
        assume(False)
    result = _only_gisrun_errors(read_subcatchments, path, id_field="code")
    if not isinstance(result, GisrunError):  # what reads is usable: valid polygons with area
        assert shapely.is_valid(result.geometry.to_numpy()).all()
        assert (result.geometry.area > 0).all()
        assert result["subcatchment_id"].is_unique


def test_fuzz_helpers_write_toml_that_reads_back(tmp_path):
    import tomllib

    doc = {"project": {"name": 'a "q"', "time_step_min": 5.5, "x": [1, True]},
           "storms": [{"kind": "uniform", "depth": float("nan")}]}
    back = tomllib.loads(_dump(doc))
    assert back["project"] == doc["project"]
    assert back["storms"][0]["kind"] == "uniform" and math.isnan(back["storms"][0]["depth"])
    project = make_project(tmp_path / "p")
    assert load_project(project).soil.codes == {1: "A", 2: "B"}


@pytest.mark.parametrize("text", ["[project]\ntime_step_min = nan\n", "[soil.codes]\n1 = 2\n",
                                  "storms = 3\n[project]\n", "[[storms]]\nkind = []\n"])
def test_known_awkward_project_files(tmp_path, text):
    path = tmp_path / "gisrun.toml"
    path.write_text(text)
    assert isinstance(_only_gisrun_errors(load_project, path), GisrunError)
