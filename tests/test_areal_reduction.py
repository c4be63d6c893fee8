"""Areal reduction relations: the ARR 2019 short-duration factor, its area rules, factor tables.

Source of the equation and of the rules (checked here against values computed from the printed
form, typed separately below): Australian Rainfall and Runoff 2019 (Ball et al., eds.), Book 2,
Chapter 4, section 4.3 (short-duration ARF equation) and Book 2 Table 2.4.1 (which relation
applies by area and duration). Public copy used: A. Ladson, "ARR2019 - Areal Reduction Factors:
interpolating between short and long duration ARFs" and "ARR2019 - Areal Reduction Factors",
https://tonyladson.wordpress.com/page/2/ (equation 1) and .../category/r/ (the list of Table
2.4.1's cases). No printed table of ARR 2019 factor values (worked example numbers) was found
in a public copy, so the check is against the printed equation evaluated here. The 1-10 km2
interpolation, ARF = 1 - 0.6614 (1 - ARF_10km2) (A^0.4 - 1), is from memory (no public copy
found); its continuity at 1 and 10 km2 is checked, which a typo in either constant would break.
"""

import dataclasses
import math

import numpy as np
import pytest

from gisrun.errors import StormError
from gisrun.io.factor_table import read_factor_table_csv
from gisrun.present import plots
from gisrun.present.reduction import reduction_line
from gisrun.storm import AppliedReduction, FactorTable, reduced_storm, uniform
from gisrun.storm.areal_reduction import (
    ReductionRangeError,
    arr2019_short_duration_equation,
    arr2019_short_duration_factor,
)
from gisrun.units import SI, US

KM2, MI2_KM2 = 1e6, 2.589988110336  # 1 mi2 = (5280 x 0.3048 m)^2, exact by definition


def printed_arr2019(a: float, d: float, p: float) -> float:
    """ARR 2019 Book 2 section 4.3 short-duration ARF as printed (Ladson's equation 1).

    A km2, D min, P AEP fraction; typed here apart from gisrun's code.
    """
    term = 0.3 + math.log10(p)
    return min(1.0, 1.0
               - 0.287 * (a ** 0.265 - 0.439 * math.log10(d)) * d ** (-0.36)
               + 0.00226 * a ** 0.226 * d ** 0.125 * term
               + 0.0141 * a ** 0.213 * 10 ** (-0.021 * (d - 180) ** 2 / 1440) * term)


GRID = [(a, d, p) for a in (10, 50, 100, 500, 1000) for d in (60, 180, 360, 720)
        for p in (0.5, 0.1, 0.01)]


@pytest.mark.parametrize("a, d, p", GRID)
def test_equation_matches_the_printed_form(a, d, p):
    # ARR 2019 Book 2 s. 4.3 (public copy: tonyladson.wordpress.com, equation 1)
    expected = printed_arr2019(a, d, p)
    assert abs(float(arr2019_short_duration_equation(a, d, p)) - expected) <= 1e-12
    # 10-1000 km2 at durations up to 12 h: the equation itself (ARR Book 2 Table 2.4.1)
    assert abs(float(arr2019_short_duration_factor([a], d, p)[0]) - expected) <= 1e-12
    assert 0.0 < expected < 1.0  # these areas are all reduced


def test_a_few_printed_values_by_hand():
    # 100 km2, 6 h, 1 % AEP and 1000 km2, 1 h, 1 % AEP worked through the printed terms here
    d, a = 360.0, 100.0
    t1 = 0.287 * (100 ** 0.265 - 0.439 * math.log10(360)) * 360 ** -0.36
    t2 = 0.00226 * 100 ** 0.226 * 360 ** 0.125 * (0.3 - 2)
    t3 = 0.0141 * 100 ** 0.213 * 10 ** (-0.021 * 180 ** 2 / 1440) * (0.3 - 2)
    assert float(arr2019_short_duration_factor([a], d, 0.01)[0]) == pytest.approx(
        1 - t1 + t2 + t3, abs=1e-12)
    assert float(arr2019_short_duration_factor([1000.0], 60.0, 0.01)[0]) == pytest.approx(
        0.5464, abs=5e-5)  # the terms: 1 - 0.3587 - 0.0305 - 0.0644, summed by hand


@pytest.mark.parametrize("d", [5.0, 60.0, 720.0, 1440.0, 4320.0])
def test_one_square_kilometre_or_less_is_not_reduced_at_any_duration(d):
    # ARR Book 2 Table 2.4.1: catchment area <= 1 km2, ARF = 1 for any duration
    got = arr2019_short_duration_factor([1e-6, 0.02, 0.5, 1.0], d, 0.01)
    assert got.tolist() == [1.0, 1.0, 1.0, 1.0]


@pytest.mark.parametrize("d", [60.0, 180.0, 360.0, 720.0])
@pytest.mark.parametrize("p", [0.5, 0.1, 0.01, 0.001])
def test_the_small_area_interpolation_joins_at_1_and_10_km2(d, p):
    below_10, at_10 = arr2019_short_duration_factor([10.0 - 1e-9, 10.0], d, p)
    just_above_1 = arr2019_short_duration_factor([1.0 + 1e-9], d, p)[0]
    assert abs(just_above_1 - 1.0) < 1e-4
    assert abs(below_10 - at_10) < 1e-4
    assert 0.6614 * (10 ** 0.4 - 1) == pytest.approx(1.0, abs=1e-4)
    # halfway in the 1-10 km2 band: the form typed from memory, worked by hand
    arf10 = printed_arr2019(10.0, d, p)
    assert arr2019_short_duration_factor([4.0], d, p)[0] == pytest.approx(
        1 - 0.6614 * (1 - arf10) * (4 ** 0.4 - 1), abs=1e-12)


@pytest.mark.parametrize("d", [30.0, 60.0, 120.0, 180.0, 360.0, 540.0, 720.0])
@pytest.mark.parametrize("p", [0.5, 0.2, 0.1, 0.02, 0.01, 0.002, 0.0005])
def test_factor_is_at_most_one_and_falls_with_area(d, p):
    area = np.concatenate([np.geomspace(0.01, 1000.0, 600), [1.0, 10.0]])
    area.sort()
    got = arr2019_short_duration_factor(area, d, p)
    assert np.all(got <= 1.0) and np.all(got > 0.0)
    assert np.all(np.diff(got) <= 1e-15)


@pytest.mark.parametrize("area, d, p, match", [
    (1500.0, 60.0, 0.01, "above the 1000 km2"),
    (50.0, 1440.0, 0.01, "beyond the short-duration relation"),
    (2.0, 780.0, 0.01, "beyond the short-duration relation"),
    (50.0, 60.0, 0.7, "outside \\(0, 0.5\\]"),
    (1000.0, 1.0, 0.01, "too short a duration"),
])
def test_outside_the_relation_is_refused(area, d, p, match):
    with pytest.raises(ReductionRangeError, match=match) as err:
        arr2019_short_duration_factor([0.5, area], d, p)
    assert "\n" not in str(err.value)
    if p <= 0.5:
        assert err.value.index == 1  # the area at fault, for the message


def test_a_factor_table_is_interpolated_in_log_area_and_duration():
    # a 2 x 2 table worked by hand: areas 10 and 100 km2, durations 60 and 120 min
    table = FactorTable(np.array([10.0, 100.0]) * KM2, np.array([60.0, 120.0]) * 60,
                        np.array([[0.90, 0.80], [0.95, 0.85]]), where="t.csv")
    at = table.factors(np.array([10.0, 100.0, math.sqrt(1000.0), 10 ** 1.25]) * KM2, 90 * 60)
    # log-midpoint area and mid duration: the mean of the four corners; a quarter of the way
    # in log(area) and at 90 min: 0.925 - 0.25 (0.925 - 0.825)
    np.testing.assert_allclose(at, [0.925, 0.825, 0.875, 0.9], rtol=0, atol=1e-12)
    corner = table.factors(np.array([10 ** 1.25]) * KM2, 75 * 60)[0]
    assert corner == pytest.approx(0.875 + 0.25 * (0.925 - 0.875), abs=1e-12)  # 0.8875
    for area, d, match in [(5.0, 90.0, "not 5 km2"), (200.0, 90.0, "not 200 km2"),
                           (50.0, 30.0, "not 30 min"), (50.0, 150.0, "not 150 min")]:
        with pytest.raises(ReductionRangeError, match=match):
            table.factors(np.array([area]) * KM2, d * 60)


def test_a_factor_table_file_in_us_units(tmp_path):
    path = tmp_path / "f.csv"
    path.write_text("# invented\nduration_h,area_mi2,factor\n1,1,0.97\n1,10,0.9\n"
                    "6,1,0.99\n6,10,0.95\n")
    table = read_factor_table_csv(path)
    np.testing.assert_allclose(table.area_m2, [MI2_KM2 * KM2, 10 * MI2_KM2 * KM2], rtol=1e-15)
    np.testing.assert_allclose(table.duration_s, [3600.0, 21600.0], rtol=1e-15)
    got = table.factors(np.array([math.sqrt(10.0) * MI2_KM2 * KM2]), 3.5 * 3600)[0]
    assert got == pytest.approx((0.935 + 0.97) / 2, abs=1e-12)


@pytest.mark.parametrize("text, match", [
    ("area_km2,duration_min,factor\n1,60,0.9\n10,60,0.8\n1,120,0.95\n", "no factor for area 10"),
    ("area_km2,duration_min,factor\n1,60,0.9\n1,60,0.8\n", "row 2: gives area 1 and duration 60"),
    ("area_km2,duration_min,factor\n1,60,1.2\n", "row 1: factor 1.2 is above 1"),
    ("area_ha,duration_min,factor\n1,60,0.9\n", "header: column 'area_ha'"),
    ("area_km2,duration_min\n1,60\n", "header: has columns"),
    ("area_km2,duration_min,factor\n1,sixty,0.9\n", "row 1: '1,sixty,0.9' is not three"),
    ("area_km2,duration_min,factor\n", "has no rows"),
])
def test_a_bad_factor_table_is_named(tmp_path, text, match):
    path = tmp_path / "f.csv"
    path.write_text(text)
    with pytest.raises(StormError, match=match) as err:
        read_factor_table_csv(path)
    assert "f.csv" in str(err.value) and "\n" not in str(err.value)


@pytest.mark.parametrize("duration_min", [60.0, 62.0])  # 62: a last step of 2 min
def test_reduced_storm_gives_each_subcatchment_its_factor_times_the_point_rain(duration_min):
    h = uniform(0.012, duration_min * 60, 300.0)
    factor = np.array([1.0, 0.9, 0.75])
    applied = AppliedReduction("fixed_factor", "test", "subcatchment", h.duration_s, None,
                               ("a", "b", "c"), np.full(3, 2e6), factor)
    reduced = reduced_storm(h, applied, 60.0, np.array([1.0, 1.0, 2.0]))
    assert reduced.reduction is applied and reduced.name == h.name
    point = h.resample(60.0)  # what a run sees of the unreduced storm, per step
    got = reduced.areal.resample(60.0)
    np.testing.assert_allclose(got, point[:, None] * factor[None, :], rtol=1e-12, atol=1e-18)
    np.testing.assert_allclose(got.sum(axis=0), 0.012 * factor, rtol=1e-12)
    # the storm's own series: the basin mean by area, (1 + 0.9 + 2 x 0.75) / 4 of the depth
    assert reduced.total_depth_m == pytest.approx(0.012 * 3.4 / 4, rel=1e-12)
    one = reduced_storm(h, dataclasses.replace(applied, factor=np.ones(3)), 60.0, np.ones(3))
    assert one.areal is None and np.array_equal(one.depth_m, h.depth_m)


def test_the_reduction_line_shows_areas_in_the_projects_units():
    applied = AppliedReduction("arr2019_short_duration", "ARR 2019", "basin", 7200.0, 0.01,
                               ("a", "b"), np.full(2, 5 * MI2_KM2 * KM2), np.full(2, 0.95))
    us = reduction_line("s", applied, US)
    assert "areal reduction factor 0.95 (arr2019_short_duration, at the whole" in us
    assert ", 5 mi2, AEP 0.01, duration 120 min); source: ARR 2019" in us
    assert f", {5 * MI2_KM2:.4g} km2," in reduction_line("s", applied, SI)
    fixed = dataclasses.replace(applied, relation="fixed_factor")
    assert "(fixed_factor, the same everywhere, AEP" in reduction_line("s", fixed, SI)


def test_the_hyetograph_panels_say_which_series_they_show():
    # A reviewer reads a panel of areal rain as that storm's one hyetograph unless told it is
    # the area-weighted basin mean (the reduced storm's own series, checked above against
    # (1 + 0.9 + 2 x 0.75) / 4 of the depth), and a reduced storm as the point storm unless
    # told its factor.
    h = uniform(0.012, 3600.0, 300.0)
    applied = AppliedReduction("fixed_factor", "test", "subcatchment", h.duration_s, None,
                               ("a", "b", "c"), np.full(3, 2e6), np.array([1.0, 0.9, 0.75]))
    mixed = reduced_storm(h, applied, 60.0, np.array([1.0, 1.0, 2.0]))
    same = reduced_storm(h, dataclasses.replace(applied, factor=np.full(3, 0.95)), 60.0,
                         np.ones(3))
    titles = [plots.hyetograph_title(s) for s in (h, mixed, same)]
    assert titles[0] == h.name
    assert titles[1] == (f"{h.name}: area-weighted mean over the subcatchments of point design "
                         "depths times each subcatchment's areal reduction factor")
    assert titles[2] == f"{h.name}: point depths x areal reduction factor 0.95 (fixed_factor)"
    fig = plots.hyetograph_plot([(t, s.time_s / 60.0, s.intensity_m_per_s * 3.6e6)
                                 for t, s in zip(titles, (h, mixed, same), strict=True)],
                                rate_unit="mm/h", title="Rain intensity of each storm")
    assert fig.get_suptitle() == "Rain intensity of each storm"
    assert [ax.get_title(loc="left") for ax in fig.axes] == titles
    # The map of rain per subcatchment (a reduced storm's is drawn when factors differ) says
    # it shows the storm's total and what it was made from.
    assert plots.rain_map_title(mixed) == (
        f"Total rain depth per subcatchment, {h.name}\npoint design depths times each "
        "subcatchment's areal reduction factor")
