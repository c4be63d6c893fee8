"""Model-input tables: weighting per method, units, and the CSV / GeoPackage round trip."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyogrio
import pytest
from numpy.testing import assert_allclose
from pandas.testing import assert_frame_equal

from gisrun import run, write_outputs
from gisrun.io.geopackage import write_csv
from gisrun.present.model_inputs import excess_series_table, model_inputs
from gisrun.units import SI, US


def parts(method: str) -> pd.DataFrame:
    """One subcatchment: 60 m2 pervious in two soils, 40 m2 impervious (hand-checkable)."""
    return pd.DataFrame({
        "subcatchment_id": ["S"] * 3, "surface": ["pervious", "pervious", "impervious"],
        "area_m2": [20.0, 40.0, 40.0], "loss_method": [method] * 3,
        "ks_m_per_s": [3e-6, 6e-6, 0.0], "suction_head_m": [0.1, 0.2, 0.0],
        "moisture_deficit": [0.3, 0.2, 0.0], "depression_storage_m": [0.005, 0.005, 0.002],
        "curve_number": [61.0, 74.0, 98.0], "initial_abstraction_ratio": [0.2] * 3,
    })


def test_green_ampt_uses_pervious_area_weights_and_states_the_impervious_share():
    out = model_inputs(parts("green_ampt"), ["S"], SI, default_method="green_ampt").iloc[0]
    assert out["impervious_fraction"] == pytest.approx(0.4)
    # (20 x 3 + 40 x 6) / 60 um/s = 5 um/s = 18 mm/h
    assert out["pervious_ks_mm_per_h"] == pytest.approx(5e-6 * 3.6e6)
    # presented values carry 6 significant digits (gisrun.units.SIGNIFICANT_DIGITS)
    assert out["pervious_suction_head_mm"] == pytest.approx((20 * 100 + 40 * 200) / 60, rel=5e-6)
    assert out["impervious_depression_storage_mm"] == pytest.approx(2.0)


def test_curve_number_is_the_area_weighted_composite():
    # TR-55 (1986) ch. 2: composite CN = area-weighted mean, impervious at 98
    out = model_inputs(parts("curve_number"), ["S"], SI, default_method="green_ampt").iloc[0]
    assert out["composite_curve_number"] == pytest.approx((20 * 61 + 40 * 74 + 40 * 98) / 100)
    assert "pervious_ks_mm_per_h" not in out or np.isnan(out["pervious_ks_mm_per_h"])


def test_us_units_rename_and_convert():
    out = model_inputs(parts("green_ampt"), ["S"], US, default_method="green_ampt").iloc[0]
    # presented values carry 6 significant digits (gisrun.units.SIGNIFICANT_DIGITS)
    assert out["pervious_ks_in_per_h"] == pytest.approx(5e-6 * 3600 / 0.0254, rel=5e-6)
    assert out["area_acre"] == pytest.approx(100 / 4046.8564224, rel=5e-6)


@pytest.fixture(scope="module")
def tiny_run(tmp_path_factory):
    from test_cellgrid import tiny_project

    folder = tmp_path_factory.mktemp("export")
    return run(tiny_project(folder / "p")), folder


def test_csv_and_geopackage_round_trip(tiny_run):
    result, folder = tiny_run
    ids = result.subcatchments["subcatchment_id"].tolist()
    computed = model_inputs(result.parameters, ids, SI, default_method="green_ampt")
    back = pd.read_csv(write_csv(folder / "model_inputs.csv", computed),
                       dtype={"subcatchment_id": str})
    assert_frame_equal(back, computed, check_dtype=False, rtol=1e-12)
    gpkg = write_outputs(result, output=folder / "out.gpkg")
    table = pyogrio.read_dataframe(gpkg, layer="model_inputs", read_geometry=False)
    assert_frame_equal(table, computed, check_dtype=False, rtol=1e-12)


def test_excess_series_round_trip_and_sums_to_runoff(tiny_run):
    result, folder = tiny_run
    series = excess_series_table(result.storms, SI)
    back = pd.read_csv(write_csv(folder / "excess.csv", series))
    assert_frame_equal(back, series, check_dtype=False, rtol=1e-12)
    sums = back.groupby("subcatchment_id")["excess_mm"].sum()
    subs = result.storms[0].subcatchments.set_index("subcatchment_id")
    # each presented step carries 6 significant digits (gisrun.units.SIGNIFICANT_DIGITS)
    assert_allclose(sums.loc[subs.index], subs["runoff_depth_m"] * 1000, rtol=1e-5)
    step_min = result.project.time_step_s / 60
    assert_allclose(back["excess_intensity_mm_per_h"], back["excess_mm"] / step_min * 60,
                    rtol=1e-5)
