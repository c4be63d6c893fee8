"""Run-on from disconnected impervious area: mass balance, monotonicity, closed forms, TR-55."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

sys.path.insert(0, str(Path(__file__).parent / "engine"))
from engine_helpers import MM_PER_H, unit_frame  # noqa: E402

from gisrun.aggregate import summarize_subcatchments  # noqa: E402
from gisrun.engine import ENGINES, run_losses  # noqa: E402
from gisrun.runon import run_with_runon  # noqa: E402

SETTINGS = settings(max_examples=30, deadline=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture])


@pytest.fixture(params=sorted(ENGINES))
def method(request):
    return request.param


def layout(method, share, *, perv_params=None):
    """Subcatchment S: unit (A, lawn) pervious 300 m2 + impervious 100 m2 and unit (B, lawn)
    pervious 200 m2 + impervious 50 m2; subcatchment T: one pervious part of 80 m2."""
    frame = unit_frame(5, **(perv_params or {}))
    frame["subcatchment_id"] = ["S", "S", "S", "S", "T"]
    frame["soil_class"] = ["A", "A", "B", "B", "A"]
    frame["cover_class"] = "lawn"
    frame["surface"] = ["pervious", "impervious", "pervious", "impervious", "pervious"]
    frame["area_m2"] = [300.0, 100.0, 200.0, 50.0, 80.0]
    imp = frame["surface"] == "impervious"
    for col, value in (("ks_m_per_s", 0.0), ("horton_f0_m_per_s", 0.0),
                       ("horton_fc_m_per_s", 0.0), ("curve_number", 98.0),
                       ("constant_loss_m_per_s", 0.0), ("phi_index_m_per_s", 0.0),
                       ("initial_loss_m", 0.0015), ("depression_storage_m", 0.0015)):
        frame.loc[imp, col] = value
    frame["loss_method"] = method
    frame["disconnected_fraction"] = np.where(imp, share, 0.0)
    return frame


@st.composite
def pervious_params(draw):
    def value(lo, hi):
        return draw(st.floats(lo, hi))
    fc = value(0.0, 20.0) * MM_PER_H
    return {"ks_m_per_s": value(0.1, 40.0) * MM_PER_H, "suction_head_m": value(0.0, 0.3),
            "moisture_deficit": value(0.01, 0.45), "depression_storage_m": value(0.0, 5e-3),
            "horton_fc_m_per_s": fc, "horton_f0_m_per_s": fc + value(0.0, 120.0) * MM_PER_H,
            "horton_decay_per_s": value(0.0, 6.0) / 3600.0,
            "horton_recovery_per_s": value(0.0, 2.0) / 3600.0,
            "curve_number": value(40.0, 97.0), "initial_loss_m": value(0.0, 0.02),
            "constant_loss_m_per_s": value(0.0, 20.0) * MM_PER_H,
            "phi_index_m_per_s": value(0.0, 20.0) * MM_PER_H}


rain_lists = st.lists(st.floats(0.0, 25.0, allow_nan=False, allow_subnormal=False),
                      min_size=1, max_size=24)


@SETTINGS
@given(perv=pervious_params(), rain_mm=rain_lists, share=st.floats(0.0, 1.0),
       to=st.sampled_from(["unit", "subcatchment"]), dt_s=st.sampled_from([60.0, 300.0, 900.0]))
def test_subcatchments_keep_mass_balance_and_runon_never_lowers_infiltration(
        method, perv, rain_mm, share, to, dt_s):
    """Acceptance: rain = infiltration + runoff + storage per subcatchment to 1e-9 relative,
    every method; pervious infiltration with run-on is never below it without."""
    frame = layout(method, share, perv_params=perv)
    rain = np.array(rain_mm) * 1e-3
    res = run_with_runon(frame, rain, dt_s, runon_to=to)
    subs = summarize_subcatchments(res, frame, np.array(["S", "T"], dtype=object), dt_s)
    total = subs["infiltration_depth_m"] + subs["runoff_depth_m"] + subs["storage_depth_m"]
    scale = max(rain.sum(), 1e-12)
    assert np.all(np.abs(subs["rain_depth_m"] - total) <= 1e-9 * scale)
    # every part: rain + run-on = infiltration + excess + routed + storage
    assert np.max(np.abs(res.mass_balance_error_m())) <= 1e-9 * max(scale, res.runon_m.max())
    # the volume routed is the volume received
    area = frame["area_m2"].to_numpy()
    assert_allclose((res.runon_m.sum(0) * area).sum(), (res.routed_m.sum(0) * area).sum(),
                    rtol=1e-12, atol=1e-15)
    plain = run_losses(frame, rain, dt_s)
    pervious = (frame["surface"] == "pervious").to_numpy()
    assert np.all(res.infil_m.sum(0)[pervious] >= plain.infil_m.sum(0)[pervious] - 1e-12)
    assert np.all(res.excess_m >= -1e-15) and np.all(res.storage_m >= 0)


def test_share_zero_is_todays_result_exactly(method):
    """Acceptance: share 0 gives the result of the plain engine run, bit for bit."""
    frame = layout(method, 0.0)
    rain = np.linspace(0.0, 8e-3, 12)
    routed = run_with_runon(frame, rain, 300.0, runon_to="unit")
    plain = run_losses(frame.drop(columns="disconnected_fraction"), rain, 300.0)
    for name in ("rain_m", "infil_m", "excess_m", "capacity_m_per_s", "storage_m"):
        assert np.array_equal(getattr(routed, name), getattr(plain, name), equal_nan=True), name
    assert np.array_equal(routed.time_to_ponding_s, plain.time_to_ponding_s, equal_nan=True)
    assert not routed.runon_m.any() and not routed.routed_m.any()


def test_phi_index_closed_form():
    """Phi-index, no depression storage: roof runoff is its rain; half of it lands on a lawn
    of three times its area, so the lawn's supply is rain (1 + 0.5 x 100/300) and it loses
    at most phi dt per step (the phi-index definition, e.g. Chow, Maidment and Mays 1988,
    sec. 5.2: losses = min(supply, phi dt))."""
    phi = 10.0 * MM_PER_H
    frame = layout("phi_index", 0.5)
    frame["depression_storage_m"] = 0.0
    frame.loc[frame["surface"] == "pervious", "phi_index_m_per_s"] = phi
    dt = 600.0
    rain = np.array([0.5, 2.0, 3.0, 0.2]) * 1e-3
    res = run_with_runon(frame, rain, dt, runon_to="unit")
    supply = rain * (1.0 + 0.5 * 100.0 / 300.0)
    assert_allclose(res.runon_m[:, 0], rain * 0.5 * 100.0 / 300.0, rtol=1e-12)
    assert_allclose(res.infil_m[:, 0], np.minimum(supply, phi * dt), rtol=1e-12)
    assert_allclose(res.excess_m[:, 0], supply - np.minimum(supply, phi * dt), atol=1e-15)
    assert_allclose(res.excess_m[:, 1], 0.5 * rain, rtol=1e-12)  # the connected half
    # run-on to the subcatchment: S's roofs (150 m2) over its lawns (500 m2); T gets nothing
    res = run_with_runon(frame, rain, dt, runon_to="subcatchment")
    assert_allclose(res.runon_m[:, 0], rain * 0.5 * 150.0 / 500.0, rtol=1e-12)
    assert_allclose(res.runon_m[:, 2], rain * 0.5 * 150.0 / 500.0, rtol=1e-12)
    assert not res.runon_m[:, 4].any()


def test_a_share_with_nowhere_to_go_is_refused():
    frame = layout("phi_index", 0.5).iloc[[1, 4]]  # a roof without its lawn
    with pytest.raises(ValueError, match="no pervious ground"):
        run_with_runon(frame, np.ones(3) * 1e-3, 300.0, runon_to="unit")


def test_more_disconnection_never_gives_more_runoff(method):
    """Monotone in the share: routing more roof water onto lawns cannot add runoff."""
    rain = np.array([1.0, 6.0, 12.0, 4.0, 0.5]) * 1e-3
    runoff = []
    roomy = {"phi_index_m_per_s": 30.0 * MM_PER_H, "constant_loss_m_per_s": 30.0 * MM_PER_H}
    for share in (0.0, 0.25, 0.5, 1.0):
        frame = layout(method, share, perv_params=roomy)
        res = run_with_runon(frame, rain, 600.0, runon_to="unit")
        subs = summarize_subcatchments(res, frame, np.array(["S", "T"], dtype=object), 600.0)
        runoff.append(subs["runoff_depth_m"].iloc[0])
    assert np.all(np.diff(runoff) <= 1e-15), runoff
    assert runoff[-1] < runoff[0]  # lawns with room to spare take some of it

