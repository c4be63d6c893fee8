"""Parameter ranges: the shipped table against the publication, and user override ranges."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from gisrun.errors import ParameterError
from gisrun.parameters import assign_parameters
from gisrun.parameters.overrides import normalize_overrides
from gisrun.parameters.tables import (
    green_ampt_by_texture,
    green_ampt_ranges_by_texture,
    hsg_conductivity,
)
from gisrun.uncertainty.ranges import ANTECEDENT_DRAW, RangeSettings, parameter_ranges
from gisrun.units import to_si

IN_PER_H = to_si(np.array([1.0]), "in_per_h")[0]


def test_rawls_ranges_are_one_standard_deviation_about_the_tabulated_means():
    # Rawls, Brakensiek and Miller (1983), as reprinted in Chow et al. (1988) Table 4.3.1
    # (values from memory): effective porosity mean +- one SD (arithmetic midpoint) and
    # suction head geometric mean x/÷ one log SD (geometric midpoint) of every texture
    means, ranges = green_ampt_by_texture(), green_ampt_ranges_by_texture()
    assert set(ranges.index) == set(means.index)
    mid = (ranges["effective_porosity_low"] + ranges["effective_porosity_high"]) / 2
    assert np.allclose(mid, means.loc[ranges.index, "effective_porosity"], atol=6e-4)
    geo = np.sqrt(ranges["suction_head_m_low"] * ranges["suction_head_m_high"])
    assert np.allclose(geo, means.loc[ranges.index, "suction_head_m"], rtol=2e-3)
    # sand 4.95 (0.97-25.36) cm and clay 0.385 (0.269-0.501), Chow et al. Table 4.3.1
    assert ranges.at["sand", "suction_head_m_low"] == pytest.approx(0.0097)
    assert ranges.at["clay", "effective_porosity_high"] == pytest.approx(0.501)


def _units(soils=("A", "B", "D"), cover="open_space_good") -> pd.DataFrame:
    return pd.DataFrame({"subcatchment_id": [f"S{i}" for i in range(len(soils))],
                         "soil_class": list(soils), "cover_class": cover,
                         "area_m2": 1000.0})


def _params(method="green_ampt", overrides=None, units=None, **kwargs) -> pd.DataFrame:
    params, _, _ = assign_parameters(units if units is not None else _units(),
                                     classification="hydrologic_soil_group",
                                     initial_saturation=0.3, method=method,
                                     overrides=overrides, **kwargs)
    return params


SETTINGS = RangeSettings("hydrologic_soil_group", initial_saturation=0.3)


def test_green_ampt_ranges_by_texture_of_the_group():
    params = _params()
    r = parameter_ranges(params, SETTINGS)
    table = green_ampt_ranges_by_texture()
    b = np.flatnonzero(params["soil_class"] == "B")[0]  # group B: silt loam (gisrun default)
    assert r.low["suction_head_m"][b] == pytest.approx(table.at["silt loam", "suction_head_m_low"],
                                                       rel=2e-3)
    assert r.low["effective_porosity"][b] == table.at["silt loam", "effective_porosity_low"]
    # conductivity: the texture's suction-head ratio (gisrun's choice, no published range)
    ks = params["ks_m_per_s"].to_numpy()[b]
    assert r.high["ks_m_per_s"][b] / ks == pytest.approx(
        r.high["suction_head_m"][b] / r.central["suction_head_m"][b])
    assert r.draw["ks_m_per_s"][b] == "ks_m_per_s|texture silt loam"
    assert not r.sampled("curve_number").any()  # the run's method does not use it


def test_curve_number_range_is_arc_one_and_three_shared_by_every_unit():
    params = _params("curve_number")
    r = parameter_ranges(params, SETTINGS)
    perv = (params["surface"] == "pervious").to_numpy()
    assert set(r.draw["curve_number"][perv]) == {ANTECEDENT_DRAW}
    cn = r.central["curve_number"]
    # NEH 630 Ch. 10 Table 10-1 (from memory): CN 80 -> ARC I 63, ARC III 91; the engine's
    # conversion (Chow et al. 1988 eqs. 5.5.4-5.5.5) gives 62.7 and 90.2 for 80
    i = int(np.flatnonzero(perv & (params["soil_class"] == "D").to_numpy())[0])  # CN 80
    assert cn[i] == 80.0
    assert r.low["curve_number"][i] == pytest.approx(62.7, abs=0.05)
    assert r.high["curve_number"][i] == pytest.approx(90.2, abs=0.05)
    fixed = parameter_ranges(params, RangeSettings("hydrologic_soil_group",
                                                   antecedent_condition=3))
    assert not fixed.sampled("curve_number").any()


@pytest.mark.parametrize("method,column", [("constant_loss", "constant_loss_m_per_s"),
                                           ("phi_index", "phi_index_m_per_s"),
                                           ("horton", "horton_fc_m_per_s")])
def test_group_rates_span_the_tr55_transmission_range(method, column):
    params = _params(method)
    r = parameter_ranges(params, SETTINGS)
    b = int(np.flatnonzero((params["soil_class"] == "B").to_numpy())[0])
    # group B: 0.15-0.30 in/h, NRCS TR-55 (1986) App. A
    assert r.low[column][b] == pytest.approx(0.15 * IN_PER_H)
    assert r.high[column][b] == pytest.approx(0.30 * IN_PER_H)
    assert r.draw[column][b] == f"{column}|group B"
    assert np.allclose(hsg_conductivity().loc["B", "min_infiltration_mid_m_per_s"],
                       r.central[column][b])


def test_impervious_parts_are_never_sampled():
    params = _params(units=_units(cover="residential_quarter_acre"))
    r = parameter_ranges(params, SETTINGS)
    imp = (params["surface"] == "impervious").to_numpy()
    assert imp.any()
    for column in r.draw:
        assert not r.sampled(column)[imp].any()


def test_user_range_columns_replace_the_published_range_where_the_row_applies():
    over = normalize_overrides(pd.DataFrame({
        "soil_class": ["B", "D"], "ks_mm_per_h": [np.nan, 1.0],
        "ks_mm_per_h_low": [1.0, np.nan], "ks_mm_per_h_high": [9.0, np.nan]}), where="o.csv")
    params = _params(overrides=over)
    r = parameter_ranges(params, SETTINGS, overrides=over)
    soil = params["soil_class"].to_numpy()
    b, d, a = (int(np.flatnonzero(soil == s)[0]) for s in "BDA")
    assert r.low["ks_m_per_s"][b] == pytest.approx(1.0 / 3.6e6)
    assert r.high["ks_m_per_s"][b] == pytest.approx(9.0 / 3.6e6)
    assert r.draw["ks_m_per_s"][b] == "ks_m_per_s|o.csv:row 1"
    assert "your range" in r.source["ks_m_per_s"][b]
    # a value given without a range is taken as known: not sampled
    assert not r.sampled("ks_m_per_s")[d]
    # elsewhere the published range stands
    assert r.draw["ks_m_per_s"][a] == "ks_m_per_s|texture sandy loam"


def test_a_user_range_that_misses_the_value_used_is_an_error():
    over = normalize_overrides(pd.DataFrame({
        "soil_class": ["B"], "suction_head_mm_low": [1.0], "suction_head_mm_high": [2.0]}),
        where="o.csv")
    params = _params(overrides=over)
    with pytest.raises(ParameterError, match=r"o\.csv:row 1:suction_head_m_low/_high.*contain"):
        parameter_ranges(params, SETTINGS, overrides=over)


def test_a_range_for_a_parameter_that_is_not_sampled_is_an_error():
    over = normalize_overrides(pd.DataFrame({
        "soil_class": ["B"], "total_porosity_low": [0.4], "total_porosity_high": [0.5]}),
        where="o.csv")
    params = _params(overrides=over)
    with pytest.raises(ParameterError, match=r"total_porosity_low/_high.*do not sample"):
        parameter_ranges(params, SETTINGS, overrides=over)


def test_range_columns_do_not_change_the_values_a_run_uses():
    plain = _params()
    over = normalize_overrides(pd.DataFrame({
        "soil_class": ["B"], "ks_mm_per_h_low": [1.0], "ks_mm_per_h_high": [9.0]}))
    pd.testing.assert_frame_equal(_params(overrides=over), plain)
