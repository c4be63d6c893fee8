"""Large runs stream their unit rows into the GeoPackage: same layers as a run kept in memory."""

import dataclasses
import sqlite3
from contextlib import closing
from pathlib import Path

import numpy as np
import pandas as pd
import pyogrio
import pytest
import rasterio

import gisrun.workflow.stream as stream
from gisrun import load_project
from gisrun.io.geopackage import write_ranked_table
from gisrun.present.layers import _ranked
from gisrun.units import SI, US, present_frame, si_frame
from gisrun.workflow.stream import run_and_write
from gisrun.write.extras import ExtrasOptions, write_extras

#: End-to-end, dask, memory, interrupt and fuzz tests: `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


@pytest.fixture(scope="module")
def two_ways(tmp_path_factory):
    """The demo's last two storms in several chunks, kept in memory and streamed."""
    project = load_project(DEMO)
    project = dataclasses.replace(project, memory_budget_mb=5.0, storms=project.storms[-2:])
    folder = tmp_path_factory.mktemp("streamed")
    kept, kept_path = run_and_write(project, output=folder / "kept.gpkg")
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(stream, "KEEP_STEP_ARRAYS_BELOW", 0)  # as a run of a county would
        streamed, streamed_path = run_and_write(project, output=folder / "streamed.gpkg")
    return kept, kept_path, streamed, streamed_path


def layer(path, name):
    return pyogrio.read_dataframe(path, layer=name, read_geometry=False)


def test_streamed_run_keeps_no_unit_rows(two_ways):
    kept, _, streamed, _ = two_ways
    assert streamed.parameters is None
    assert all(s.units is None and s.loss is None for s in streamed.storms)
    assert kept.parameters is not None
    assert streamed.unit_count == kept.unit_count == len(kept.parameters)
    assert streamed.method_counts == kept.parameters["loss_method"].value_counts().to_dict()


def test_every_layer_equals_the_run_kept_in_memory(two_ways):
    _, kept_path, _, streamed_path = two_ways
    names = [n for n, _ in pyogrio.list_layers(kept_path)]
    assert sorted(names) == sorted(n for n, _ in pyogrio.list_layers(streamed_path))
    for name in names:
        a, b = layer(kept_path, name), layer(streamed_path, name)
        if name == "run_info":
            a, b = (f[f["key"] != "started_utc"].reset_index(drop=True) for f in (a, b))
        # streamed rows come chunk by chunk, storms within a chunk; kept ones storm by storm
        keys = {"unit_results": ["storm", "subcatchment_id", "soil_class", "cover_class",
                                 "surface"],
                "excess_series": ["storm", "subcatchment_id", "time_end_min"]}
        if name in keys:
            a, b = (f.sort_values(keys[name], kind="stable").reset_index(drop=True)
                    for f in (a, b))
        pd.testing.assert_frame_equal(a, b, check_exact=True, obj=name)
    assert len(layer(streamed_path, "ponding_rank_units")) > 100


def test_streamed_extras_read_the_unit_rows_back(two_ways):
    kept, kept_path, streamed, streamed_path = two_ways
    options = ExtrasOptions(maps=False, report=True)
    a = write_extras(kept, kept_path, options=options)
    b = write_extras(streamed, streamed_path, options=options)
    assert a.rasters.keys() == b.rasters.keys()
    for storm, paths in a.rasters.items():
        for kind, path in paths.items():
            with rasterio.open(path) as x, rasterio.open(b.rasters[storm][kind]) as y:
                np.testing.assert_array_equal(x.read(1), y.read(1))
    report = b.report.read_text(encoding="utf-8")
    first = layer(streamed_path, "ponding_rank_units").iloc[0]
    assert f"<td>{first['subcatchment_id']}</td>" in report  # top of the unit ranking shown


@pytest.mark.parametrize(("n", "cache_mb"), [(400, None), (400, 64.0), (30_000, 0.01)])
def test_ranking_inside_the_file_matches_pandas(tmp_path, n, cache_mb):
    # The same rule as the in-memory ranking: per storm (in the given order), by value with
    # empty values last, then by the keys, then by row order; ties share the smallest rank.
    # With a page cache of 10 kB, SQLite's sort of 30,000 rows spills to temporary files.
    rng = np.random.default_rng(5)
    storms = np.array(["late's storm", "early", "mid"])[rng.integers(0, 3, n)]
    values = rng.choice([np.nan, 60.0, 120.0, 180.0, 240.5], n)
    frame = pd.DataFrame({
        "storm": storms,
        "subcatchment_id": rng.choice(["S1", "S2", "S10", "s3"], n),
        "soil_class": rng.choice(["A", "B", "C/D"], n),
        "cover_class": rng.choice(["grass", "roof"], n),
        "surface": rng.choice(["pervious", "impervious"], n, p=[0.8, 0.2]),
        "time_to_ponding_s": values,
        "area_m2": rng.uniform(1, 100, n),
    })
    path = tmp_path / "t.gpkg"
    pyogrio.write_dataframe(frame, path, layer="rows", driver="GPKG")
    order = ["mid", "late's storm", "early"]
    keys = ["subcatchment_id", "soil_class", "cover_class"]
    write_ranked_table(path, source="rows", target="ranked", group="storm", group_order=order,
                       value="time_to_ponding_s", keys=keys,
                       columns=[*keys, "time_to_ponding_s", "area_m2"], rank="ponding_rank",
                       exclude=("surface", "impervious"), cache_mb=cache_mb)
    got = layer(path, "ranked")
    pervious = frame[frame["surface"] != "impervious"]
    want = pd.concat([_ranked(pervious[pervious["storm"] == s][[*keys, "time_to_ponding_s",
                                                               "area_m2"]], s, keys)
                      for s in order], ignore_index=True)
    pd.testing.assert_frame_equal(got, want, check_dtype=False, check_exact=True)
    with closing(sqlite3.connect(path)) as db:  # registered as a GeoPackage table
        kind = db.execute("SELECT data_type FROM gpkg_contents WHERE table_name = 'ranked'")
        assert kind.fetchone() == ("attributes",)


@pytest.mark.parametrize("system", [SI, US])
def test_si_frame_undoes_present_frame(system):
    frame = pd.DataFrame({"runoff_depth_m": [0.0254, 0.1], "time_to_ponding_s": [600.0, 90.0],
                          "area_m2": [4046.8564224, 10.0], "runoff_volume_m3": [1.0, 2.0],
                          "ks_m_per_s": [1e-6, 2e-7], "runoff_coefficient": [0.5, 0.25],
                          "subcatchment_id": ["a", "b"]})
    back = si_frame(present_frame(frame, system), system)
    # presented values carry 6 significant digits (gisrun.units.SIGNIFICANT_DIGITS)
    pd.testing.assert_frame_equal(back, frame, check_exact=False, rtol=5e-6)


def test_write_outputs_refuses_a_run_without_its_unit_rows(two_ways, tmp_path):
    from gisrun import write_outputs

    _, _, streamed, _ = two_ways
    with pytest.raises(ValueError, match="streamed its rows"):
        write_outputs(streamed, output=tmp_path / "x.gpkg")
    assert not (tmp_path / "x.gpkg").exists()


def test_ranked_table_counts_its_rows_and_keeps_the_count_trigger(tmp_path):
    # The ranking inserts its rows with GDAL's per-row count trigger set aside: the layer's
    # count in gpkg_ogr_contents must still be its rows (GDAL reports it without counting),
    # and the trigger must be back, counting rows added later.
    frame = pd.DataFrame({"storm": ["a"] * 5 + ["b"] * 3, "subcatchment_id": list("pqrstuvw"),
                          "time_to_ponding_s": [3.0, 1.0, np.nan, 1.0, 2.0, 5.0, 4.0, 4.0]})
    path = tmp_path / "t.gpkg"
    pyogrio.write_dataframe(frame, path, layer="rows", driver="GPKG")
    write_ranked_table(path, source="rows", target="ranked", group="storm",
                       group_order=["b", "a"], value="time_to_ponding_s",
                       keys=["subcatchment_id"], columns=["subcatchment_id", "time_to_ponding_s"],
                       rank="ponding_rank")
    assert pyogrio.read_info(path, layer="ranked")["features"] == 8
    got = layer(path, "ranked")
    assert got["ponding_rank"].tolist()[:3] == [1, 1, 3]  # storm b first: 4.0 and 4.0 tie
    with closing(sqlite3.connect(path)) as db, db:
        count = "SELECT feature_count FROM gpkg_ogr_contents WHERE table_name = 'ranked'"
        assert db.execute(count).fetchone() == (8,)
        db.execute("INSERT INTO ranked (storm) VALUES ('c')")
        assert db.execute(count).fetchone() == (9,)
