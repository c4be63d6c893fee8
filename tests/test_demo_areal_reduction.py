"""The demo's areal reduction project (``demo_catchment/areal_reduction.toml``, invented data).

Its factors must be the relations' (ARR 2019 Book 2 s. 4.3 and Table 2.4.1, public copy at
tonyladson.wordpress.com, equation 1; see ``test_areal_reduction.py``), the invented factor
table's by hand, and the main demo project must carry no areal reduction (its results are
unchanged by this scenario).
"""

import math
from pathlib import Path

import numpy as np
import pyogrio
import pytest
from test_areal_reduction import printed_arr2019

from gisrun import load_project, read_inputs

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


@pytest.fixture(scope="module")
def storms():
    return {h.name: h for h in read_inputs(load_project(DEMO / "areal_reduction.toml")).storms}


def test_each_subcatchment_is_under_1_km2_so_arr_gives_1(storms):
    point, per_sub = storms["block_2h_point"], storms["block_2h_arr_per_subcatchment"]
    assert per_sub.reduction.factor.max() == 1.0 == per_sub.reduction.factor.min()
    assert per_sub.reduction.area_m2.max() < 1e6  # ARR Book 2 Table 2.4.1: <= 1 km2, ARF = 1
    assert np.array_equal(per_sub.depth_m, point.depth_m) and per_sub.areal is None


def test_basin_factors_are_the_relations_at_the_towns_area(storms):
    layer = pyogrio.read_dataframe(DEMO / "subcatchments.gpkg")
    planar_km2 = layer.geometry.area.sum() / 1e6  # UTM metres; ground area differs < 0.1 %
    arr = storms["block_2h_arr_basin"].reduction
    area_km2 = float(arr.area_m2[0]) / 1e6
    assert area_km2 == pytest.approx(planar_km2, rel=1e-3)
    assert 1.0 < area_km2 < 10.0  # ARR's 1-10 km2 interpolation (typed from memory)
    arf10 = printed_arr2019(10.0, 120.0, 0.01)
    expected = 1 - 0.6614 * (1 - arf10) * (area_km2 ** 0.4 - 1)
    np.testing.assert_allclose(arr.factor, expected, rtol=0, atol=1e-12)
    point = storms["block_2h_point"].total_depth_m
    assert storms["block_2h_arr_basin"].total_depth_m == pytest.approx(expected * point,
                                                                       rel=1e-12)
    assert storms["block_2h_fixed_0_95"].total_depth_m == pytest.approx(0.95 * point, rel=1e-12)
    # the invented table at 1440 min: 1.0 at 1 km2, 0.96 at 10 km2, linear in log(area)
    table = storms["nrcs_ii_24h_100yr_140mm_basin"].reduction
    by_hand = 1.0 + math.log10(area_km2) * (0.96 - 1.0)
    np.testing.assert_allclose(table.factor, by_hand, rtol=0, atol=1e-12)
    assert storms["nrcs_ii_24h_100yr_140mm_basin"].total_depth_m == pytest.approx(
        0.140 * by_hand, rel=1e-12)


def test_the_main_demo_has_no_areal_reduction():
    main = load_project(DEMO / "gisrun.toml")
    assert not any("areal_reduction" in spec for spec in main.storms)
    text = (DEMO / "storms" / "invented_area_factors.csv").read_text()
    assert "Invented" in text and "not from any publication" in text
