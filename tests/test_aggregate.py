import dataclasses
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from gisrun.aggregate import (
    MassBalanceError,
    area_weights,
    soil_shares,
    subcatchment_series,
    summarize_subcatchments,
)

DT = 300.0


def fake_loss(rain, infil, excess, storage, tp):
    return SimpleNamespace(rain_m=np.asarray(rain, float), infil_m=np.asarray(infil, float),
                           excess_m=np.asarray(excess, float), storage_m=np.asarray(storage, float),
                           time_to_ponding_s=np.asarray(tp, float))


@pytest.fixture
def two_subs():
    # subcatchment a: 300 m2 pervious + 100 m2 impervious; b: 200 m2 pervious
    params = pd.DataFrame({
        "subcatchment_id": ["a", "a", "b"],
        "surface": ["pervious", "impervious", "pervious"],
        "area_m2": [300.0, 100.0, 200.0],
    })
    rain = [[0.002] * 3, [0.004] * 3]
    infil = [[0.002, 0.0, 0.002], [0.001, 0.0, 0.003]]
    excess = [[0.0, 0.001, 0.0], [0.003, 0.004, 0.001]]
    storage = [0.0, 0.001, 0.0]
    tp = [450.0, 0.0, np.nan]
    return params, fake_loss(rain, infil, excess, storage, tp)


def test_depths_are_area_weighted_and_volumes_add(two_subs):
    params, loss = two_subs
    out = summarize_subcatchments(loss, params, np.array(["a", "b"], dtype=object), DT)
    a, b = out.iloc[0], out.iloc[1]
    # hand computation: a's runoff = (300 * 0.003 + 100 * 0.005) / 400
    assert a["runoff_depth_m"] == pytest.approx((300 * 0.003 + 100 * 0.005) / 400, rel=1e-12)
    assert a["runoff_volume_m3"] == pytest.approx(300 * 0.003 + 100 * 0.005, rel=1e-12)
    assert a["impervious_fraction"] == pytest.approx(0.25)
    assert b["runoff_depth_m"] == pytest.approx(0.001)
    assert a["runoff_coefficient"] == pytest.approx(a["runoff_depth_m"] / 0.006)
    # ponding: earliest pervious unit; the impervious unit (t=0) does not count
    assert a["time_to_ponding_s"] == 450.0
    assert np.isnan(b["time_to_ponding_s"])
    # runoff starts in the first step for a (impervious), the second for b
    assert a["runoff_start_s"] == 0.0 and b["runoff_start_s"] == DT
    # peak excess intensity of the area-weighted series (second step of a)
    assert a["peak_excess_intensity_m_per_s"] == pytest.approx((300 * .003 + 100 * .004) / 400 / DT)
    assert_allclose(out["mass_balance_error_m"], 0.0, atol=1e-15)


def test_mass_balance_fault_is_caught(two_subs):
    params, loss = two_subs
    loss.excess_m[1, 2] += 1e-6  # water created from nothing in b
    with pytest.raises(MassBalanceError, match="subcatchment b"):
        summarize_subcatchments(loss, params, np.array(["a", "b"], dtype=object), DT)


def test_nan_in_the_balance_is_a_breach(two_subs):
    params, loss = two_subs
    loss.infil_m[0, 2] = np.nan  # NaN compares false with any tolerance: it must still stop
    with pytest.raises(MassBalanceError, match="subcatchment b"):
        summarize_subcatchments(loss, params, np.array(["a", "b"], dtype=object), DT)


def test_a_breach_is_an_internal_error_exit_1(tmp_path, capsys, monkeypatch):
    """README, exit codes: a mass-balance breach is an internal fault (1), not a bad input (2)."""
    from bad_inputs_helpers import make_project, run_cli

    import gisrun.workflow.steps as steps

    real = steps.run_losses

    def leaky(*args: object, **kwargs: object) -> object:
        loss = real(*args, **kwargs)
        excess = loss.excess_m.copy()
        excess[-1, :] = np.nan  # an engine fault: water turns into NaN
        return dataclasses.replace(loss, excess_m=excess)

    monkeypatch.setattr(steps, "run_losses", leaky)
    make_project(tmp_path / "p")
    code, out, err = run_cli(capsys, ["run", str(tmp_path / "p"), "--output",
                                      str(tmp_path / "r.gpkg"), "--no-extras", "--quiet"])
    assert code == 1, err
    assert "internal error" in err and "mass balance" in err, err
    assert not (tmp_path / "r.gpkg").exists()


def test_series_sums_to_depths(two_subs):
    params, loss = two_subs
    ids = np.array(["a", "b"], dtype=object)
    series = subcatchment_series(loss, params, ids, DT)
    totals = series.groupby("subcatchment_id")[["rain_m", "infiltration_m", "excess_m"]].sum()
    out = summarize_subcatchments(loss, params, ids, DT).set_index("subcatchment_id")
    assert_allclose(totals["excess_m"], out["runoff_depth_m"], rtol=1e-12)
    assert_allclose(totals["infiltration_m"], out["infiltration_depth_m"], rtol=1e-12)
    assert list(series["time_end_s"][:2]) == [DT, 2 * DT]


def test_weights_and_soil_shares():
    w = area_weights(np.array(["x", "y", "x"], dtype=object), np.array([1.0, 5.0, 3.0]),
                     np.array(["y", "x", "z"], dtype=object))
    assert_allclose(w.toarray(), [[0, 1, 0], [0.25, 0, 0.75], [0, 0, 0]])
    units = pd.DataFrame({"subcatchment_id": ["x", "x", "y"], "soil_class": ["B/D", "A", "A"],
                          "area_m2": [3.0, 1.0, 2.0]})
    shares = soil_shares(units, np.array(["x", "y"], dtype=object)).set_index("subcatchment_id")
    assert shares.loc["x", "soil_B_D_fraction"] == 0.75
    assert shares.loc["y", "soil_A_fraction"] == 1.0


def test_run_storm_summary_equals_a_fresh_summary_of_its_losses():
    # run_storm hands the series' excess (subcatchments x steps) to the summary instead of
    # recomputing it; the summary must equal one computed from the losses alone
    from gisrun.storm import Hyetograph
    from gisrun.workflow.steps import run_storm

    rng = np.random.default_rng(3)
    params = pd.DataFrame({"subcatchment_id": ["a", "b", "a", "c", "b", "c", "a"],
                           "surface": ["pervious"] * 6 + ["impervious"],
                           "area_m2": rng.uniform(10, 500, 7), "loss_method": "phi_index",
                           "phi_index_m_per_s": rng.uniform(1e-7, 2e-5, 7),
                           "depression_storage_m": rng.uniform(0, 0.003, 7)})
    storm = Hyetograph("h", [0, 600, 1200, 1800, 2400], [0.002, 0.015, 0.006, 0.001])
    ids = np.array(["c", "a", "b"], dtype=object)
    result = run_storm(params, storm, 300.0, sub_ids=ids)
    fresh = summarize_subcatchments(result.loss, params, ids, 300.0)
    pd.testing.assert_frame_equal(result.subcatchments, fresh)
    assert result.subcatchments["peak_excess_intensity_m_per_s"].nunique() == 3
