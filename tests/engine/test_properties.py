"""Properties every loss method must have, on random storms and parameters (hypothesis)."""

from __future__ import annotations

import numpy as np
import pytest
from engine_helpers import MM_PER_H, unit_frame
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from gisrun.engine import ENGINES, run_losses


@pytest.fixture(params=sorted(ENGINES))
def method(request: pytest.FixtureRequest) -> str:
    """Every registered loss method (new methods are picked up automatically)."""
    return request.param


SETTINGS = settings(max_examples=25, deadline=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture])

depths_mm = st.lists(st.floats(0.0, 25.0, allow_nan=False, allow_subnormal=False),
                     min_size=1, max_size=24)
steps_s = st.sampled_from([60.0, 300.0, 900.0])


@st.composite
def units(draw, n: int = 3):
    """Random plausible parameters (SI) for every method, n units."""
    def col(lo, hi):
        return np.array(draw(st.lists(st.floats(lo, hi), min_size=n, max_size=n)))

    fc = col(0.0, 20.0) * MM_PER_H
    return unit_frame(
        n,
        ks_m_per_s=col(0.0, 40.0) * MM_PER_H,
        suction_head_m=col(0.0, 0.3),
        moisture_deficit=col(0.0, 0.45),
        depression_storage_m=col(0.0, 5.0) * 1e-3,
        horton_fc_m_per_s=fc,
        horton_f0_m_per_s=fc + col(0.0, 120.0) * MM_PER_H,
        horton_decay_per_s=col(0.0, 6.0) / 3600.0,
        horton_recovery_per_s=col(0.0, 2.0) / 3600.0,
        curve_number=col(40.0, 100.0),
        initial_abstraction_ratio=np.array(draw(st.lists(st.sampled_from([0.2, 0.05]),
                                                         min_size=n, max_size=n))),
        antecedent_condition=np.array(draw(st.lists(st.sampled_from([1, 2, 3]),
                                                    min_size=n, max_size=n))),
        initial_loss_m=col(0.0, 20.0) * 1e-3,
        constant_loss_m_per_s=col(0.0, 20.0) * MM_PER_H,
        phi_index_m_per_s=col(0.0, 20.0) * MM_PER_H,
    )


@SETTINGS
@given(frame=units(), rain_mm=depths_mm, dt_s=steps_s)
def test_mass_balance_per_step_and_in_total(method, frame, rain_mm, dt_s):
    rain = np.array(rain_mm) * 1e-3
    res = run_losses(frame, rain, dt_s, method=method)
    assert np.all(res.infil_m >= 0) and np.all(res.excess_m >= 0) and np.all(res.storage_m >= 0)
    # total: rain = infiltration + excess + storage left (DEVELOPERS.md: 1e-9 relative)
    tol = 1e-9 * max(rain.sum(), 1e-3)
    assert np.max(np.abs(res.mass_balance_error_m())) <= tol
    # per step: storage change = rain - infiltration - excess, never negative storage
    storage = np.cumsum(res.rain_m - res.infil_m - res.excess_m, axis=0)
    assert storage.min() >= -1e-12
    assert_allclose(storage[-1], res.storage_m, atol=1e-12)


@SETTINGS
@given(frame=units(), rain_mm=depths_mm, extra=st.lists(st.floats(0.0, 10.0), min_size=24,
                                                       max_size=24), dt_s=steps_s)
def test_more_rain_never_gives_less_runoff(method, frame, rain_mm, extra, dt_s):
    rain = np.array(rain_mm) * 1e-3
    more = rain + np.array(extra[: rain.size]) * 1e-3
    low = run_losses(frame, rain, dt_s, method=method).runoff_depth_m
    high = run_losses(frame, more, dt_s, method=method).runoff_depth_m
    assert np.all(high >= low - 1e-12)


LOSS_COLUMNS = {
    "green_ampt": ["ks_m_per_s"],
    "horton": ["horton_f0_m_per_s", "horton_fc_m_per_s"],
    "constant_loss": ["constant_loss_m_per_s"],
    "phi_index": ["phi_index_m_per_s"],
}


@SETTINGS
@given(frame=units(), rain_mm=depths_mm, factor=st.floats(1.0, 5.0), dt_s=steps_s)
def test_higher_loss_parameters_never_give_more_runoff(method, frame, rain_mm, factor, dt_s):
    rain = np.array(rain_mm) * 1e-3
    lossier = frame.copy()
    if method == "curve_number":
        lossier["curve_number"] = np.maximum(frame["curve_number"] / factor, 1.0)
    else:
        for column in LOSS_COLUMNS[method]:
            lossier[column] = frame[column] * factor
    base = run_losses(frame, rain, dt_s, method=method).runoff_depth_m
    less = run_losses(lossier, rain, dt_s, method=method).runoff_depth_m
    assert np.all(less <= base + 1e-12)


def smooth_storm(total_mm: float, hours: float, dt_s: float) -> np.ndarray:
    """Rain per step of a sine-squared storm, integrated exactly over each step.

    Smooth means resolved: 6 h or longer at 5 min steps, so that averaging the peak over a
    step (second order in dt / duration) is well under the 1 % checked.
    """
    edges = np.arange(0.0, hours * 3600.0 + dt_s / 2, dt_s) / (hours * 3600.0)
    cumulative = edges - np.sin(2 * np.pi * edges) / (2 * np.pi)
    return total_mm * 1e-3 * np.diff(cumulative)


@settings(SETTINGS, max_examples=12)
@given(frame=units(), total_mm=st.floats(20.0, 150.0), hours=st.sampled_from([6.0, 12.0]))
def test_halving_the_step_changes_runoff_less_than_one_percent(method, frame, total_mm, hours):
    dt_s = 300.0
    coarse = run_losses(frame, smooth_storm(total_mm, hours, dt_s), dt_s, method=method)
    fine = run_losses(frame, smooth_storm(total_mm, hours, dt_s / 2), dt_s / 2, method=method)
    a, b = coarse.runoff_depth_m, fine.runoff_depth_m
    # 1 % of the runoff depth; where runoff is under 10 % of the rain, 1 % of that 10 %
    # (the coarser step averages the peak intensity, which matters most for small runoff)
    assert np.all(np.abs(a - b) <= 0.01 * np.maximum(b, 0.1 * total_mm * 1e-3))


@SETTINGS
@given(frame=units(n=5), rain_mm=depths_mm, dt_s=steps_s, order=st.permutations(range(5)))
def test_results_do_not_depend_on_unit_order(method, frame, rain_mm, dt_s, order):
    rain = np.array(rain_mm) * 1e-3
    per_unit = rain[:, None] * np.linspace(0.5, 1.5, 5)[None, :]
    a = run_losses(frame, per_unit, dt_s, method=method)
    b = run_losses(frame.iloc[list(order)], per_unit[:, list(order)], dt_s, method=method)
    for field in ("infil_m", "excess_m"):
        assert_allclose(getattr(b, field), getattr(a, field)[:, list(order)], rtol=1e-12,
                        atol=1e-18)
    assert_allclose(b.time_to_ponding_s, a.time_to_ponding_s[list(order)], rtol=1e-12)
    assert_allclose(b.storage_m, a.storage_m[list(order)], rtol=1e-12, atol=1e-18)


@pytest.mark.parametrize("rain", [np.zeros(5), np.full(3, 1e-300)])
def test_no_or_negligible_rain_gives_no_runoff(method, rain):
    res = run_losses(unit_frame(2), rain, 600.0, method=method)
    assert np.all(res.excess_m <= rain.sum())
    assert np.all(np.isnan(res.time_to_ponding_s)) or rain.sum() > 0
