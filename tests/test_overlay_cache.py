"""The on-disk overlay cache: a re-run with a new storm reads the overlay instead of redoing it."""

import dataclasses
from pathlib import Path

import pandas as pd
import pytest

import gisrun.workflow.chunks as chunks
from gisrun import load_project, run
from gisrun.errors import GisrunError, OutputError
from gisrun.io.overlay_cache import entry_folder, load_overlay, overlay_key, save_overlay

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
