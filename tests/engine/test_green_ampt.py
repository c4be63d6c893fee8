"""Green-Ampt: published worked examples, exact Lambert-W solution, scipy ODE, edge cases."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from engine_helpers import CM_PER_H, SILT_LOAM, unit_frame
from numpy.testing import assert_allclose
from scipy.integrate import solve_ivp
from scipy.special import lambertw

from gisrun.engine import green_ampt, run_losses
from gisrun.engine.green_ampt import ponded_increment_m


def silt_loam(saturation: float, **extra: object):
    deficit = SILT_LOAM["effective_porosity"] * (1.0 - saturation)
    return unit_frame(1, ks_m_per_s=SILT_LOAM["ks_m_per_s"],
                      suction_head_m=SILT_LOAM["suction_head_m"], moisture_deficit=deficit,
                      **extra)


def exact_ponded_increment(fs, p, k_tau):
    """Exact solution of G - P ln(1 + G/(P+Fs)) = K tau through Lambert W (branch -1).

    With u = (P+F)/(P+Fs), a = P/(P+Fs), c = 1 + K tau/(P+Fs):
    u - a ln u = c  =>  u = -a W_{-1}(-(1/a) exp(-c/a)).
    """
    fs, p, k_tau = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (fs, p, k_tau)))
    a = p / (p + fs)
    c = 1.0 + k_tau / (p + fs)
    u = -a * lambertw(-(1.0 / a) * np.exp(-c / a), k=-1).real
    return (u - 1.0) * (p + fs)


def test_chow_example_4_3_1_ponded_silt_loam():
    # Chow, Maidment and Mays (1988) Example 4.3.1 (from memory): silt loam, Se = 0.3,
    # ponded surface; after 1 h F = 3.17 cm and f = 1.81 cm/h.
    units = silt_loam(0.3)
    p = green_ampt.Params.from_frame(units)
    f = ponded_increment_m(np.zeros(1), p.suction_deficit_m, p.ks_m_per_s * 3600.0)
    assert_allclose(f * 100, 3.17, atol=0.005)
    cap = green_ampt.capacity_m_per_s(p, f) / CM_PER_H
    assert_allclose(cap, 1.81, atol=0.01)  # the book rounds F to 3.17 cm first


@pytest.mark.parametrize(("rate_cm_h", "tp_h", "fp_cm"), [(1.0, 9.04, 9.04), (5.0, 0.146, 0.73)])
def test_chow_example_4_4_1_ponding_time(rate_cm_h, tp_h, fp_cm):
    # Chow, Maidment and Mays (1988) Example 4.4.1 (from memory): silt loam, Se = 0.4;
    # tp = K psi dtheta / (i (i - K)): 9.0 h at 1 cm/h and 0.15 h (Fp = 0.73 cm) at 5 cm/h.
    dt_s = 60.0
    n = int(12 * 3600 / dt_s)
    rain = np.full(n, rate_cm_h * CM_PER_H * dt_s)
    res = run_losses(silt_loam(0.4), rain, dt_s, method="green_ampt")
    tp_s = res.time_to_ponding_s[0]
    assert tp_s / 3600 == pytest.approx(tp_h, abs=0.01 if tp_h > 1 else 0.002)
    k = int(tp_s // dt_s)  # infiltration until ponding equals rain until ponding
    fp = res.infil_m[:k, 0].sum() + (tp_s - k * dt_s) * rate_cm_h * CM_PER_H
    assert fp * 100 == pytest.approx(fp_cm, abs=0.01)
    assert res.excess_m[:k, 0].sum() == 0.0
    assert res.excess_m[k + 1:, 0].min() > 0


def test_newton_solution_matches_lambert_w_over_a_wide_range():
    # Exact solution via scipy.special.lambertw, in its well-conditioned range.
    rng = np.random.default_rng(7)
    n = 5000
    fs = 10 ** rng.uniform(-6, -0.5, n) * rng.integers(0, 2, n)
    p = 10 ** rng.uniform(-3.5, -0.5, n)
    k_tau = (p + fs) * 10 ** rng.uniform(-4, 2, n)
    ok = (1.0 + k_tau / (p + fs)) * (p + fs) / p < 700  # exp(-c/a) must not underflow
    fs, p, k_tau = fs[ok], p[ok], k_tau[ok]
    assert ok.sum() > 2000
    assert_allclose(ponded_increment_m(fs, p, k_tau), exact_ponded_increment(fs, p, k_tau),
                    rtol=1e-7)


@pytest.mark.skipif(np.finfo(np.longdouble).eps > 1e-18,
                    reason="needs extended-precision long double to evaluate the residual")
def test_relative_residual_is_below_1e9_in_extended_precision():
    # The ponded equation G - P ln(1 + G/(P+Fs)) = K tau is solved to a relative residual of
    # 1e-9; check it with the residual evaluated in 80-bit long double (exact arithmetic
    # check, no published source needed), over short and long ponded times.
    rng = np.random.default_rng(11)
    n = 20000
    fs = 10 ** rng.uniform(-6, -0.5, n) * rng.integers(0, 2, n)
    p = 10 ** rng.uniform(-3.5, -0.5, n)
    k_tau = (p + fs) * 10 ** rng.uniform(-6, 3, n)
    g = ponded_increment_m(fs, p, k_tau)
    gl, pl, fl, kl = (np.asarray(a, dtype=np.longdouble) for a in (g, p, fs, k_tau))
    residual = gl - pl * np.log1p(gl / (pl + fl)) - kl
    assert np.max(np.abs(residual / kl)) < 1.01e-9


def test_zero_suction_with_rain_exactly_at_ks_stays_finite():
    # P = 0 (saturated start): the capacity is the constant Ks (Green-Ampt with no suction
    # term, Chow et al. 1988 section 4.3), so rain at exactly Ks all infiltrates and rain at
    # 10 Ks loses Ks per step. A rate a rounding error above Ks once gave Fp = 0/0 = NaN.
    units = pd.DataFrame({"ks_m_per_s": [0.001 / 300], "suction_head_m": [0.11],
                          "moisture_deficit": [0.0], "depression_storage_m": [0.0]})
    res = run_losses(units, [0.001, 0.010, 0.010], 300.0, method="green_ampt")
    assert_allclose(res.infil_m[:, 0], [0.001, 0.001, 0.001], rtol=1e-12)
    assert_allclose(res.excess_m[:, 0], [0.0, 0.009, 0.009], rtol=1e-12, atol=1e-18)
    assert res.time_to_ponding_s[0] == 300.0


def test_residual_is_below_tolerance_for_extreme_inputs():
    # Where Lambert W itself loses precision (tiny or huge K tau), check the equation.
    fs = np.array([0.0, 1e-9, 0.3, 0.0, 2.0, 1e-12])
    p = np.array([0.05, 0.05, 1e-6, 0.2, 0.05, 0.1])
    k_tau = np.array([1e-15, 1e-12, 1e-10, 50.0, 1e-3, 1e-14])
    g = ponded_increment_m(fs, p, k_tau)
    lhs = g - p * np.log1p(g / (p + fs))
    assert np.all(g > 0)
    assert_allclose(lhs, k_tau, rtol=2e-6)  # direct evaluation cancels; solver is tighter


def test_engine_matches_lambert_w_after_ponding_under_constant_rain():
    # Constant rain above Ks: ponds at Fp = Ks P / (i - Ks) (Mein and Larson 1973), then the
    # exact ponded solution from (tp, Fp).
    units = silt_loam(0.2)
    p = green_ampt.Params.from_frame(units)
    ks, pdm = p.ks_m_per_s[0], p.suction_deficit_m[0]
    i = 3.0 * CM_PER_H
    dt_s = 600.0
    rain = np.full(36, i * dt_s)
    res = run_losses(units, rain, dt_s, method="green_ampt")
    fp = ks * pdm / (i - ks)
    tp = fp / i
    t_end = dt_s * np.arange(1, 37)
    exact = np.where(t_end <= tp, i * t_end,
                     fp + exact_ponded_increment(fp, pdm, ks * np.maximum(t_end - tp, 0)))
    assert_allclose(np.cumsum(res.infil_m[:, 0]), exact, rtol=1e-8)
    assert res.time_to_ponding_s[0] == pytest.approx(tp, rel=1e-12)


def ode_cumulative(rain_m, dt_s, ks, pdm, capacity):
    """Integrate dF/dt = min(i(t), capacity(F)) with scipy solve_ivp, one call per rain step."""
    f = np.array([0.0])
    out = []
    for depth in rain_m:
        rate = depth / dt_s
        sol = solve_ivp(lambda t, y, r=rate: [min(r, capacity(y[0]))], (0.0, dt_s), f,
                        method="LSODA", rtol=1e-11, atol=1e-14, max_step=dt_s / 50)
        f = sol.y[:, -1]
        out.append(f[0])
    return np.array(out)


def test_unsteady_rain_matches_scipy_ode():
    # Unsteady rain with a lull and a second burst; no depression storage, so the engine's
    # cumulative infiltration is the exact solution of dF/dt = min(i, Ks (1 + P/F)).
    units = silt_loam(0.3)
    p = green_ampt.Params.from_frame(units)
    ks, pdm = p.ks_m_per_s[0], p.suction_deficit_m[0]
    dt_s = 900.0
    rates_cm_h = np.array([0.3, 1.0, 4.0, 6.0, 2.0, 0.5, 0.0, 0.0, 3.0, 5.0, 1.2, 0.7])
    rain = rates_cm_h * CM_PER_H * dt_s
    res = run_losses(units, rain, dt_s, method="green_ampt")

    def capacity(f):
        return np.inf if f <= 0 else ks * (1 + pdm / f)

    ref = ode_cumulative(rain, dt_s, ks, pdm, capacity)
    assert_allclose(np.cumsum(res.infil_m[:, 0]), ref, rtol=1e-6)
    assert res.excess_m.sum() > 0


def test_three_cases_in_one_step():
    # Case 1: rain below Ks never ponds; case 2: ponded from the start; case 3: ponds part way.
    dt_s = 600.0
    units = unit_frame(3, ks_m_per_s=1e-5, suction_head_m=0.1, moisture_deficit=0.3)
    p = green_ampt.Params.from_frame(units)
    pdm = p.suction_deficit_m[0]
    state = green_ampt.State(np.array([0.0, 0.01, 0.0]), np.zeros(3), np.zeros(3, dtype=bool))
    i = np.array([0.5e-5, 1e-3, 5e-5])
    state2, r = green_ampt.step(p, state, i * dt_s, dt_s)
    # case 1: all infiltrates, no ponding
    assert r.infil_m[0] == pytest.approx(i[0] * dt_s, rel=1e-15)
    assert np.isnan(r.ponding_offset_s[0]) and not state2.ponded[0]
    # case 2: capacity at F = 1 cm is 1e-5 (1 + 0.03/0.01) = 4e-5 < i: ponded from 0
    assert r.ponding_offset_s[1] == 0.0
    assert r.infil_m[1] == pytest.approx(float(exact_ponded_increment(0.01, pdm, 1e-5 * dt_s)),
                                         rel=1e-8)
    # case 3: Fp = Ks P / (i - Ks) = 7.5 mm at tp = Fp / i = 150 s
    fp = 1e-5 * pdm / (i[2] - 1e-5)
    assert r.ponding_offset_s[2] == pytest.approx(fp / i[2], rel=1e-12)
    assert r.infil_m[2] == pytest.approx(
        fp + float(exact_ponded_increment(fp, pdm, 1e-5 * (dt_s - fp / i[2]))), rel=1e-8)
    assert_allclose(r.infil_m + r.excess_m, i * dt_s, rtol=1e-14)


def test_impervious_ks_zero_infiltrates_nothing():
    units = unit_frame(1, ks_m_per_s=0.0, depression_storage_m=0.001)
    rain = np.array([0.0, 0.0004, 0.002, 0.0, 0.001])
    res = run_losses(units, rain, 300.0, method="green_ampt")
    assert np.all(res.infil_m == 0)
    assert res.storage_m[0] == pytest.approx(0.001)
    assert res.excess_m.sum() == pytest.approx(rain.sum() - 0.001, rel=1e-12)
    assert res.time_to_ponding_s[0] == 300.0  # ponds as soon as rain falls
    assert np.all(res.capacity_m_per_s == 0)


def test_tiny_ks_and_no_suction_are_finite_and_exact():
    units = unit_frame(3, ks_m_per_s=[1e-14, 1e-6, 1e-6], suction_head_m=[0.1, 0.0, 0.1],
                       moisture_deficit=[0.3, 0.3, 0.0])
    rain = np.full(10, 0.002)
    with np.errstate(all="raise"):
        res = run_losses(units, rain, 600.0, method="green_ampt")
    assert np.all(np.isfinite(res.infil_m)) and np.all(res.infil_m >= 0)
    # no suction term (P = 0): constant capacity Ks
    assert_allclose(res.infil_m[:, 1:], 1e-6 * 600.0, rtol=1e-12)
    # tiny Ks: infiltration of order sqrt(2 Ks P t) (early-time Green-Ampt), far below rain
    total = res.infil_m[:, 0].sum()
    assert 0 < total < 1.5 * np.sqrt(2 * 1e-14 * 0.03 * 6000.0)


def test_depression_storage_keeps_infiltrating_after_rain_stops():
    units = silt_loam(0.3, depression_storage_m=0.004)
    dt_s = 300.0
    rain = np.concatenate([np.full(6, 8.0 * CM_PER_H * dt_s), np.zeros(24)])
    res = run_losses(units, rain, dt_s, method="green_ampt")
    after = res.infil_m[6:, 0]
    assert after[0] > 0  # stored water infiltrates in the dry steps
    assert res.storage_m[0] == pytest.approx(0.0, abs=1e-15)  # and is used up
    assert after.sum() == pytest.approx(0.004, rel=1e-9)
    assert np.all(res.excess_m[6:] == 0)


def test_capacity_reported_each_step():
    units = silt_loam(0.3)
    p = green_ampt.Params.from_frame(units)
    rain = np.full(8, 0.004)
    res = run_losses(units, rain, 600.0, method="green_ampt")
    f = np.cumsum(res.infil_m[:, 0])
    expected = p.ks_m_per_s[0] * (1 + p.suction_deficit_m[0] / f)
    assert_allclose(res.capacity_m_per_s[:, 0], expected, rtol=1e-14)
    dry = run_losses(units, np.zeros(2), 600.0, method="green_ampt")
    assert np.all(np.isinf(dry.capacity_m_per_s))  # nothing infiltrated: unbounded capacity
