"""Bands from the samples: exact collapse, monotone in Ks, reproducible, unbiased when linear."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gisrun.parameters import assign_parameters
from gisrun.project import UncertaintySettings
from gisrun.storm import Hyetograph
from gisrun.uncertainty import ChunkInputs, RangeSettings, analyse_chunk
from gisrun.uncertainty.analysis import prepare_chunk, sample_figures
from gisrun.uncertainty.summary import band_table
from gisrun.workflow.steps import run_storm

DT = 300.0
RANGES = RangeSettings("hydrologic_soil_group", initial_saturation=0.3)


def _units() -> pd.DataFrame:
    rows = [("S1", "A", "open_space_good", 4000.0), ("S1", "B", "residential_half_acre", 2000.0),
            ("S2", "B", "open_space_good", 3000.0), ("S2", "D", "commercial", 1000.0),
            ("S3", "C", "pasture_fair", 5000.0), ("S3", "B/D", "open_space_good", 500.0)]
    return pd.DataFrame(rows, columns=["subcatchment_id", "soil_class", "cover_class", "area_m2"])


def _params(method: str) -> pd.DataFrame:
    params, _, _ = assign_parameters(_units(), classification="hydrologic_soil_group",
                                     initial_saturation=0.3, method=method)
    return params


def _storm(depths_mm) -> Hyetograph:
    depth = np.asarray(depths_mm, dtype=float) / 1000.0
    return Hyetograph("s", np.arange(len(depth) + 1) * DT, depth)


STORM = _storm([2, 5, 12, 20, 9, 4, 2, 1, 0, 0, 3, 6])
SUBS = np.array(["S1", "S2", "S3"], dtype=object)


def _chunk(storms=(STORM,)) -> ChunkInputs:
    return ChunkInputs(SUBS, tuple(h.name for h in storms),
                       tuple(h.resample(DT) for h in storms), DT, RANGES)


def _figures(params, n=40, seed=1, storms=(STORM,)):
    prepared = prepare_chunk(params, _chunk(storms))
    return sample_figures(prepared, UncertaintySettings(samples=n, seed=seed), saturation=0.3)


@pytest.mark.parametrize("method", ["green_ampt", "horton", "curve_number", "constant_loss",
                                    "phi_index"])
def test_zero_width_ranges_collapse_to_the_run_exactly(method):
    params = _params(method)
    prepared = prepare_chunk(params, _chunk())
    for column in prepared.ranges.draw:  # every range of zero width
        prepared.ranges.low[column] = prepared.ranges.central[column].copy()
        prepared.ranges.high[column] = prepared.ranges.central[column].copy()
        prepared.ranges.draw[column][:] = ""
    fig = sample_figures(prepared, UncertaintySettings(samples=9, seed=4), saturation=0.3)[0]
    bands = band_table(SUBS, prepared.runner.area_m2, fig.runoff_depth_m,
                       fig.time_to_ponding_s, (10, 50, 90))
    run = run_storm(params, STORM, DT, sub_ids=SUBS).subcatchments  # today's result
    for p in ("p10", "p50", "p90"):
        assert np.array_equal(bands[f"runoff_depth_{p}_m"], run["runoff_depth_m"])
        assert np.array_equal(bands[f"runoff_volume_{p}_m3"], run["runoff_volume_m3"])
        assert np.array_equal(bands[f"time_to_ponding_{p}_s"], run["time_to_ponding_s"],
                              equal_nan=True)
    assert np.array_equal(bands["ponding_probability"],
                          np.isfinite(run["time_to_ponding_s"]).astype(float))


def test_the_samples_differ_when_the_ranges_are_not_zero():
    depth = _figures(_params("green_ampt"))[0].runoff_depth_m
    assert np.all(depth.max(axis=0) > depth.min(axis=0))


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(factor=st.floats(1.0, 20.0),
       rain=st.lists(st.floats(0.0, 30.0), min_size=3, max_size=12),
       seed=st.integers(0, 2**32 - 1))
def test_raising_ks_everywhere_never_raises_runoff_in_any_sample(factor, rain, seed):
    # Green-Ampt infiltration capacity grows with Ks (Chow et al. 1988 eq. 4.4.5): every sample,
    # drawn with the same seed, has each Ks times `factor` and the rest equal
    params = _params("green_ampt")
    wetter = params.assign(ks_m_per_s=params["ks_m_per_s"] * factor)
    storm = _storm(rain)
    base = _figures(params, n=16, seed=seed, storms=(storm,))[0]
    more = _figures(wetter, n=16, seed=seed, storms=(storm,))[0]
    assert np.all(more.runoff_depth_m <= base.runoff_depth_m * (1 + 1e-9) + 1e-12)


def test_reproducible_with_the_seed():
    params = _params("green_ampt")
    a, b = _figures(params, seed=11)[0], _figures(params, seed=11)[0]
    c = _figures(params, seed=12)[0]
    assert np.array_equal(a.runoff_depth_m, b.runoff_depth_m)
    assert np.array_equal(a.time_to_ponding_s, b.time_to_ponding_s, equal_nan=True)
    assert not np.array_equal(a.runoff_depth_m, c.runoff_depth_m)


def test_p50_matches_the_central_run_where_the_response_is_linear():
    # phi-index with rain above the highest phi in every step: runoff = P - phi T - storage,
    # linear in phi (Chow et al. 1988 sec. 5.2). phi is uniform over the group's TR-55 range,
    # centred on the value the run uses, so the median runoff is the central run's. Sampling
    # error of a Latin hypercube median: at most one stratum, slope x range width / n.
    params = _params("phi_index")
    storm = _storm([3.0] * 24)  # 36 mm/h for 2 h, above 0.45 in/h (11.4 mm/h)
    n = 51
    chunk = _chunk((storm,))
    result = analyse_chunk(params, chunk, UncertaintySettings(samples=n, seed=5))
    central = run_storm(params, storm, DT, sub_ids=SUBS).subcatchments["runoff_depth_m"]
    width_m = (0.30 - 0.15) * 0.0254 * 2.0  # group B range (TR-55 App. A) over 2 h, m
    p50 = result.bands[0]["runoff_depth_p50_m"].to_numpy()
    assert np.all(np.abs(p50 - central.to_numpy()) <= width_m / n + 1e-12)
    assert np.all(result.bands[0]["runoff_depth_p10_m"] < p50)


def test_one_at_a_time_swing_is_the_analytic_one_where_linear():
    # phi-index, all rain above phi: d(runoff)/d(phi) = -T, so for a subcatchment all of
    # group B pervious (S2's open space part) the swing is the range width x T x its share
    params = _params("phi_index")
    storm = _storm([3.0] * 24)
    result = analyse_chunk(params, _chunk((storm,)), UncertaintySettings(samples=4, seed=1))
    table = result.sensitivity.set_index(["subcatchment_id", "parameter"])
    s2 = params[params["subcatchment_id"] == "S2"]
    share_b = s2.loc[(s2["soil_class"] == "B") & (s2["surface"] == "pervious"), "area_m2"].sum()
    share_d = s2.loc[(s2["soil_class"] == "D") & (s2["surface"] == "pervious"), "area_m2"].sum()
    total = s2["area_m2"].sum()
    expected = 2.0 * 0.0254 * ((0.30 - 0.15) * share_b + (0.05 - 0.0) * share_d) / total
    assert table.at[("S2", "phi_index_m_per_s"), "runoff_depth_swing_m"] == pytest.approx(
        expected, rel=1e-9)
    assert table.at[("S2", "phi_index_m_per_s"), "sensitivity_rank"] == 1


def test_first_to_pond_share_and_probability_are_shares_of_samples():
    params = _params("green_ampt")
    result = analyse_chunk(params, _chunk(), UncertaintySettings(samples=20, seed=3, top_k=1))
    times, positions = result.first[0]
    assert times.shape == (20, 1)
    # the first to pond in each sample is the subcatchment with the earliest time in it
    fig = _figures(params, n=20, seed=3)[0]
    earliest = np.nanargmin(np.where(np.isnan(fig.time_to_ponding_s), np.inf,
                                     fig.time_to_ponding_s), axis=1)
    ponds = np.isfinite(fig.time_to_ponding_s).any(axis=1)
    assert np.array_equal(positions[ponds, 0], earliest[ponds])
    prob = result.bands[0]["ponding_probability"].to_numpy()
    assert np.array_equal(prob, np.isfinite(fig.time_to_ponding_s).mean(axis=0))


def test_settings_are_frozen():
    s = UncertaintySettings(samples=3, seed=1)
    with pytest.raises(dataclasses.FrozenInstanceError):
        s.samples = 4  # type: ignore[misc]
