"""The on-disk overlay cache: a re-run with a new storm reads the overlay instead of redoing it."""

import dataclasses
import hashlib
from pathlib import Path

import geopandas as gpd
import pandas as pd
import pytest
import rasterio
import rasterio.shutil

import gisrun.workflow.chunks as chunks
from gisrun import load_project, run
from gisrun.errors import GisrunError, OutputError
from gisrun.io.overlay_cache import entry_folder, load_overlay, overlay_key, save_overlay

#: End-to-end runs (and, for the report, a headless browser): `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


@pytest.fixture(scope="module")
def demo():
    project = load_project(DEMO)
    return dataclasses.replace(project, memory_budget_mb=5.0, storms=project.storms[-1:])


def assert_same_run(a, b):
    pd.testing.assert_frame_equal(a.units, b.units, check_exact=True)
    pd.testing.assert_frame_equal(a.coverage, b.coverage, check_exact=True)
    pd.testing.assert_frame_equal(a.parameters, b.parameters, check_exact=True)
    for sa, sb in zip(a.storms, b.storms, strict=True):
        pd.testing.assert_frame_equal(sa.subcatchments, sb.subcatchments, check_exact=True)
        pd.testing.assert_frame_equal(sa.units, sb.units, check_exact=True)
        pd.testing.assert_frame_equal(sa.series, sb.series, check_exact=True)


def test_second_run_reads_the_overlay_and_gives_the_same_results(demo, tmp_path, monkeypatch):
    project = dataclasses.replace(demo, overlay_cache=tmp_path / "cache")
    first = run(project)
    entries = list((tmp_path / "cache").glob("overlay-*"))
    assert len(entries) == 1 and (entries[0] / "units.parquet").is_file()

    def no_overlay(*args, **kwargs):
        raise AssertionError("the overlay ran although it was cached")

    monkeypatch.setattr(chunks, "overlay_inputs", no_overlay)
    said = []
    second = run(project, progress=said.append)
    assert any("overlay read from the cache" in s for s in said)
    assert_same_run(first, second)
    assert first.warnings == second.warnings
    # and equal to a run without any cache
    monkeypatch.undo()
    assert_same_run(run(demo), second)


def test_a_new_storm_reuses_the_entry_and_a_changed_setting_does_not(demo, tmp_path):
    project = dataclasses.replace(demo, overlay_cache=tmp_path / "cache")
    run(project)
    other_storm = dataclasses.replace(project, storms=load_project(DEMO).storms[:1])
    run(other_storm)
    assert len(list((tmp_path / "cache").glob("overlay-*"))) == 1
    other_rule = dataclasses.replace(project, nodata_rule="omit")
    run(other_rule)
    assert len(list((tmp_path / "cache").glob("overlay-*"))) == 2


def test_key_follows_file_contents_and_overlay_settings(demo):
    key = overlay_key(demo, ["a", "b", "c"])
    assert key == overlay_key(dataclasses.replace(demo, method="horton"), ["a", "b", "c"])
    assert key != overlay_key(demo, ["a", "b", "d"])
    assert key != overlay_key(dataclasses.replace(demo, max_nodata_fraction=0.5), ["a", "b", "c"])


def test_unreadable_entry_stops_with_a_clear_error(demo, tmp_path):
    project = dataclasses.replace(demo, overlay_cache=tmp_path / "cache")
    run(project)
    (entry,) = (tmp_path / "cache").glob("overlay-*")
    (entry / "units.parquet").write_bytes(b"not a parquet file")
    with pytest.raises(GisrunError, match="overlay cache entry cannot be read"):
        run(project)
    assert entry == entry_folder(tmp_path / "cache", entry.name.removeprefix("overlay-"))


def _tables():
    units = pd.DataFrame({"subcatchment_id": ["S1"], "soil_class": ["A"],
                          "cover_class": ["woods_good"], "area_m2": [12.5]})
    coverage = pd.DataFrame({"subcatchment_id": ["S1"], "area_m2": [12.5]})
    return units, coverage


def test_an_entry_is_stored_whole_and_an_existing_one_is_kept(tmp_path):
    units, coverage = _tables()
    entry = save_overlay(tmp_path / "cache", "k1", units, coverage, ["a note"])
    assert entry == entry_folder(tmp_path / "cache", "k1")
    got_units, got_coverage, got_notes = load_overlay(tmp_path / "cache", "k1")
    pd.testing.assert_frame_equal(got_units, units)
    pd.testing.assert_frame_equal(got_coverage, coverage)
    assert got_notes == ["a note"]
    # a second store of the same key (another run got there first) keeps the first entry
    assert save_overlay(tmp_path / "cache", "k1", units.iloc[:0], coverage, []) == entry
    assert len(load_overlay(tmp_path / "cache", "k1")[0]) == 1
    assert sorted(p.name for p in (tmp_path / "cache").iterdir()) == ["overlay-k1"]


def test_a_failed_store_leaves_no_entry_and_no_temporary_folder(tmp_path, monkeypatch):
    units, coverage = _tables()

    def disk_full(*_args, **_kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(pd.DataFrame, "to_parquet", disk_full)
    with pytest.raises(OutputError, match=r"overlay-k2: overlay cache entry cannot be written "
                                          r".*No space left.*\[project\] overlay_cache"):
        save_overlay(tmp_path / "cache", "k2", units, coverage, [])
    assert list((tmp_path / "cache").iterdir()) == []
    assert load_overlay(tmp_path / "cache", "k2") is None


def test_a_cache_path_under_a_file_gives_one_clear_line(tmp_path):
    units, coverage = _tables()
    (tmp_path / "cache").write_text("not a folder")
    with pytest.raises(OutputError,
                       match=r"cache: overlay cache cannot be written .*\[project\] overlay_cache"):
        save_overlay(tmp_path / "cache", "k3", units, coverage, [])


# --- the key and run_info cover every file GDAL reads for a dataset (issue 14, item 9) ---------

def _tiny(folder: Path, sub_name: str = "sub.gpkg"):
    """The tiny two-subcatchment project of the bad-input catalogue, with an overlay cache."""
    from bad_inputs_helpers import edit_toml, make_project

    toml = make_project(folder)
    if sub_name != "sub.gpkg":
        gdf = gpd.read_file(folder / "sub.gpkg", layer="subcatchments")
        gdf.to_file(folder / sub_name, engine="pyogrio")
        edit_toml(toml, 'path = "sub.gpkg"\nlayer = "subcatchments"', f'path = "{sub_name}"')
    edit_toml(toml, "time_step_min = 5", 'time_step_min = 5\noverlay_cache = "cache"')
    return toml


def _soils(project) -> dict[str, str]:
    """Soil class of each subcatchment's unit (soil A lies west, B east; one unit each)."""
    units = run(project).units
    assert units["subcatchment_id"].is_unique
    return dict(zip(units["subcatchment_id"], units["soil_class"], strict=True))


def test_a_shapefile_dbf_change_is_not_served_from_the_cache(tmp_path):
    """Swapping the ids in the .dbf (the .shp untouched) must give the new ids' results."""
    toml = _tiny(tmp_path / "p", "sub.shp")
    first = _soils(load_project(toml))
    shp = (tmp_path / "p" / "sub.shp").read_bytes()
    gdf = gpd.read_file(tmp_path / "p" / "sub.shp")
    gdf["code"] = gdf["code"].map({"S1": "S2", "S2": "S1"})
    gdf.to_file(tmp_path / "p" / "sub.shp", engine="pyogrio")
    assert (tmp_path / "p" / "sub.shp").read_bytes() == shp  # only the .dbf changed
    second = _soils(load_project(toml))
    assert len(list((tmp_path / "p" / "cache").glob("overlay-*"))) == 2
    assert first == {"S1": "A", "S2": "B"}
    assert second == {"S1": "B", "S2": "A"}


def test_a_vrt_source_change_changes_the_key(tmp_path):
    from bad_inputs_helpers import edit_toml, soil_codes, write_raster

    toml = _tiny(tmp_path / "p")
    folder = tmp_path / "p"
    vrt = folder / "soil.vrt"
    with rasterio.open(folder / "soil.tif") as src:  # a VRT naming soil.tif as its source
        rasterio.shutil.copy(src, vrt, driver="VRT")
    edit_toml(toml, 'path = "soil.tif"', 'path = "soil.vrt"')
    first = _soils(load_project(toml))
    vrt_bytes = vrt.read_bytes()
    write_raster(folder / "soil.tif", soil_codes()[:, ::-1])  # B west, A east: same VRT file
    assert vrt.read_bytes() == vrt_bytes
    second = _soils(load_project(toml))
    assert first == {"S1": "A", "S2": "B"}
    assert second == {"S1": "B", "S2": "A"}


def test_a_geopackage_wal_is_part_of_the_key(tmp_path):
    """Ids swapped in rows committed to the -wal (another program holds the file open)."""
    import sqlite3

    from gisrun.workflow.checksums import input_checksums

    toml = _tiny(tmp_path / "p")
    project = load_project(toml)
    with sqlite3.connect(project.subcatchments.path) as con:  # WAL mode before the first run
        con.execute("PRAGMA journal_mode=WAL")
    first = _soils(project)
    main_file = Path(project.subcatchments.path).read_bytes()
    other = sqlite3.connect(project.subcatchments.path)
    _spatial_functions(other)  # the GeoPackage's R-tree triggers call them on an update
    try:
        other.execute("PRAGMA wal_autocheckpoint=0")  # the rows stay in the -wal file
        other.execute("UPDATE subcatchments SET code = CASE code WHEN 'S1' THEN 'S2' "
                      "ELSE 'S1' END")
        other.commit()
        assert Path(f"{project.subcatchments.path}-wal").stat().st_size > 0
        assert Path(project.subcatchments.path).read_bytes() == main_file
        wal = Path(f"{project.subcatchments.path}-wal")
        sums = input_checksums(project)  # what run_info and the cache key see at the start
        assert sums["sub.gpkg-wal"] == hashlib.sha256(wal.read_bytes()).hexdigest()
        # (GDAL may checkpoint the -wal into the file while reading: the key covers both)
        second = _soils(project)
    finally:
        other.close()
    assert len(list((tmp_path / "p" / "cache").glob("overlay-*"))) == 2
    assert first == {"S1": "A", "S2": "B"}
    assert second == {"S1": "B", "S2": "A"}


def _spatial_functions(con) -> None:
    """ST_IsEmpty, ST_MinX... over GeoPackage geometry blobs (GeoPackage 1.3, clause 2.1.3)."""
    import shapely

    def geometry(blob: bytes):
        envelope = (0, 32, 48, 48, 64)[(blob[3] >> 1) & 0b111]
        return shapely.from_wkb(bytes(blob[8 + envelope:]))

    con.create_function("ST_IsEmpty", 1, lambda b: int(b is None or geometry(b).is_empty))
    for name, i in (("ST_MinX", 0), ("ST_MinY", 1), ("ST_MaxX", 2), ("ST_MaxY", 3)):
        con.create_function(name, 1, lambda b, i=i: geometry(b).bounds[i])


def test_run_info_checksums_every_file_of_every_dataset(tmp_path):
    import hashlib

    toml = _tiny(tmp_path / "p", "sub.shp")
    folder = tmp_path / "p"
    (folder / "soil.tif.aux.xml").write_text("<PAMDataset></PAMDataset>\n")  # a GDAL sidecar
    sums = run(load_project(toml)).checksums
    for name in ("sub.shp", "sub.shx", "sub.dbf", "sub.prj", "soil.tif", "soil.tif.aux.xml",
                 "cover.tif", "storm.csv", "gisrun.toml"):
        assert sums[name] == hashlib.sha256((folder / name).read_bytes()).hexdigest(), name


def test_a_dataset_whose_files_cannot_be_listed_does_not_use_the_cache(tmp_path):
    from bad_inputs_helpers import edit_toml

    toml = _tiny(tmp_path / "p")
    gdf = gpd.read_file(tmp_path / "p" / "sub.gpkg")
    gdf.to_file(tmp_path / "p" / "sub.gml", driver="GML", engine="pyogrio")  # reads a .gfs too
    edit_toml(toml, 'path = "sub.gpkg"\nlayer = "subcatchments"', 'path = "sub.gml"')
    result = run(load_project(toml))
    assert not (tmp_path / "p" / "cache").exists() or not list(
        (tmp_path / "p" / "cache").glob("overlay-*"))
    assert any("overlay cache was not used" in w and "sub.gml" in w for w in result.warnings)
