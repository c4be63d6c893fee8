"""Areal rain: rain per subcatchment carried by a storm, resampled and run per unit.

References: the resampling must be numpy's own linear interpolation of the cumulative depth
(``np.interp``, the reference library) column by column; a uniform areal rain must give the
uniform storm's results exactly (issue acceptance: exact equality of the GeoPackage tables).
"""

import dataclasses
import re
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pyogrio
import pytest

from gisrun import load_project, read_inputs, run, write_extras, write_outputs
from gisrun.config.areal import AREAL_KINDS, ArealKind
from gisrun.config.storms import storm_from_config
from gisrun.errors import InputError, StormError
from gisrun.present import maps, plots
from gisrun.storm import ArealRain, Hyetograph, areal_storm, weighted_mean
from gisrun.storm.areal import interpolate_columns
from gisrun.workflow.bands import check_named_ids
from gisrun.workflow.chunks import chunk_size_for_budget
from gisrun.write.extras import ExtrasOptions

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


def test_columns_resample_as_their_own_hyetographs_bit_for_bit():
    rng = np.random.default_rng(7)
    depth = rng.uniform(0.0, 0.004, (37, 4))
    depth[5:9, 2] = 0.0
    rain = ArealRain(depth, 300.0, ("a", "b", "c", "d"), "random")
    for dt in (300.0, 60.0, 420.0, 900.0, 1111.0, 86400.0):
        matrix = rain.resample(dt)
        for c in range(4):
            own = Hyetograph("h", rain.time_s, depth[:, c]).resample(dt)
            assert np.array_equal(matrix[:, c], own), (dt, c)
        # depth conserved per column (the last step padded with no rain)
        np.testing.assert_allclose(matrix.sum(axis=0), depth.sum(axis=0), rtol=1e-12)
    picked = rain.resample(600.0, np.array([3, 0]))
    assert np.array_equal(picked, rain.resample(600.0)[:, [3, 0]])


def test_interpolate_columns_is_numpy_interp():
    rng = np.random.default_rng(3)
    xp = np.concatenate([[0.0], np.cumsum(rng.uniform(1.0, 50.0, 40))])
    fp = rng.uniform(0.0, 1.0, (41, 3))
    x = np.concatenate([[-5.0], np.sort(rng.uniform(0.0, xp[-1] + 20.0, 200)), xp[:5]])
    got = interpolate_columns(x, xp, fp)
    for c in range(3):
        assert np.array_equal(got[:, c], np.interp(x, xp, fp[:, c]))


def test_weighted_mean_by_hand_and_exact_for_identical_sources():
    values = np.array([[1.0, 3.0], [2.0, 2.0], [0.1, 0.1]])
    weights = np.array([[0.25, 0.75], [1 / 3, 2 / 3]])
    got = weighted_mean(values, weights)
    np.testing.assert_allclose(got[0], [0.25 + 2.25, 1 / 3 + 2.0], rtol=1e-15)
    assert np.array_equal(got[1], [2.0, 2.0])
    assert np.array_equal(got[2], [0.1, 0.1])  # 0.1 * (1/3 + 2/3) would not be exactly 0.1


@pytest.mark.parametrize("depth, ids, match", [
    (np.ones((3, 2)) * -1e-3, ("a", "b"), "step 1 of subcatchment 'a' has rain"),
    (np.ones((3, 2)), ("a",), r"shape \(3, 2\) for 1 subcatchments"),
    (np.ones((3, 2)), ("a", "a"), "names a subcatchment twice"),
])
def test_bad_areal_rain_is_refused(depth, ids, match):
    with pytest.raises(StormError, match=match):
        ArealRain(depth, 300.0, ids, "test")


def test_a_missing_subcatchment_is_named():
    rain = ArealRain(np.ones((2, 2)) * 1e-3, 300.0, ("a", "b"), "test")
    with pytest.raises(StormError, match="has no rain for subcatchment 'c'"):
        rain.positions(["b", "c"], "storm 'x'")


def test_areal_rain_counts_in_the_chunk_budget():
    plain = chunk_size_for_budget(1500, 288, 2)
    assert chunk_size_for_budget(1500, 288, 2, areal_storms=1) < plain
    assert chunk_size_for_budget(1500, 288, 2, areal_storms=2) < chunk_size_for_budget(
        1500, 288, 2, areal_storms=1)


@pytest.fixture(scope="module")
def demo():
    loaded = load_project(DEMO)
    project = dataclasses.replace(loaded, storms=loaded.storms[-1:])  # the short observed event
    return project, read_inputs(project)


def _uniform_areal(inputs, columns):
    """The storm's series in every column (``columns`` maps subcatchment id -> series)."""
    h = inputs.storms[0]
    ids = inputs.subcatchments["subcatchment_id"].astype(str).tolist()[::-1]  # any order
    depth = np.column_stack([columns(i) for i in ids])
    weights = pd.DataFrame({"source_id": ["g1"] * len(ids), "subcatchment_id": ids,
                            "weight": 1.0})
    rain = ArealRain(depth, float(h.steps_s[0]), ids, "one invented gauge", weights)
    return areal_storm(h.name, rain, np.ones(len(ids)))


def _layers(path):
    return {name: pyogrio.read_dataframe(path, layer=name)
            for name, _ in pyogrio.list_layers(path)}


def test_uniform_areal_rain_gives_exactly_the_uniform_storm(demo, tmp_path):
    project, inputs = demo
    h = inputs.storms[0]
    storm = _uniform_areal(inputs, lambda _: h.depth_m)
    assert np.array_equal(storm.depth_m, h.depth_m)  # the basin mean is the series itself
    small = dataclasses.replace(project, memory_budget_mb=2.0)  # chunks of 16 (the least)
    plain = write_outputs(run(small, inputs=inputs), output=tmp_path / "plain.gpkg")
    areal = write_outputs(run(small, inputs=dataclasses.replace(inputs, storms=(storm,))),
                          output=tmp_path / "areal.gpkg")
    before, after = _layers(plain), _layers(areal)
    assert set(after) == set(before) | {"rain_weights"}
    for name, frame in before.items():
        if name != "run_info":
            pd.testing.assert_frame_equal(after[name], frame, check_exact=True, obj=name)
    weights = after["rain_weights"]
    assert len(weights) == len(inputs.subcatchments) and set(weights["weight"]) == {1.0}


def test_each_subcatchment_gets_its_own_column(demo):
    """Half the subcatchments under the event, half under twice it: each half's results equal
    a uniform run of its own series (every unit is computed elementwise)."""
    project, inputs = demo
    h = inputs.storms[0]
    ids = inputs.subcatchments["subcatchment_id"].astype(str).to_numpy()
    doubled = set(ids[::2])
    storm = _uniform_areal(inputs, lambda i: h.depth_m * (2.0 if i in doubled else 1.0))
    areal = run(project, inputs=dataclasses.replace(inputs, storms=(storm,))).storms[0]
    once = run(project, inputs=inputs).storms[0]
    twice = run(project, inputs=dataclasses.replace(inputs, storms=(h.scaled(2.0),))).storms[0]
    got = areal.subcatchments.set_index("subcatchment_id")
    for expected, chosen in ((twice, list(doubled)), (once, sorted(set(ids) - doubled))):
        want = expected.subcatchments.set_index("subcatchment_id").loc[chosen]
        for column in ("rain_depth_m", "runoff_depth_m", "infiltration_depth_m",
                       "time_to_ponding_s"):
            np.testing.assert_allclose(got.loc[chosen, column], want[column], rtol=1e-12)
    assert areal.rain_per_step_m.shape == (len(h.depth_m), len(ids))
    # The run's result holds no (steps, subcatchments) matrix; made when asked, it is each
    # subcatchment's own series, in the layer's order (built above from the hyetograph).
    assert areal.step_rain.values_m is None and areal.steps == len(h.depth_m)
    for i, sub in enumerate(ids):
        np.testing.assert_allclose(areal.rain_per_step_m[:, i],
                                   h.depth_m * (2.0 if sub in doubled else 1.0), rtol=1e-12)
    assert np.array_equal(areal.step_rain.columns(np.array([3, 0])),
                          areal.rain_per_step_m[:, [3, 0]])
    total = got["rain_depth_m"].to_numpy()
    assert total.max() == pytest.approx(2 * total.min(), rel=1e-12)


def _flat_rain(table, subcatchments, units, memory_budget_mb):
    """A kind for the test: ``depth_mm`` per step for 3 steps of 5 min, every subcatchment."""
    assert memory_budget_mb == 1500.0  # the run's budget reaches the builder (the default)
    ids = subcatchments["subcatchment_id"].astype(str).tolist()
    depth = table.number("depth_mm", low=0.0) / 1000.0
    return ArealRain(np.full((3, len(ids)), depth), 300.0, ids, f"flat {table.data['label']}")


@pytest.fixture
def flat_kind(monkeypatch):
    kind = ArealKind(keys=("depth_mm", "label", "records"), required=("depth_mm", "label"),
                     file_keys=("records",), build=_flat_rain, default_name="flat_{label}")
    monkeypatch.setitem(AREAL_KINDS, "flat_rain", kind)
    return kind


def test_an_areal_kind_is_read_from_the_project_file(flat_kind, tmp_path):
    text = (DEMO / "gisrun.toml").read_text().replace('path = "subcatchments.gpkg"',
                                                      f'path = "{DEMO}/subcatchments.gpkg"')
    for name in ("soil_groups.tif", "land_cover.tif"):
        text = text.replace(f'path = "{name}"', f'path = "{DEMO / name}"')
    head = text[: text.index("\n[[storms]]") + 1]
    (tmp_path / "gisrun.toml").write_text(
        head + '[[storms]]\nkind = "flat_rain"\ndepth_mm = 2\nlabel = "x"\n'
        'records = "rain.csv"\n')
    project = dataclasses.replace(load_project(tmp_path), storm_file_keys=(
        "path", "idf_table", "records"))
    assert project.input_files()["[[storms]] 1.records"] == tmp_path / "rain.csv"
    storm = read_inputs(project).storms[0]
    assert storm.name == "flat_x" and storm.areal is not None
    assert storm.areal.source == "flat x"
    np.testing.assert_allclose(storm.depth_m, [0.002] * 3, rtol=1e-15)
    with pytest.raises(StormError, match="needs the subcatchment layer"):
        storm_from_config({"kind": "flat_rain", "depth_mm": 2, "label": "x"},
                          base_dir=tmp_path, units=project.units, where="t")


def test_areal_storm_gets_a_rain_map_and_weights_in_run_info(demo, tmp_path, monkeypatch):
    project, inputs = demo
    h = inputs.storms[0]
    storm = _uniform_areal(inputs, lambda i: h.depth_m * (1.0 + int(i[-1]) % 3))
    result = run(project, inputs=dataclasses.replace(inputs, storms=(storm,)))
    gpkg = write_outputs(result, output=tmp_path / "areal.gpkg")
    titles: list[str] = []
    drawn = maps.subcatchment_map
    monkeypatch.setattr(maps, "subcatchment_map", lambda gdf, column, **kw: titles.append(
        kw["title"]) or drawn(gdf, column, **kw))
    made = write_extras(result, gpkg, options=ExtrasOptions(rasters=False))
    # the rain map's own title says it is each subcatchment's storm total and its source
    assert (f"Total rain depth per subcatchment, {storm.name}\neach subcatchment's "
            "area-weighted mean of one invented gauge") in titles
    key = f"rain_depth_{result.storms[0].file_stem}"
    assert made.maps[key].is_file() and made.maps[key].stat().st_size > 10_000
    report = made.report.read_text(encoding="utf-8")
    assert "Rain depth per subcatchment" in report
    # the sources table: the one invented gauge carries the whole basin (share 1)
    assert re.search(r"<td>g1</td><td[^>]*>85</td><td[^>]*>1</td>", report), report[:0]
    info = pyogrio.read_dataframe(gpkg, layer="run_info")
    assert "one invented gauge" in info.loc[info["key"] == "areal_rain", "value"].iloc[0]


def test_uncertainty_bands_take_an_areal_storm_and_still_check_tornado_ids(demo):
    # bands are made for a storm of areal rain too (tests/uncertainty/test_uncertainty_areal.py)
    project, inputs = demo
    storm = _uniform_areal(inputs, lambda _: inputs.storms[0].depth_m)
    ranges = SimpleNamespace(sensitivity_subcatchments=())  # any [uncertainty] table
    areal = dataclasses.replace(inputs, storms=(storm,))
    check_named_ids(dataclasses.replace(project, uncertainty=ranges), areal)
    unknown = SimpleNamespace(sensitivity_subcatchments=("no_such_id",))
    with pytest.raises(InputError, match="names subcatchment 'no_such_id'"):
        check_named_ids(dataclasses.replace(project, uncertainty=unknown), areal)


@pytest.mark.parametrize(("source", "made"), [
    ("3 rain gauges (storms/gauge_records.csv), Thiessen polygons",
     "3 rain gauges, Thiessen polygons"),
    ("2 rain gauges (g.csv), inverse distance from each centroid, power 2",
     "2 rain gauges, inverse distance from each centroid, power 2"),
    ("rain grid radar.nc:rain (13 x 9 cells of 0.005 x 0.005 degrees, WGS 84; 36 steps of "
     "5 min from 2026-07-14T15:00:00; exact area weights)", "rain grid radar.nc:rain")])
def test_rain_panels_and_maps_name_the_source_and_the_weighting(source, made):
    # A reviewer must tell gauges weighted by Thiessen polygons from inverse distance, and a
    # map of storm totals from one step's rain, from the figure alone.
    h = SimpleNamespace(name="ev", areal=SimpleNamespace(source=source), reduction=None)
    assert plots.hyetograph_title(h) == f"ev: area-weighted mean over the subcatchments of {made}"
    assert plots.rain_map_title(h) == (f"Total rain depth per subcatchment, ev\n"
                                       f"each subcatchment's area-weighted mean of {made}")
