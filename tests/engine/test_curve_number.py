"""Curve number: TR-55 runoff depths, the runoff equation, AMC and Ia/S = 0.05 conversions."""

from __future__ import annotations

import numpy as np
import pytest
from engine_helpers import INCH, unit_frame
from numpy.testing import assert_allclose

from gisrun.engine import curve_number, run_losses
from gisrun.errors import ParameterError


def runoff_in(p_in: float, cn: float, **extra: object) -> float:
    """Total runoff (inches) of one unit for a storm of p_in inches in 24 uneven steps."""
    shape = np.array([1, 2, 3, 5, 8, 13, 21, 13, 8, 5, 3, 2, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1.0])
    rain = p_in * INCH * shape / shape.sum()
    res = run_losses(unit_frame(1, curve_number=cn, **extra), rain, 3600.0,
                     method="curve_number")
    assert np.all(np.isnan(res.capacity_m_per_s)) and res.storage_m[0] == 0
    return float(res.runoff_depth_m[0] / INCH)


@pytest.mark.parametrize(("p_in", "cn", "q_in"), [
    # NRCS (1986) TR-55 Table 2-1, runoff depth (in) for 1.0 in of rain (from memory; the table
    # is rounded to 0.01 in)
    (1.0, 75, 0.03), (1.0, 80, 0.08), (1.0, 85, 0.17), (1.0, 90, 0.32), (1.0, 95, 0.56),
    (1.0, 98, 0.79), (1.0, 70, 0.00),
    # TR-55 Table 2-1, 3.0 in of rain on CN 80 (from memory)
    (3.0, 80, 1.25),
])
def test_tr55_table_2_1(p_in, cn, q_in):
    assert runoff_in(p_in, cn) == pytest.approx(q_in, abs=0.005)


@pytest.mark.parametrize("cn", [55.0, 72.0, 86.0, 98.0])
@pytest.mark.parametrize("p_in", [0.3, 1.7, 4.0, 9.0])
def test_runoff_equation_tr55_eq_2_1(cn, p_in):
    # TR-55 eqs. 2-1 to 2-4 in inches, independent of the step pattern.
    s = 1000.0 / cn - 10.0
    ia = 0.2 * s
    q = (p_in - ia) ** 2 / (p_in - ia + s) if p_in > ia else 0.0
    assert runoff_in(p_in, cn) == pytest.approx(q, rel=1e-12, abs=1e-15)


def test_no_runoff_until_initial_abstraction_and_time_it_starts():
    # TR-55: Ia = 0.2 S; for CN 80, S = 2.5 in, Ia = 0.5 in.
    dt_s = 600.0
    rate = 0.1 * INCH  # per step
    rain = np.full(12, rate)
    res = run_losses(unit_frame(1, curve_number=80.0), rain, dt_s, method="curve_number")
    assert res.excess_m[:5, 0].sum() == 0  # 0.5 in fall in the first five steps
    assert res.excess_m[5, 0] > 0
    assert res.time_to_ponding_s[0] == pytest.approx(5 * dt_s, rel=1e-9)
    half = run_losses(unit_frame(1, curve_number=80.0), np.full(4, 0.3 * INCH), 900.0,
                      method="curve_number")
    assert half.time_to_ponding_s[0] == pytest.approx(0.5 / 0.3 * 900.0, rel=1e-12)


@pytest.mark.parametrize(("cn2", "cn1_table", "cn3_table"), [
    # NRCS NEH Part 630 ch. 10 Table 10-1 (from memory): the equations of Chow et al. (1988)
    # reproduce the tabulated numbers within about 2 CN.
    (60, 40, 78), (80, 63, 91), (90, 78, 96),
])
def test_antecedent_condition_against_neh_table(cn2, cn1_table, cn3_table):
    got = curve_number.adjust_for_antecedent_condition(np.array([cn2, cn2, cn2]),
                                                       np.array([1, 2, 3]))
    assert got[0] == pytest.approx(cn1_table, abs=2)
    assert got[1] == cn2
    assert got[2] == pytest.approx(cn3_table, abs=2)


def test_antecedent_condition_formulas_drive_the_runoff():
    # Chow, Maidment and Mays (1988) eqs. 5.5.4 and 5.5.5 (from memory).
    cn2 = 75.0
    cn1 = 4.2 * cn2 / (10 - 0.058 * cn2)
    cn3 = 23 * cn2 / (10 + 0.13 * cn2)
    for cond, cn in ((1, cn1), (3, cn3)):
        assert runoff_in(3.0, cn2, antecedent_condition=cond) == pytest.approx(
            runoff_in(3.0, cn), rel=1e-12)
    assert runoff_in(3.0, cn2, antecedent_condition=1) < runoff_in(3.0, cn2)
    assert runoff_in(3.0, cn2, antecedent_condition=3) > runoff_in(3.0, cn2)


@pytest.mark.parametrize("cn", [60.0, 80.0, 95.0])
def test_initial_abstraction_ratio_0_05(cn):
    # Hawkins et al. (2002) / Woodward et al. (2003) (from memory): S0.05 = 1.33 S0.20^1.15 (in),
    # Q = (P - 0.05 S0.05)^2 / (P + 0.95 S0.05).
    s20 = 1000.0 / cn - 10.0
    s05 = 1.33 * s20 ** 1.15
    p = 2.0
    q = (p - 0.05 * s05) ** 2 / (p + 0.95 * s05)
    assert runoff_in(p, cn, initial_abstraction_ratio=0.05) == pytest.approx(q, rel=1e-12)
    # the same conversion as a curve number (Woodward et al. 2003, from memory):
    # CN0.05 = 100 / (1.879 (100 / CN0.20 - 1)^1.15 + 1)
    cn05 = 100.0 / (1.879 * (100.0 / cn - 1.0) ** 1.15 + 1.0)
    assert 1000.0 / cn05 - 10.0 == pytest.approx(s05, rel=2e-4)  # 1.879 is rounded


def test_small_storms_give_more_runoff_with_ratio_0_05():
    # The point of the 0.05 ratio (Hawkins et al. 2002): runoff from small storms.
    # P = 0.8 in, CN 75: about 0.004 in at Ia/S = 0.2 and 0.05 in at Ia/S = 0.05.
    assert runoff_in(0.8, 75.0, initial_abstraction_ratio=0.05) > 5 * runoff_in(0.8, 75.0) > 0


def test_increments_sum_to_the_cumulative_equation_at_every_step():
    rng = np.random.default_rng(3)
    rain = rng.uniform(0, 0.004, 40)
    res = run_losses(unit_frame(1, curve_number=83.0), rain, 300.0, method="curve_number")
    s = 0.0254 * (1000.0 / 83.0 - 10.0)
    p = np.cumsum(rain)
    q = np.where(p > 0.2 * s, (p - 0.2 * s) ** 2 / (p + 0.8 * s), 0.0)
    assert_allclose(np.cumsum(res.excess_m[:, 0]), q, rtol=1e-12, atol=1e-16)


@pytest.mark.parametrize(("column", "good", "bad"), [
    ("curve_number", 80.0, 0.0), ("curve_number", 80.0, 101.0),
    ("initial_abstraction_ratio", 0.2, 0.1), ("antecedent_condition", 2, 4),
])
def test_bad_values_name_the_column_and_row(column, good, bad):
    with pytest.raises(ParameterError, match=f"{column}:row 1"):
        curve_number.Params.from_frame(unit_frame(2, **{column: [good, bad]}))
