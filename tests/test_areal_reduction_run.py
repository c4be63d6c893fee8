"""Areal reduction in a run: each subcatchment's rain is the point design rain times its factor.

The tiny project of :mod:`bad_inputs_helpers` (invented data) with a uniform design storm. The
checks are of gisrun's own wiring against exact arithmetic: a factor of 1 must give the
unreduced run bit for bit, a factor ``f`` must give ``f`` times the unreduced rain depth, and the
factors must be the relation's (ARR 2019 Book 2 s. 4.3 and Table 2.4.1, see
``test_areal_reduction.py``; factor tables interpolated linearly in log(area) and duration).
"""

import math

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
from bad_inputs_helpers import CRS, edit_toml, make_project, run_cli, square, write_subcatchments
from test_areal_reduction import printed_arr2019

from gisrun import load_project, run, write_outputs
from gisrun.config.storms import storm_from_config
from gisrun.errors import StormError
from gisrun.present.report_tables import storms_table
from gisrun.units import SI

UNIFORM = 'kind = "uniform"\ndepth = 10\nduration_min = 60\nstep_min = 5\n'
#: Invented factors for the tests: areas 0.001 and 0.01 km2, durations 30 and 120 min.
TABLE = "area_km2,duration_min,factor\n0.001,30,0.9\n0.01,30,0.8\n0.001,120,0.96\n0.01,120,0.86\n"


def _project(folder, reduction=None, *, sizes=(30, 70)):
    """The tiny project with a uniform 10 mm storm, reduced as ``reduction`` says (or not)."""
    toml = make_project(folder)
    (folder / "sub.gpkg").unlink()
    write_subcatchments(folder / "sub.gpkg", [square(0, 0, sizes[0], 100),
                                              square(sizes[0], 0, 100, 100)])
    (folder / "factors.csv").write_text(TABLE)
    line = f"areal_reduction = {reduction}\n" if reduction else ""
    edit_toml(toml, 'kind = "file"\npath = "storm.csv"\n', UNIFORM + line)
    return load_project(folder)


def _layers(gpkg):
    return {name: pyogrio.read_dataframe(gpkg, layer=name, read_geometry=False)
            for name in ("subcatchment_results", "excess_series", "unit_results")}


def _expected_table_factor(area_km2, duration_min=60.0):
    """The invented table at ``area_km2`` and 60 min, by hand: log(area), then duration."""
    w = math.log(area_km2 / 0.001) / math.log(10.0)
    at30, at120 = 0.9 + w * (0.8 - 0.9), 0.96 + w * (0.86 - 0.96)
    return at30 + (duration_min - 30) / 90 * (at120 - at30)


def test_factors_of_one_give_the_unreduced_run_exactly(tmp_path):
    plain = write_outputs(run(_project(tmp_path / "a")), output=tmp_path / "a.gpkg")
    reduced = run(_project(tmp_path / "b", '{ relation = "arr2019_short_duration", '
                           'annual_exceedance_probability = 0.01, over = "subcatchment" }'))
    assert reduced.storms[0].hyetograph.reduction.factor.tolist() == [1.0, 1.0]  # <= 1 km2
    gpkg = write_outputs(reduced, output=tmp_path / "b.gpkg")
    before, after = _layers(plain), _layers(gpkg)
    assert after["subcatchment_results"]["areal_reduction_factor"].tolist() == [1.0, 1.0]
    after["subcatchment_results"] = after["subcatchment_results"].drop(
        columns="areal_reduction_factor")
    for name, frame in before.items():
        assert frame.equals(after[name]), name


def test_each_subcatchment_rain_is_scaled_exactly_by_its_own_factor(tmp_path):
    plain = run(_project(tmp_path / "a")).storms[0].subcatchments
    project = _project(tmp_path / "b", '{ relation = "factor_table", table = "factors.csv", '
                       'over = "subcatchment" }')
    # the table is an input: checksummed, and never an output
    assert project.input_files()["[[storms]] 1.areal_reduction.table"] == (
        tmp_path / "b" / "factors.csv")
    result = run(project)
    applied = result.storms[0].hyetograph.reduction
    expected = [_expected_table_factor(0.003), _expected_table_factor(0.007)]
    np.testing.assert_allclose(applied.factor, expected, rtol=0, atol=1e-12)
    got = result.storms[0].subcatchments
    np.testing.assert_allclose(got["rain_depth_m"], plain["rain_depth_m"] * applied.factor,
                               rtol=1e-12)
    np.testing.assert_allclose(plain["rain_depth_m"], 0.010, rtol=1e-12)
    assert np.all(got["runoff_depth_m"] <= plain["runoff_depth_m"])
    gpkg = write_outputs(result, output=tmp_path / "b.gpkg")
    layer = pyogrio.read_dataframe(gpkg, layer=result.storms[0].layer_name, read_geometry=False)
    np.testing.assert_allclose(layer["areal_reduction_factor"], expected, rtol=1e-6)
    np.testing.assert_allclose(layer["rain_depth_mm"], np.array(expected) * 10, rtol=1e-6)
    info = pyogrio.read_dataframe(gpkg, layer="run_info", read_geometry=False)
    line = info.loc[info["key"] == "areal_reduction", "value"].iloc[0]
    assert "factor_table" in line and "factors.csv" in line and "duration 60 min" in line
    shown = storms_table(result)  # the report's storms section names it too
    assert "areal reduction factor" in shown and "factors.csv" in shown
    assert "Rain per subcatchment" not in shown  # factors are no rain sources


def test_basin_mode_gives_one_factor_from_the_whole_layer(tmp_path):
    plain = run(_project(tmp_path / "a")).storms[0].subcatchments
    result = run(_project(tmp_path / "b", '{ relation = "factor_table", table = "factors.csv", '
                          'over = "basin", duration_min = 120 }'))
    applied = result.storms[0].hyetograph.reduction
    expected = 0.86  # the whole layer is 0.01 km2: the table's corner at 120 min
    assert applied.factor.tolist() == pytest.approx([expected, expected], abs=1e-12)
    assert applied.duration_s == 7200.0 and result.storms[0].hyetograph.areal is None
    np.testing.assert_allclose(result.storms[0].subcatchments["rain_depth_m"],
                               plain["rain_depth_m"] * expected, rtol=1e-12)


def test_check_prints_the_factor_range_per_storm(tmp_path, capsys):
    _project(tmp_path / "b", '{ relation = "factor_table", table = "factors.csv", '
             'over = "subcatchment" }')
    code, out, err = run_cli(capsys, ["check", str(tmp_path / "b")])
    assert code == 0, err
    low, high = _expected_table_factor(0.007), _expected_table_factor(0.003)
    assert f"areal reduction factor {low:.4g}-{high:.4g} (factor_table" in out


def _layer(areas_km2, ids):
    """Square subcatchments of the given areas side by side (no raster needed)."""
    geoms, x = [], 0.0
    for area in areas_km2:
        side = math.sqrt(area) * 1000.0
        geoms.append(square(x, 0, x + side, side))
        x += side + 10.0
    return gpd.GeoDataFrame({"subcatchment_id": ids}, geometry=geoms, crs=CRS)


def _storm(reduction, subs, **keys):
    spec = {"name": "block", "kind": "uniform", "depth": 50, "duration_min": 120,
            "areal_reduction": reduction, **keys}
    return storm_from_config(spec, base_dir=".", units=SI, where="t.toml:[[storms]] 1",
                             subcatchments=subs, step_s=300.0)


def test_the_arr_relation_per_subcatchment_in_a_storm():
    subs = _layer([0.5, 4.0, 50.0], ["small", "mid", "large"])
    h = _storm({"relation": "arr2019_short_duration", "annual_exceedance_probability": 0.02,
                "over": "subcatchment"}, subs)
    arf10 = printed_arr2019(10.0, 120.0, 0.02)
    # <= 1 km2: 1; 1-10 km2: the interpolation (from memory); >= 10 km2: the printed equation
    expected = [1.0, 1 - 0.6614 * (1 - arf10) * (4 ** 0.4 - 1), printed_arr2019(50.0, 120, 0.02)]
    np.testing.assert_allclose(h.reduction.factor, expected, rtol=0, atol=1e-6)  # polygon area
    np.testing.assert_allclose(h.areal.total_depth_m, 0.05 * h.reduction.factor, rtol=1e-12)


@pytest.mark.parametrize("areas, reduction, match", [
    ([2.0, 1600.0], {"over": "subcatchment"}, r"storm 'block', subcatchment 'b' \(1,600 km2, "
     r"120 min\): arr2019_short_duration: area 1,600 km2 is above the 1000 km2"),
    ([600.0, 600.0], {"over": "basin"}, r"the basin \(1,200 km2, 120 min\).*factor_table"),
    ([2.0, 3.0], {"over": "subcatchment", "duration_min": 1440},
     r"subcatchment 'a' \(2 km2, 1440 min\).*beyond the short-duration relation"),
    # no one area is at fault: the line names the storm and duration, not a subcatchment
    ([2.0, 3.0], {"over": "subcatchment", "annual_exceedance_probability": 0.9},
     r"storm 'block' \(120 min\): arr2019_short_duration: annual exceedance probability 0.9"),
])
def test_outside_the_arr_relation_the_storm_is_refused_in_one_line(areas, reduction, match):
    subs = _layer(areas, ["a", "b"])
    spec = {"relation": "arr2019_short_duration", "annual_exceedance_probability": 0.01,
            **reduction}
    with pytest.raises(StormError, match=match) as err:
        _storm(spec, subs)
    assert str(err.value).startswith("t.toml:[[storms]] 1.areal_reduction: ")
    assert "\n" not in str(err.value)


def test_areal_reduction_is_refused_for_rain_that_fell():
    subs = _layer([2.0], ["a"])
    spec = {"name": "obs", "kind": "file", "path": "x.csv",
            "areal_reduction": {"relation": "fixed_factor", "factor": 0.9}}
    with pytest.raises(StormError, match="areal reduction applies to point design depths"):
        storm_from_config(spec, base_dir=".", units=SI, where="t", subcatchments=subs,
                          step_s=300.0)
    with pytest.raises(StormError, match="needs the subcatchment layer"):
        storm_from_config({"kind": "uniform", "depth": 5, "duration_min": 60,
                           "areal_reduction": spec["areal_reduction"]},
                          base_dir=".", units=SI, where="t")
    fixed = storm_from_config({"kind": "uniform", "depth": 5, "duration_min": 60,
                               "areal_reduction": spec["areal_reduction"]},
                              base_dir=".", units=SI, where="t", subcatchments=subs,
                              step_s=300.0)
    assert fixed.total_depth_m == pytest.approx(0.9 * 0.005, rel=1e-12)
    assert fixed.reduction.over == "basin" and fixed.areal is None
