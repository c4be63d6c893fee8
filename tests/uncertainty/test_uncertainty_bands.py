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
from gisrun.uncertainty.analysis import Aggregator, prepare_parts, unit_figures
from gisrun.uncertainty.storm_rows import BandStorms, storm_runs
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


def _part(params, storms=(STORM,)):
    units = [run_storm(params, h, DT, sub_ids=SUBS).units for h in storms]  # the run's own
    return prepare_parts(params, _chunk(storms), units)


def _figures(params, n=40, seed=1, storms=(STORM,), part=None):
    """Per storm, every sample's (runoff depth, time to ponding), (samples x subcatchments)."""
    part = part or _part(params, storms)
    settings = UncertaintySettings(samples=n, seed=seed)
    rains = tuple(h.resample(DT) for h in storms)
    agg = Aggregator(part)
    out = []
    chunk = BandStorms(tuple(h.name for h in storms), rains, DT, 0.3)
    for k, (run,) in enumerate(storm_runs([part], settings, chunk)):
        runoff, ponding = unit_figures(part, run, k, n)
        out.append((agg.depth(runoff), agg.ponding(ponding)))
    return out


@pytest.mark.parametrize("method", ["green_ampt", "horton", "curve_number", "constant_loss",
                                    "phi_index"])
def test_zero_width_ranges_collapse_to_the_run_exactly(method):
    params = _params(method)
    part = _part(params)
    assert part.ranges.draw_names()  # the method has ranges to zero
    for column in part.ranges.draw:  # every range of zero width
        part.ranges.low[column] = part.ranges.central[column].copy()
        part.ranges.high[column] = part.ranges.central[column].copy()
        part.ranges.draw[column][:] = ""
    depth, ponding = _figures(params, n=9, seed=4, part=part)[0]
    bands = band_table(SUBS, Aggregator(part).area_m2, depth, ponding, (10, 50, 90))
    run = run_storm(params, STORM, DT, sub_ids=SUBS).subcatchments  # today's result
    for p in ("p10", "p50", "p90"):
        assert np.array_equal(bands[f"runoff_depth_{p}_m"], run["runoff_depth_m"])
        assert np.array_equal(bands[f"runoff_volume_{p}_m3"], run["runoff_volume_m3"])
        assert np.array_equal(bands[f"time_to_ponding_{p}_s"], run["time_to_ponding_s"],
                              equal_nan=True)
    assert np.array_equal(bands["ponding_probability"],
                          np.isfinite(run["time_to_ponding_s"]).astype(float))


def test_the_samples_differ_when_the_ranges_are_not_zero():
    depth, _ = _figures(_params("green_ampt"))[0]
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
    base, _ = _figures(params, n=16, seed=seed, storms=(storm,))[0]
    more, _ = _figures(wetter, n=16, seed=seed, storms=(storm,))[0]
    assert np.all(more <= base * (1 + 1e-9) + 1e-12)


def test_reproducible_with_the_seed():
    params = _params("green_ampt")
    a, b = _figures(params, seed=11)[0], _figures(params, seed=11)[0]
    c = _figures(params, seed=12)[0]
    assert np.array_equal(a[0], b[0])
    assert np.array_equal(a[1], b[1], equal_nan=True)
    assert not np.array_equal(a[0], c[0])


def test_p50_matches_the_central_run_where_the_response_is_linear():
    # phi-index with rain above the highest phi in every step: runoff = P - phi T - storage,
    # linear in phi (Chow et al. 1988 sec. 5.2). phi is uniform over the group's TR-55 range,
    # centred on the value the run uses, so the median runoff is the central run's. Sampling
    # error of a Latin hypercube median: at most one stratum, slope x range width / n.
    params = _params("phi_index")
    storm = _storm([3.0] * 24)  # 36 mm/h for 2 h, above 0.45 in/h (11.4 mm/h)
    n = 51
    chunk = _chunk((storm,))
    run = run_storm(params, storm, DT, sub_ids=SUBS)
    result = analyse_chunk(params, chunk, UncertaintySettings(samples=n, seed=5), [run.units])
    central = run.subcatchments["runoff_depth_m"]
    width_m = (0.30 - 0.15) * 0.0254 * 2.0  # group B range (TR-55 App. A) over 2 h, m
    p50 = result.bands[0]["runoff_depth_p50_m"].to_numpy()
    assert np.all(np.abs(p50 - central.to_numpy()) <= width_m / n + 1e-12)
    assert np.all(result.bands[0]["runoff_depth_p10_m"] < p50)


def test_one_at_a_time_swing_is_the_analytic_one_where_linear():
    # phi-index, all rain above phi: d(runoff)/d(phi) = -T, so for a subcatchment all of
    # group B pervious (S2's open space part) the swing is the range width x T x its share
    params = _params("phi_index")
    storm = _storm([3.0] * 24)
    units = [run_storm(params, storm, DT, sub_ids=SUBS).units]
    result = analyse_chunk(params, _chunk((storm,)), UncertaintySettings(samples=4, seed=1),
                           units)
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
    units = [run_storm(params, STORM, DT, sub_ids=SUBS).units]
    result = analyse_chunk(params, _chunk(), UncertaintySettings(samples=20, seed=3, top_k=1),
                           units)
    times, positions = result.first[0]
    assert times.shape == (20, 1)
    # the first to pond in each sample is the subcatchment with the earliest time in it
    _, ponding = _figures(params, n=20, seed=3)[0]
    earliest = np.argmin(np.where(np.isnan(ponding), np.inf, ponding), axis=1)
    ponds = np.isfinite(ponding).any(axis=1)
    assert ponds.any()
    assert np.array_equal(positions[ponds, 0], earliest[ponds])
    prob = result.bands[0]["ponding_probability"].to_numpy()
    assert np.array_equal(prob, np.isfinite(ponding).mean(axis=0))


def test_settings_are_frozen():
    s = UncertaintySettings(samples=3, seed=1)
    with pytest.raises(dataclasses.FrozenInstanceError):
        s.samples = 4  # type: ignore[misc]
