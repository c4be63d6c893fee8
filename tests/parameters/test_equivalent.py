"""Equivalent and fitted lumped parameters: inverses checked against forward runs and searches.

Sources: NRCS (1986) TR-55, eq. 2-3 and Table 2-1; TR-55 Example 2-1 (Worksheet 2,
figure 2-5); Hawkins (1993) J. Irrig. Drain. Eng. 119(2) for the closed-form
back-calculation; Chow, Maidment and Mays (1988) section 5.2 for the phi-index
procedure (here :func:`gisrun.engine.fit_phi_index`, an independent code path).
Brute-force searches and scipy.optimize.brentq are the independent checks of the
root searches.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from gisrun.engine import fit_constant_loss_rate, fit_phi_index, run_losses
from gisrun.engine.curve_number import (
    INCH_M,
    adjust_for_antecedent_condition,
    cumulative_excess_m,
    curve_number_for_runoff,
    retention_m,
)
from gisrun.parameters.equivalent import LOWERED, StormRunoff, lumped_parameters
from gisrun.parameters.inverse import ABOVE_REACH

DT = 300.0
MM_H = 1e-3 / 3600.0


def storm(depth_mm: float, n: int = 24) -> np.ndarray:
    """A triangular hyetograph of ``n`` 5-minute steps peaking in the middle (m per step)."""
    shape = np.minimum(np.arange(1, n + 1), np.arange(n, 0, -1)).astype(float)
    return depth_mm * 1e-3 * shape / shape.sum()


STORMS = {"small": storm(25.0), "large": storm(70.0), "long": storm(45.0, 36)}


def parts(method: str, *, storage: float = 0.002) -> pd.DataFrame:
    """One subcatchment: sandy and clayey pervious parts (40 m2 each) and 20 m2 impervious."""
    return pd.DataFrame({
        "subcatchment_id": ["S"] * 3, "surface": ["pervious", "pervious", "impervious"],
        "area_m2": [40.0, 40.0, 20.0], "loss_method": [method] * 3,
        "ks_m_per_s": [30 * MM_H, 1 * MM_H, 0.0], "suction_head_m": [0.05, 0.25, 0.0],
        "moisture_deficit": [0.3, 0.2, 0.0], "depression_storage_m": [storage, storage, 0.0015],
        "horton_f0_m_per_s": [120 * MM_H, 25 * MM_H, 0.0],
        "horton_fc_m_per_s": [10 * MM_H, 0.6 * MM_H, 0.0],
        "horton_decay_per_s": [4.14 / 3600] * 2 + [0.0], "horton_recovery_per_s": [0.0] * 3,
        "curve_number": [49.0, 84.0, 98.0], "initial_abstraction_ratio": [0.2] * 3,
        "antecedent_condition": [2.0] * 3,
        "initial_loss_m": [0.010, 0.004, 0.0015],
        "constant_loss_m_per_s": [9 * MM_H, 1 * MM_H, 0.0],
        "phi_index_m_per_s": [12 * MM_H, 2 * MM_H, 0.0],
    })


def gisrun_runoff(frame: pd.DataFrame, rain: np.ndarray) -> float:
    loss = run_losses(frame, rain, DT)
    area = frame["area_m2"].to_numpy()
    return float(area @ loss.excess_m.sum(axis=0) / area.sum())


def table(method: str, **kwargs) -> tuple[pd.DataFrame, pd.DataFrame, dict[str, float]]:
    frame = parts(method, **kwargs)
    runoff = {name: gisrun_runoff(frame, rain) for name, rain in STORMS.items()}
    storms = [StormRunoff(n, r, np.array([runoff[n]])) for n, r in STORMS.items()]
    return lumped_parameters(frame, ["S"], storms, DT, default_method=method), frame, runoff


def pick(t: pd.DataFrame, basis: str, storm_name: str, parameter: str) -> pd.Series:
    rows = t[(t["basis"] == basis) & (t["storm"] == storm_name) & (t["parameter"] == parameter)
             & (t["surface"] == "pervious")]
    assert len(rows) == 1
    return rows.iloc[0]


def lumped_runoff(frame: pd.DataFrame, column: str, values: np.ndarray, rain: np.ndarray,
                  method: str, **fixed: float) -> np.ndarray:
    """Runoff of the lumped pair (area-weighted units, ``column`` set to each of ``values``)."""
    perv = frame[frame["surface"] == "pervious"]
    w = perv["area_m2"].to_numpy() / perv["area_m2"].sum()
    mean = {c: float(w @ perv[c].to_numpy(float)) for c in perv.columns
            if c not in ("subcatchment_id", "surface", "area_m2", "loss_method")}
    units = pd.DataFrame([mean] * len(values)).assign(**fixed, **{column: values})
    imp = frame[frame["surface"] == "impervious"].drop(columns=["subcatchment_id", "surface"])
    d_perv = run_losses(units, rain, DT, method=method, deduplicate=False).runoff_depth_m
    d_imp = run_losses(imp, rain, DT, method=method).runoff_depth_m[0]
    return 0.8 * d_perv + 0.2 * d_imp


# --- curve number: the closed-form inverse -----------------------------------------------------


def test_curve_number_inverse_reproduces_the_forward_equation_to_1e9():
    rng = np.random.default_rng(7)
    n = 20000
    cn, rain = rng.uniform(30.0, 99.9, n), rng.uniform(0.002, 0.4, n)
    ratio, cond = rng.choice([0.2, 0.05], n), rng.choice([1.0, 2.0, 3.0], n)
    lam = np.where(ratio == 0.05, 0.05, 0.2)
    s = retention_m(adjust_for_antecedent_condition(cn, cond), ratio)
    q = cumulative_excess_m(rain, s, lam * s)
    back = curve_number_for_runoff(rain, q, ratio, cond)
    runs = q > 1e-6
    assert_allclose(back[runs], cn[runs], rtol=1e-9)
    s2 = retention_m(adjust_for_antecedent_condition(back, cond), ratio)
    assert_allclose(cumulative_excess_m(rain, s2, lam * s2)[runs], q[runs], rtol=1e-9)


@pytest.mark.parametrize(("rain_in", "runoff_in", "cn", "tol"), [
    (3.0, 1.25, 80.0, 1e-9),  # TR-55 (1986) Table 2-1, P = 3.0 in, CN 80: Q = 1.25 in (from memory)
    (6.0, 2.81, 70.0, 0.1),  # TR-55 (1986) Example 2-1, figure 2-5: CN 70, P 6.0 in, Q 2.81 in
])                            # (from memory; Q is rounded to 0.01 in, hence 0.1 in CN)
def test_curve_number_inverse_gives_the_published_curve_number(rain_in, runoff_in, cn, tol):
    got = curve_number_for_runoff(rain_in * INCH_M, runoff_in * INCH_M, 0.2, 2.0)
    assert float(got) == pytest.approx(cn, abs=tol)


def test_curve_number_inverse_is_hawkins_closed_form_at_ratio_0_2():
    # Hawkins (1993): S = 5 [P + 2Q - (4Q^2 + 5PQ)^(1/2)], P, Q, S in inches (from memory)
    p, q = np.array([2.0, 4.0, 7.5]), np.array([0.3, 1.7, 6.0])
    s = 5.0 * (p + 2 * q - np.sqrt(4 * q * q + 5 * p * q))
    assert_allclose(curve_number_for_runoff(p * INCH_M, q * INCH_M, 0.2, 2.0),
                    1000.0 / (10.0 + s), rtol=1e-12)


def test_curve_number_inverse_at_its_edges():
    p = 2.0 * INCH_M
    # no runoff: the largest curve number still giving none has Ia = 0.2 S = P (TR-55 eq. 2-2)
    assert float(curve_number_for_runoff(p, 0.0, 0.2, 2.0)) == pytest.approx(1000 / (10 + 10.0))
    assert float(curve_number_for_runoff(p, p, 0.2, 2.0)) == 100.0
    assert np.isnan(curve_number_for_runoff(0.0, 0.0, 0.2, 2.0))


def test_equivalent_curve_number_reproduces_the_unit_runoff():
    t, frame, runoff = table("curve_number")
    for name, rain in STORMS.items():
        row = pick(t, "equivalent", name, "curve_number")
        assert row["lumped_runoff_depth_m"] == pytest.approx(runoff[name], rel=1e-9)
        rerun = lumped_runoff(frame, "curve_number", np.array([row["value"]]), rain,
                              "curve_number")
        assert rerun[0] == pytest.approx(runoff[name], rel=1e-9)
        aw = pick(t, "area_weighted", name, "curve_number")
        assert aw["value"] == pytest.approx((49 + 84) / 2)  # pervious area-weighted mean


# --- rates: bracketed root search against brute force and brentq ------------------------------


@pytest.mark.parametrize(("method", "column", "span"), [
    ("green_ampt", "ks_m_per_s", (0.05 * MM_H, 300 * MM_H)),
    ("horton", "horton_fc_m_per_s", (0.0, 72.4999 * MM_H)),  # fc <= mean f0, 72.5 mm/h
])
def test_equivalent_rate_matches_brute_force_and_brentq(method, column, span):
    t, frame, runoff = table(method)
    for name, rain in STORMS.items():
        row = pick(t, "equivalent", name, column)
        value = row["value"]
        grid = np.linspace(*span, 40001)  # brute force: every value on a fine grid
        depths = lumped_runoff(frame, column, grid, rain, method)
        best = grid[np.argmin(np.abs(depths - runoff[name]))]
        assert value == pytest.approx(best, abs=2 * (grid[1] - grid[0]))
        if row["note"]:  # Horton, small storm: even fc = 0 gives less runoff than the units,
            assert row["note"] == LOWERED and value == span[0] == best  # so f0 is lowered
            f0 = pick(t, "equivalent", name, "horton_f0_m_per_s")["value"]
            grid = np.linspace(0.0, 72.4999 * MM_H, 40001)
            depths = lumped_runoff(frame, "horton_f0_m_per_s", grid, rain, method,
                                   horton_fc_m_per_s=0.0)
            best = grid[np.argmin(np.abs(depths - runoff[name]))]
            assert f0 == pytest.approx(best, abs=2 * (grid[1] - grid[0]))
            assert row["lumped_runoff_depth_m"] == pytest.approx(runoff[name], rel=1e-9)
            continue

        def miss(x: float, rain=rain, name=name) -> float:
            return lumped_runoff(frame, column, np.array([x]), rain, method)[0] - runoff[name]

        assert value == pytest.approx(brentq(miss, *span, xtol=1e-15, rtol=1e-12), rel=1e-7)
        assert miss(value) == pytest.approx(0.0, abs=1e-11)


@pytest.mark.parametrize(("method", "column"), [("phi_index", "phi_index_m_per_s"),
                                                ("constant_loss", "constant_loss_m_per_s")])
def test_equivalent_loss_rate_is_the_published_fit_procedure(method, column):
    """Without depression storage the rate follows from the phi-index procedure (Chow et al.
    1988, section 5.2), coded separately in gisrun.engine.phi_index."""
    t, frame, runoff = table(method, storage=0.0)
    for name, rain in STORMS.items():
        value = pick(t, "equivalent", name, column)["value"]
        imp = frame[frame["surface"] == "impervious"]
        d_imp = run_losses(imp, rain, DT).runoff_depth_m[0]
        perv_target = (runoff[name] - 0.2 * d_imp) / 0.8
        if method == "phi_index":
            expected = fit_phi_index(rain, perv_target, DT)[0]
        else:
            expected = fit_constant_loss_rate(rain, perv_target, DT, initial_loss_m=0.007)[0]
        assert value == pytest.approx(expected, rel=1e-6)


def test_no_pervious_runoff_gives_the_smallest_rate_that_gives_none():
    frame = parts("green_ampt")
    rain = storm(6.0)
    target = gisrun_runoff(frame, rain)
    t = lumped_parameters(frame, ["S"], [StormRunoff("tiny", rain, np.array([target]))], DT,
                          default_method="green_ampt")
    row = pick(t, "equivalent", "tiny", "ks_m_per_s")
    # the impervious part's runoff alone (to the last bits of the area weighting)
    assert row["lumped_runoff_depth_m"] == pytest.approx(target, rel=1e-12)
    below = lumped_runoff(frame, "ks_m_per_s", np.array([row["value"] * 0.999]), rain,
                          "green_ampt")
    assert below[0] > target


def test_runoff_no_value_can_give_is_said_with_its_residual():
    frame = parts("green_ampt")  # depression storage holds 2 mm: all the rain cannot run off
    rain = STORMS["large"]
    t = lumped_parameters(frame, ["S"], [StormRunoff("x", rain, np.array([rain.sum()]))], DT,
                          default_method="green_ampt")
    row = pick(t, "equivalent", "x", "ks_m_per_s")
    assert row["note"] == ABOVE_REACH and row["value"] == 0.0
    assert row["lumped_difference_m"] < 0  # the residual: less runoff than asked for
    assert row["lumped_difference_m"] == pytest.approx(
        row["lumped_runoff_depth_m"] - rain.sum())


# --- fitted across storms ----------------------------------------------------------------------


@pytest.mark.parametrize(("method", "column"), [("green_ampt", "ks_m_per_s"),
                                                ("curve_number", "curve_number")])
def test_fitted_value_minimizes_the_squared_differences(method, column):
    t, frame, runoff = table(method)
    fitted = pick(t, "fitted", "all storms", column)["value"]
    candidates = [fitted, fitted * 1.001, fitted * 0.999,
                  pick(t, "area_weighted", "all storms", column)["value"],
                  *[pick(t, "equivalent", n, column)["value"] for n in STORMS]]

    def sse(x: float) -> float:
        return sum((lumped_runoff(frame, column, np.array([x]), rain, method)[0]
                    - runoff[n]) ** 2 for n, rain in STORMS.items())

    costs = [sse(x) for x in candidates]
    assert costs[0] <= min(costs) * (1 + 1e-9)
    residuals = [pick(t, "fitted", n, column)["lumped_difference_m"] for n in STORMS]
    assert np.sqrt(np.mean(np.square(residuals))) == pytest.approx(
        pick(t, "fitted", "all storms", column)["lumped_difference_m"])
    assert np.sqrt(np.mean(np.square(residuals))) == pytest.approx(np.sqrt(costs[0] / 3))
