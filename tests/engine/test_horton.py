"""Horton: closed-form ponded infiltration, scipy ODE on infiltrated depth, intermittent rain."""

from __future__ import annotations

import numpy as np
import pytest
from engine_helpers import MM_PER_H, unit_frame
from numpy.testing import assert_allclose
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from gisrun.engine import horton, run_losses
from gisrun.errors import ParameterError

F0, FC, K = 75.0 * MM_PER_H, 5.0 * MM_PER_H, 4.0 / 3600.0


def horton_cumulative(t):
    # Horton (1939); Chow, Maidment and Mays (1988) eq. 4.2.10: F = fc t + (f0 - fc)(1 - e^-kt)/k
    return FC * t + (F0 - FC) * (1 - np.exp(-K * t)) / K


def horton_rate(t):
    return FC + (F0 - FC) * np.exp(-K * t)


def test_ponded_infiltration_follows_closed_form():
    dt_s = 300.0
    rain = np.full(36, 0.02)  # 240 mm/h, far above f0: ponded throughout
    res = run_losses(unit_frame(1), rain, dt_s, method="horton")
    t = dt_s * np.arange(1, 37)
    assert_allclose(np.cumsum(res.infil_m[:, 0]), horton_cumulative(t), rtol=1e-12)
    assert_allclose(res.capacity_m_per_s[:, 0], horton_rate(t), rtol=1e-12)
    assert res.time_to_ponding_s[0] == 0.0


def ode_reference(rates, dt_s):
    """dF/dt = min(i, f(t*(F))) with t*(F) from inverting the closed form by brentq."""
    def capacity(f):
        if f <= 0:
            return F0
        t_eq = brentq(lambda t: horton_cumulative(t) - f, 0.0, 1e7, xtol=1e-12, rtol=1e-14)
        return horton_rate(t_eq)

    y = np.array([0.0])
    out = []
    for rate in rates:
        sol = solve_ivp(lambda t, f, r=rate: [min(r, capacity(f[0]))], (0.0, dt_s), y,
                        method="RK45", rtol=1e-10, atol=1e-13, max_step=dt_s / 20)
        y = sol.y[:, -1]
        out.append(y[0])
    return np.array(out)


def test_unsteady_rain_matches_scipy_ode_on_infiltrated_depth():
    dt_s = 600.0
    rates = np.array([10, 30, 90, 60, 20, 0, 0, 40, 100, 15.0]) * MM_PER_H
    res = run_losses(unit_frame(1), rates * dt_s, dt_s, method="horton")
    assert_allclose(np.cumsum(res.infil_m[:, 0]), ode_reference(rates, dt_s), rtol=1e-6)
    assert res.excess_m.sum() > 0


def test_capacity_does_not_recover_on_clock_time_without_recovery():
    dt_s = 600.0
    rain = np.concatenate([np.full(2, 100 * MM_PER_H * dt_s), np.zeros(12),
                           np.full(1, 100 * MM_PER_H * dt_s)])
    res = run_losses(unit_frame(1), rain, dt_s, method="horton")
    cap = res.capacity_m_per_s[:, 0]
    assert np.all(cap[2:14] == cap[1])  # unchanged through the dry spell
    # after the gap the curve continues from the infiltrated depth: 20 min ponded + 10 min
    assert cap[-1] == pytest.approx(horton_rate(3 * dt_s), rel=1e-12)
    # a clock-time Horton curve would instead have dropped to f(t = 2.5 h), near fc
    assert cap[-1] > horton_rate(15 * dt_s) * 2


def test_light_rain_advances_capacity_by_depth_not_time():
    # 3 mm/h for 5 h, below fc: all rain infiltrates, and the capacity is the curve's
    # capacity at F = 15 mm (not at t = 5 h).
    dt_s = 900.0
    rain = np.full(20, 3.0 * MM_PER_H * dt_s)
    res = run_losses(unit_frame(1), rain, dt_s, method="horton")
    assert res.excess_m.sum() == 0
    t_eq = brentq(lambda t: horton_cumulative(t) - rain.sum(), 0, 1e6, xtol=1e-12)
    assert res.capacity_m_per_s[-1, 0] == pytest.approx(horton_rate(t_eq), rel=1e-9)


def test_recovery_relaxes_capacity_toward_f0():
    dt_s = 600.0
    kr = 1.0 / 3600.0
    units = unit_frame(1, horton_recovery_per_s=kr)
    rain = np.concatenate([np.full(6, 100 * MM_PER_H * dt_s), np.zeros(6)])
    res = run_losses(units, rain, dt_s, method="horton")
    before = res.capacity_m_per_s[5, 0]
    after = res.capacity_m_per_s[11, 0]
    # first-order recovery (common practice): f0 - (f0 - f) exp(-kr * gap)
    assert after == pytest.approx(F0 - (F0 - before) * np.exp(-kr * 6 * dt_s), rel=1e-9)


def test_ponding_part_way_through_a_step():
    dt_s = 3600.0
    i = 30.0 * MM_PER_H
    res = run_losses(unit_frame(1), np.array([i * dt_s]), dt_s, method="horton")
    t_p = -np.log((i - FC) / (F0 - FC)) / K  # capacity equals i on the curve
    tau = horton_cumulative(t_p) / i  # rain needed to infiltrate that much
    assert res.time_to_ponding_s[0] == pytest.approx(tau, rel=1e-12)
    expected = horton_cumulative(t_p + dt_s - tau)
    assert res.infil_m[0, 0] == pytest.approx(expected, rel=1e-12)


def test_zero_rates_are_impervious_and_bad_rates_are_rejected():
    units = unit_frame(1, horton_f0_m_per_s=0.0, horton_fc_m_per_s=0.0)
    res = run_losses(units, np.array([0.001, 0.002]), 60.0, method="horton")
    assert np.all(res.infil_m == 0)
    with pytest.raises(ParameterError, match="horton_f0_m_per_s"):
        horton.Params.from_frame(unit_frame(1, horton_f0_m_per_s=1e-6, horton_fc_m_per_s=2e-6))
