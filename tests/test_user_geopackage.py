"""Results written into the user's own GeoPackage as new layers; the user's layers stay unchanged.

The user's GeoPackage (invented, built here) holds a polygon layer with several field types
and a plain table. After gisrun adds its layers, those two are compared with what they were:
features read back, field schema, their raw SQLite rows, and their ``gpkg_contents`` and
``gpkg_geometry_columns`` rows.
"""

from __future__ import annotations

import hashlib
import os
import sqlite3
from contextlib import closing
from pathlib import Path

import geopandas as gpd
import pandas as pd
import pyogrio
import pytest
from bad_inputs_helpers import X0, Y0, make_project
from pandas.testing import assert_frame_equal
from shapely.geometry import Polygon

from gisrun.errors import OutputError, OutputExistsError
from gisrun.io import geopackage, gpkg_merge
from gisrun.workflow.stream import run_and_write

#: End-to-end runs (and, for the report, a headless browser): `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow

GISRUN_LAYERS = {"runoff_steady", "excess_series", "subcatchment_results", "unit_results",
                 "unit_parameters", "parameter_sources", "coverage", "run_info"}


def _user_geopackage(path: Path, *, table_name: str = "inspections") -> Path:
    parcels = gpd.GeoDataFrame(
        {"parcel": ["P-1", "P-2"], "storeys": [2, 5], "roof_share": [0.41, 0.9],
         "note": ["corner lot", None]},
        geometry=[Polygon([(X0, Y0), (X0 + 30, Y0), (X0 + 30, Y0 + 20)]),
                  Polygon([(X0 + 40, Y0 + 40), (X0 + 90, Y0 + 40), (X0 + 90, Y0 + 95),
                           (X0 + 40, Y0 + 95)])],
        crs="EPSG:32617")
    pyogrio.write_dataframe(parcels, path, layer="parcels", driver="GPKG")
    table = pd.DataFrame({"inlet": ["IN-7", "IN-9", "IN-12"], "blocked": [0, 1, 0],
                          "checked_on": ["2023-04-01", "2023-04-02", "2023-05-11"]})
    pyogrio.write_dataframe(table, path, layer=table_name, driver="GPKG")
    return path


def _state(path: Path, layers: list[str]) -> dict[str, object]:
    """Everything about the user's layers that must not change."""
    state: dict[str, object] = {}
    with sqlite3.connect(path) as db:
        for name in layers:
            state[f"contents:{name}"] = db.execute(
                "SELECT * FROM gpkg_contents WHERE table_name = ?", (name,)).fetchall()
            state[f"geometry_columns:{name}"] = db.execute(
                "SELECT * FROM gpkg_geometry_columns WHERE table_name = ?", (name,)).fetchall()
            state[f"rows:{name}"] = db.execute(f'SELECT * FROM "{name}" ORDER BY fid').fetchall()
            state[f"schema:{name}"] = db.execute(f'PRAGMA table_info("{name}")').fetchall()
    for name in layers:
        info = pyogrio.read_info(path, layer=name)
        state[f"info:{name}"] = (list(info["fields"]), list(info["dtypes"]),
                                 info["geometry_type"], info["crs"], info["features"])
    return state


def _frames(path: Path, layers: list[str]) -> dict[str, pd.DataFrame]:
    return {name: pyogrio.read_dataframe(path, layer=name) for name in layers}


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def project(tmp_path: Path) -> Path:
    return make_project(tmp_path / "project")


def test_results_are_added_and_user_layers_are_unchanged(tmp_path, project):
    user = _user_geopackage(tmp_path / "town.gpkg")
    mine = ["parcels", "inspections"]
    before, frames = _state(user, mine), _frames(user, mine)

    _, written = run_and_write(project, into=user)

    assert written == user
    names = {str(row[0]) for row in pyogrio.list_layers(user)}
    assert set(mine) | GISRUN_LAYERS <= names
    assert _state(user, mine) == before
    for name, frame in _frames(user, mine).items():
        assert_frame_equal(frame, frames[name])
    out = pyogrio.read_dataframe(user, layer="runoff_steady", read_geometry=False)
    assert sorted(out["subcatchment_id"]) == ["S1", "S2"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["project", "town.gpkg"]  # no temporary


def test_a_taken_layer_name_is_refused_without_overwrite(tmp_path, project):
    user = _user_geopackage(tmp_path / "town.gpkg", table_name="coverage")
    digest = _sha256(user)
    with pytest.raises(OutputExistsError, match=r"town\.gpkg:coverage.*--overwrite"):
        run_and_write(project, into=user)
    assert _sha256(user) == digest  # not even rewritten
    assert sorted(p.name for p in tmp_path.iterdir()) == ["project", "town.gpkg"]


def test_overwrite_replaces_only_layers_of_the_same_name(tmp_path, project):
    user = _user_geopackage(tmp_path / "town.gpkg", table_name="coverage")
    before, frames = _state(user, ["parcels"]), _frames(user, ["parcels"])
    run_and_write(project, into=user, overwrite=True)
    coverage = pyogrio.read_dataframe(user, layer="coverage")
    assert "inlet" not in coverage.columns and sorted(coverage["subcatchment_id"]) == ["S1", "S2"]
    assert _state(user, ["parcels"]) == before
    assert_frame_equal(_frames(user, ["parcels"])["parcels"], frames["parcels"])


def test_running_twice_with_overwrite_does_not_double_the_series(tmp_path, project):
    user = _user_geopackage(tmp_path / "town.gpkg")
    run_and_write(project, into=user)
    first = pyogrio.read_dataframe(user, layer="excess_series")
    run_and_write(project, into=user, overwrite=True)
    second = pyogrio.read_dataframe(user, layer="excess_series")
    # 2 subcatchments x 12 five-minute steps of a one-hour storm
    assert len(first) == len(second) == 24


def test_a_failed_write_leaves_the_user_file_as_it_was(tmp_path, project, monkeypatch):
    user = _user_geopackage(tmp_path / "town.gpkg")
    digest = _sha256(user)

    def fails(*_args: object, **_kw: object) -> None:
        raise OSError(28, "No space left on device")

    # the disk fills up under the first layer gisrun writes into the copy
    monkeypatch.setattr(geopackage.pyogrio, "write_dataframe", fails)
    with pytest.raises(OutputError, match=r"town\.gpkg.*No space left on device"):
        run_and_write(project, into=user)
    assert _sha256(user) == digest
    assert sorted(p.name for p in tmp_path.iterdir()) == ["project", "town.gpkg"]


def _add_layers(user: Path, layers: dict[str, pd.DataFrame], *, overwrite: bool = False) -> None:
    """What ``run_and_write(into=...)`` does with its layers, through the same io functions."""
    with geopackage.open_output(user, into_existing=True, overwrite=overwrite) as (tmp, check):
        check(list(layers))
        geopackage.write_layers_into(tmp, layers)


def test_writing_layers_directly_keeps_the_rest(tmp_path):
    user = _user_geopackage(tmp_path / "town.gpkg")
    before = _state(user, ["parcels", "inspections"])
    before_tables = _state(user, ["inspections"])
    extra = pd.DataFrame({"k": ["a", "b"], "v": [1.5, 2.5]})
    _add_layers(user, {"notes_from_run": extra})
    assert_frame_equal(pyogrio.read_dataframe(user, layer="notes_from_run"), extra)
    assert _state(user, ["parcels", "inspections"]) == before
    digest = _sha256(user)
    with pytest.raises(OutputExistsError, match="parcels"):
        _add_layers(user, {"parcels": extra})
    with pytest.raises(OutputExistsError, match="only in case"):  # SQLite names ignore case
        _add_layers(user, {"PARCELS": extra}, overwrite=True)
    assert _sha256(user) == digest  # refused before anything was written
    _add_layers(user, {"parcels": extra}, overwrite=True)
    assert_frame_equal(pyogrio.read_dataframe(user, layer="parcels"), extra)
    assert _state(user, ["inspections"]) == before_tables
    assert sorted(p.name for p in tmp_path.iterdir()) == ["town.gpkg"]  # no temporary left


@pytest.mark.parametrize("kind", ["missing", "csv", "sqlite without GeoPackage tables"])
def test_only_an_existing_geopackage_is_accepted(tmp_path, project, kind):
    target = tmp_path / "target.gpkg"
    if kind == "csv":
        target.write_text("a,b\n1,2\n")
    elif kind == "sqlite without GeoPackage tables":
        with sqlite3.connect(target) as db:
            db.execute("CREATE TABLE t (x)")
    before = target.read_bytes() if target.exists() else None
    with pytest.raises(OutputError, match=r"target\.gpkg.*(does not exist|not a GeoPackage)"):
        run_and_write(project, into=target)
    assert (target.read_bytes() if target.exists() else None) == before


# --- writing in place: links, other connections, names taken meanwhile ------------------------

def _at_writing(action):
    """A progress callback that runs ``action`` once the run starts writing its layers."""
    def progress(message: str) -> None:
        if message == "writing outputs":
            action()
    return progress


def test_a_hard_link_to_the_user_file_sees_the_new_layers(tmp_path, project):
    user = _user_geopackage(tmp_path / "town.gpkg")
    other_name = tmp_path / "shared" / "town_link.gpkg"
    other_name.parent.mkdir()
    os.link(user, other_name)
    run_and_write(project, into=user)
    assert os.path.samefile(user, other_name)  # written in place, not replaced by a new file
    names = {str(row[0]) for row in pyogrio.list_layers(other_name)}
    assert GISRUN_LAYERS <= names and "parcels" in names


def test_rows_another_connection_commits_during_the_run_are_kept(tmp_path, project):
    user = _user_geopackage(tmp_path / "town.gpkg")

    def edit() -> None:  # the copy was taken at the start; this edit comes after it
        with closing(sqlite3.connect(user)) as db, db:
            db.execute("INSERT INTO inspections (inlet, blocked, checked_on) "
                       "VALUES ('IN-20', 1, '2023-06-01')")

    run_and_write(project, into=user, progress=_at_writing(edit))
    with closing(sqlite3.connect(user)) as db:
        inlets = [r[0] for r in db.execute("SELECT inlet FROM inspections ORDER BY fid")]
        assert db.execute("PRAGMA integrity_check").fetchone() == ("ok",)
    assert inlets == ["IN-7", "IN-9", "IN-12", "IN-20"]
    assert GISRUN_LAYERS <= {str(row[0]) for row in pyogrio.list_layers(user)}


def test_a_writer_that_holds_its_transaction_is_waited_for_then_refused(tmp_path, project,
                                                                        monkeypatch):
    user = _user_geopackage(tmp_path / "town.gpkg")
    monkeypatch.setattr(gpkg_merge, "LOCK_WAIT_S", 0.2)  # how long to wait, not a sync point
    writer = sqlite3.connect(user, isolation_level=None)
    try:
        def hold() -> None:
            writer.execute("BEGIN IMMEDIATE")
            writer.execute("INSERT INTO inspections (inlet, blocked, checked_on) "
                           "VALUES ('IN-21', 0, '2023-06-02')")

        with pytest.raises(OutputError, match=r"town\.gpkg: is being written by another "
                                              r"program.*; finish or close the edit"):
            run_and_write(project, into=user, progress=_at_writing(hold))
        writer.execute("COMMIT")
    finally:
        writer.close()
    with closing(sqlite3.connect(user)) as db:
        assert [r[0] for r in db.execute("SELECT inlet FROM inspections ORDER BY fid")][-1] \
            == "IN-21"
    assert not GISRUN_LAYERS & {str(row[0]) for row in pyogrio.list_layers(user)}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["project", "town.gpkg"]


def test_a_layer_name_taken_during_the_run_is_refused(tmp_path, project):
    user = _user_geopackage(tmp_path / "town.gpkg")
    theirs = pd.DataFrame({"note": ["made while gisrun ran"]})

    def take_name() -> None:
        pyogrio.write_dataframe(theirs, user, layer="coverage", driver="GPKG")

    with pytest.raises(OutputExistsError, match=r"town\.gpkg:coverage.*already a layer"):
        run_and_write(project, into=user, progress=_at_writing(take_name))
    assert_frame_equal(pyogrio.read_dataframe(user, layer="coverage"), theirs)
    assert "runoff_steady" not in {str(row[0]) for row in pyogrio.list_layers(user)}


def test_into_the_subcatchment_geopackage_keeps_the_subcatchments(tmp_path, project):
    sub = project.parent / "sub.gpkg"
    before = pyogrio.read_dataframe(sub, layer="subcatchments")
    run_and_write(project, into=sub)
    assert_frame_equal(pyogrio.read_dataframe(sub, layer="subcatchments"), before)
    assert "runoff_steady" in {str(row[0]) for row in pyogrio.list_layers(sub)}


def test_into_refuses_to_replace_the_subcatchment_layer(tmp_path, project):
    sub = project.parent / "sub.gpkg"
    edit = project.read_text().replace('layer = "subcatchments"', 'layer = "coverage"')
    project.write_text(edit)
    pyogrio.write_dataframe(pyogrio.read_dataframe(sub, layer="subcatchments"), sub,
                            layer="coverage", driver="GPKG")
    digest = _sha256(sub)
    with pytest.raises(OutputError, match=r"sub\.gpkg:coverage: is the subcatchment layer"):
        run_and_write(project, into=sub, overwrite=True)
    assert _sha256(sub) == digest
