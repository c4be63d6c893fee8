"""Storms: the Hyetograph type, resampling and design storms against published definitions."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hs
from numpy.testing import assert_allclose
from scipy import integrate

from gisrun.errors import StormError
from gisrun.storm import (
    Hyetograph,
    IdfFormula,
    IdfTable,
    alternating_block,
    chicago,
    max_depth_in_window_m,
    nrcs_24h,
    uniform,
)
from gisrun.units import from_si, to_si

# --- Hyetograph ---------------------------------------------------------------------------


def test_hyetograph_properties_by_hand():
    h = Hyetograph("h", [0, 600, 1800], [0.006, 0.012])
    assert h.total_depth_m == pytest.approx(0.018)
    assert h.duration_s == 1800
    assert_allclose(h.intensity_m_per_s, [1e-5, 1e-5])
    assert h.peak_intensity_m_per_s == pytest.approx(1e-5)
    assert not h.time_s.flags.writeable  # frozen value


@pytest.mark.parametrize(
    ("time_s", "depth_m"),
    [
        ([0, 600, 600], [0.0, 0.0]),  # not increasing
        ([10, 600], [0.0]),  # does not start at 0
        ([0, 600], [-0.001]),  # negative rain
        ([0, 600], [math.nan]),  # NaN rain
        ([0, 600, 1200], [0.001]),  # one depth short
        ([0], []),  # no interval
    ],
)
def test_hyetograph_rejects_bad_arrays(time_s, depth_m):
    with pytest.raises(StormError, match="storm 'bad'"):
        Hyetograph("bad", time_s, depth_m)


def test_resample_splits_and_merges_intervals_by_hand():
    # 10 mm in 0-10 min, 0 in 10-20 min, 6 mm in 20-30 min (piecewise-constant intensity).
    h = Hyetograph("h", [0, 600, 1200, 1800], [0.010, 0.0, 0.006])
    assert_allclose(h.resample(300.0), [0.005, 0.005, 0, 0, 0.003, 0.003], atol=1e-15)
    # 15-min steps: 10 + 0 | 0 + 6 ; 30-min: all
    assert_allclose(h.resample(900.0), [0.010, 0.006], atol=1e-15)
    # 20-min steps: the storm is 1.5 steps long -> a padded last step holding 10 min of rain
    assert_allclose(h.resample(1200.0), [0.010, 0.006], atol=1e-15)
    # 700-s steps: 0-700 s holds the first 10 mm; 700-1400 s holds 200 s of the 6 mm interval;
    # 1400-2100 s holds its last 400 s and 300 s of padding.
    assert_allclose(h.resample(700.0), [0.010, 0.006 * 200 / 600, 0.006 * 400 / 600],
                    atol=1e-15)


@settings(max_examples=150, deadline=None)
@given(
    steps=hs.lists(hs.floats(1.0, 5000.0), min_size=1, max_size=40),
    depths=hs.lists(hs.floats(0.0, 0.05), min_size=40, max_size=40),
    dt_s=hs.floats(1.0, 20000.0),
)
def test_resample_conserves_depth_on_irregular_steps(steps, depths, dt_s):
    time_s = np.concatenate([[0.0], np.cumsum(steps)])
    h = Hyetograph("random", time_s, depths[: len(steps)])
    out = h.resample(dt_s)
    assert out.shape == (max(math.ceil(h.duration_s / dt_s - 1e-9), 1),)
    assert np.all(out >= 0)
    assert abs(out.sum() - h.total_depth_m) <= 1e-12 * max(h.total_depth_m, 1e-300)


def test_resample_rejects_bad_step():
    with pytest.raises(StormError, match="step"):
        uniform(0.01, 3600, 600).resample(0.0)


def test_scaled_multiplies_every_depth():
    h = nrcs_24h("II", 0.1, 3600)
    assert_allclose(h.scaled(0.8).depth_m, 0.8 * h.depth_m)
    with pytest.raises(StormError, match="scale factor"):
        h.scaled(-1.0)


def test_max_depth_in_window_by_hand():
    # 6 mm in 0-10 min then 12 mm in 10-20 min: the worst 10-min window is 10-20 min (12 mm);
    # the worst 15-min window is 5-20 min (3 + 12 mm).
    h = Hyetograph("h", [0, 600, 1200], [0.006, 0.012])
    assert max_depth_in_window_m(h, 600) == pytest.approx(0.012)
    assert max_depth_in_window_m(h, 900) == pytest.approx(0.015)
    assert max_depth_in_window_m(h, 86400) == pytest.approx(0.018)


# --- NRCS 24-hour distributions -----------------------------------------------------------

# Cumulative fraction of the 24-h depth at the given hour. Source: SCS 24-hour rainfall
# distributions as tabulated in Chow, Maidment & Mays (1988) Applied Hydrology, Table 14.4.1
# (table number from memory), after SCS (1986) TR-55 Appendix B; values from memory, entered
# here independently of gisrun/storm_data.
PUBLISHED_ORDINATES = {
    "I": {6.0: 0.125, 8.0: 0.194, 9.75: 0.362, 10.0: 0.515, 12.0: 0.682, 16.0: 0.830,
          20.0: 0.926},
    "IA": {4.0: 0.116, 6.0: 0.206, 8.0: 0.425, 10.0: 0.577, 12.0: 0.664, 16.0: 0.800,
           20.0: 0.906},
    "II": {6.0: 0.080, 9.0: 0.147, 11.5: 0.283, 11.75: 0.357, 12.0: 0.663, 12.5: 0.735,
           14.0: 0.820, 20.0: 0.952},
    "III": {6.0: 0.072, 11.0: 0.250, 11.75: 0.339, 12.0: 0.500, 12.5: 0.702, 16.0: 0.886,
            20.0: 0.957},
}


@pytest.mark.parametrize("kind", sorted(PUBLISHED_ORDINATES))
def test_nrcs_24h_matches_published_ordinates(kind):
    h = nrcs_24h(kind, 0.1, 900.0)  # 15-min steps land on every tabulated hour
    for hour, fraction in PUBLISHED_ORDINATES[kind].items():
        assert h.cumulative_depth_m(hour * 3600.0) == pytest.approx(0.1 * fraction, abs=1e-12)
    assert h.total_depth_m == pytest.approx(0.1, rel=1e-12)
    assert h.duration_s == 86400.0


def test_nrcs_type_ii_peak_step_by_hand():
    # Between the 11.75-h (0.357) and 12.0-h (0.663) ordinates the fraction rises 0.306 in 0.25 h
    # (table above); a 6-min step there holds 0.306 * 0.1 / 0.25 of 100 mm = 12.24 mm.
    h = nrcs_24h("II", 0.100, 360.0)
    assert len(h.depth_m) == 240
    assert h.depth_m.max() == pytest.approx(0.01224, rel=1e-9)
    assert h.time_s[int(np.argmax(h.depth_m)) + 1] == pytest.approx(12 * 3600.0)


def test_nrcs_step_not_dividing_24h_keeps_total():
    h = nrcs_24h("IA", 0.05, 7 * 60.0)
    assert h.duration_s == 86400.0
    assert h.steps_s[-1] < 7 * 60.0
    assert h.total_depth_m == pytest.approx(0.05, rel=1e-12)


def test_nrcs_rejects_unknown_type_and_bad_depth():
    with pytest.raises(StormError, match="'IV'"):
        nrcs_24h("IV", 0.1, 360)
    with pytest.raises(StormError, match="depth"):
        nrcs_24h("II", -0.1, 360)


def test_nrcs_type_is_case_insensitive():
    assert_allclose(nrcs_24h("ia", 0.1, 360).depth_m, nrcs_24h("IA", 0.1, 360).depth_m)


# --- IDF curves ---------------------------------------------------------------------------


def test_idf_table_log_log_interpolation_is_exact_for_a_power_law():
    # i = k t^-0.7 is a straight line in log-log space: interpolation between 10 and 60 min
    # must reproduce it exactly at 25 min (analytic).
    k = 2e-4
    table = IdfTable(np.array([600.0, 3600.0]), k * np.array([600.0, 3600.0]) ** -0.7)
    assert float(table.intensity_m_per_s(1500.0)) == pytest.approx(k * 1500.0**-0.7, rel=1e-12)
    with pytest.raises(StormError, match="extend the table"):
        table.intensity_m_per_s(7200.0)


def test_idf_formula_rejects_bad_coefficients():
    with pytest.raises(StormError, match="a > 0"):
        IdfFormula(-1.0, 10.0, 0.8)


# --- Alternating block --------------------------------------------------------------------


def _chow_denver_table() -> IdfTable:
    # Chow, Maidment & Mays (1988) Example 14.3.1 (from memory): 10-yr design storm for Denver,
    # i = 96.6 / (Td^0.97 + 13.90) in/h with Td in minutes, read at 10-min durations.
    td_min = np.arange(10.0, 130.0, 10.0)
    i_in_per_h = 96.6 / (td_min**0.97 + 13.90)
    return IdfTable(td_min * 60.0, to_si(i_in_per_h, "in_per_h"))


def test_alternating_block_matches_chow_example():
    h = alternating_block(_chow_denver_table(), 7200.0, 600.0)
    got_in = from_si(h.depth_m, "in")
    # Published hyetograph, 10-min blocks in inches (Chow et al. 1988, Example 14.3.1, from
    # memory); the book differences depths rounded to 0.001 in, hence the tolerance.
    published_in = [0.021, 0.028, 0.041, 0.064, 0.118, 0.308, 0.693, 0.178, 0.083, 0.049,
                    0.033, 0.024]
    assert_allclose(got_in, published_in, atol=0.0015)
    assert from_si(h.total_depth_m, "in") == pytest.approx(1.639, abs=0.001)  # 2-h depth


def test_alternating_block_by_hand_from_the_definition():
    # Blocks are increments of P(t) = a t / (t + b)^c; largest at floor(r n), then alternately
    # one step earlier and one step later, then the rest where there is room (Chow et al. 1988
    # sec. 14.3 for the method; positions by hand).
    f = IdfFormula(to_si(1000.0, "mm_per_h"), 8.0, 0.75)
    dt = 300.0
    p = [f.depth_m(k * dt) for k in range(7)]  # P(0) .. P(30 min)
    blocks = np.diff(p)  # already decreasing for this curve
    assert np.all(np.diff(blocks) < 0)
    h = alternating_block(f, 1800.0, dt, peak_position=0.25)  # 6 steps, peak in step 1
    expected = [blocks[1], blocks[0], blocks[2], blocks[3], blocks[4], blocks[5]]
    assert_allclose(h.depth_m, expected, rtol=1e-12)
    assert h.total_depth_m == pytest.approx(float(f.depth_m(1800.0)), rel=1e-12)


def test_alternating_block_peak_at_end_and_start():
    f = IdfFormula(to_si(900.0, "mm_per_h"), 5.0, 0.7)
    late = alternating_block(f, 3600.0, 600.0, peak_position=1.0)
    early = alternating_block(f, 3600.0, 600.0, peak_position=0.0)
    assert np.all(np.diff(late.depth_m) > 0)  # rising to the last step
    assert np.all(np.diff(early.depth_m) < 0)


def test_alternating_block_needs_whole_steps():
    f = IdfFormula(to_si(900.0, "mm_per_h"), 5.0, 0.7)
    with pytest.raises(StormError, match="whole number"):
        alternating_block(f, 3600.0, 7 * 60.0)


def test_alternating_block_rejects_decreasing_depth_curve():
    # c > 1: P(t) = a t / (t + b)^c falls once (1 - c) t + b < 0 (analytic), here t > 50 min.
    f = IdfFormula(to_si(900.0, "mm_per_h"), 5.0, 1.1)
    with pytest.raises(StormError, match="decreases"):
        alternating_block(f, 7200.0, 600.0)


# --- Chicago (Keifer and Chu 1957) --------------------------------------------------------


def _keifer_chu_intensity(t_s: float, f: IdfFormula, duration_s: float, r: float) -> float:
    """Instantaneous intensity, Keifer & Chu (1957); Chow et al. (1988) sec. 14.3."""
    a, b, c = f.a_m_per_s, f.b_min, f.c
    t_peak = r * duration_s
    x_min = ((t_peak - t_s) / r if t_s < t_peak else (t_s - t_peak) / (1 - r)) / 60.0
    return a * ((1 - c) * x_min + b) / (x_min + b) ** (1 + c)


@pytest.mark.parametrize("r", [0.375, 0.5, 0.7])
def test_chicago_total_equals_idf_depth_and_steps_equal_quadrature(r):
    f = IdfFormula(to_si(1500.0, "mm_per_h"), 10.0, 0.8)
    h = chicago(f, 7200.0, 600.0, peak_position=r)
    # Total: P(td) = a td / (td + b)^c, the IDF depth for the storm duration.
    assert h.total_depth_m == pytest.approx(float(f.depth_m(7200.0)), rel=1e-12)
    # Each step equals the integral of the instantaneous intensity (scipy quadrature).
    t_peak = r * 7200.0
    for k, depth in enumerate(h.depth_m):
        lo, hi = h.time_s[k], h.time_s[k + 1]
        pts = [t_peak] if lo < t_peak < hi else None
        ref, _ = integrate.quad(_keifer_chu_intensity, lo, hi, args=(f, 7200.0, r), points=pts)
        assert depth == pytest.approx(ref, rel=1e-8)


def test_chicago_peak_step_contains_the_peak():
    f = IdfFormula(to_si(1500.0, "mm_per_h"), 10.0, 0.8)
    h = chicago(f, 7200.0, 600.0, peak_position=0.375)  # peak at 45 min, inside 40-50 min
    k = int(np.argmax(h.depth_m))
    assert h.time_s[k] < 0.375 * 7200.0 < h.time_s[k + 1]


@pytest.mark.parametrize("r", [0.0, 1.0])
def test_chicago_peak_at_an_end_keeps_total(r):
    f = IdfFormula(to_si(1500.0, "mm_per_h"), 10.0, 0.8)
    h = chicago(f, 3600.0, 300.0, peak_position=r)
    assert h.total_depth_m == pytest.approx(float(f.depth_m(3600.0)), rel=1e-12)
    assert int(np.argmax(h.depth_m)) == (0 if r == 0.0 else len(h.depth_m) - 1)


def test_chicago_needs_a_formula():
    with pytest.raises(StormError, match="IDF formula"):
        chicago(_chow_denver_table(), 7200.0, 600.0)


# --- Uniform ------------------------------------------------------------------------------


def test_uniform_by_hand_with_partial_last_step():
    h = uniform(0.010, 1500.0, 600.0)  # 25 min in 10-min steps: 10, 10, 5 min
    assert_allclose(h.depth_m, [0.004, 0.004, 0.002], rtol=1e-12)
    assert_allclose(h.intensity_m_per_s, 0.010 / 1500.0, rtol=1e-12)
