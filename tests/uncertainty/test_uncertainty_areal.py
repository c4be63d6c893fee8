"""Bands under rain that differs between subcatchments (rain gauges, a rain grid).

The checks are exact comparisons with the bands of storms of one series (the path the other
uncertainty tests check against TR-55 ranges and analytic solutions), and the monotone response
of Green-Ampt infiltration to rain (Chow, Maidment & Mays 1988, sec. 4.4: with the same soil
parameters, a storm with more rain in every step never gives less runoff).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from gisrun.engine.green_ampt import NEWTON_RTOL
from gisrun.parameters import assign_parameters
from gisrun.project import UncertaintySettings
from gisrun.storm import Hyetograph
from gisrun.uncertainty import (
    BandStorms,
    ChunkInputs,
    RangeSettings,
    analyse_chunk,
    chunk_bands,
    prepare_parts,
    sampling,
)
from gisrun.uncertainty.rowsets import gather_rows
from gisrun.uncertainty.storm_rows import column_rows
from gisrun.workflow.steps import run_storm

DT = 300.0
RANGES = RangeSettings("hydrologic_soil_group", initial_saturation=0.3)
SETTINGS = UncertaintySettings(samples=16, seed=21, percentiles=(10, 50, 90), top_k=2)
SUBS = np.array(["S1", "S2", "S3"], dtype=object)
STORM = Hyetograph("s", np.arange(13) * DT,
                   np.array([2, 5, 12, 20, 9, 4, 2, 1, 0, 0, 3, 6], dtype=float) / 1000.0)
RAIN = STORM.resample(DT)
METHODS = ["green_ampt", "horton", "curve_number", "constant_loss", "phi_index"]


def _params(rows=None, method="green_ampt") -> pd.DataFrame:
    rows = rows or [("S1", "A", "open_space_good", 4000.0),
                    ("S1", "B", "residential_half_acre", 2000.0),
                    ("S2", "B", "open_space_good", 3000.0), ("S2", "D", "commercial", 1000.0),
                    ("S3", "C", "pasture_fair", 5000.0), ("S3", "B", "open_space_good", 500.0)]
    units = pd.DataFrame(rows, columns=["subcatchment_id", "soil_class", "cover_class",
                                        "area_m2"])
    params, _, _ = assign_parameters(units, classification="hydrologic_soil_group",
                                     initial_saturation=0.3, method=method)
    return params


def _scale(params) -> np.ndarray:
    """A rain factor per subcatchment, given per unit (as the run gives it)."""
    by_id = {"S1": 1.0, "S2": 0.85, "S3": 1.3}
    return params["subcatchment_id"].map(by_id).to_numpy(dtype=float)


def _analyse(params, rains: dict[str, np.ndarray], scale=None, subs=SUBS, settings=SETTINGS):
    """Bands of every storm (``name -> rain``, (steps,) or (steps, subcatchments))."""
    units = [run_storm(params, STORM, DT, sub_ids=subs, rain_scale=scale,
                       rain_per_step_m=rain).units for rain in rains.values()]
    chunk = ChunkInputs(subs, tuple(rains), tuple(rains.values()), DT, RANGES, rain_scale=scale)
    return analyse_chunk(params, chunk, settings, units)


def _numbers(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.drop(columns=[c for c in ("storm",) if c in frame.columns])


def test_identical_columns_give_the_uniform_storms_bands_exactly():
    # every subcatchment's column is the uniform storm's series, with a rain factor per
    # subcatchment: same seed, so the same bands, sensitivity and first-to-pond lists
    params = _params()
    scale = _scale(params)
    areal = np.repeat(RAIN[:, None], len(SUBS), axis=1)
    out = _analyse(params, {"uniform": RAIN, "areal": areal}, scale)
    pd.testing.assert_frame_equal(out.bands[0], out.bands[1], check_exact=True)
    assert out.bands[0]["runoff_depth_p90_m"].gt(out.bands[0]["runoff_depth_p10_m"]).all()
    sens = out.sensitivity
    by_storm = [sens[sens["storm"] == s].drop(columns="storm").reset_index(drop=True)
                for s in ("uniform", "areal")]
    assert len(by_storm[0]) > 0
    pd.testing.assert_frame_equal(*by_storm, check_exact=True)
    for a, b in zip(out.first[0], out.first[1], strict=True):
        assert np.array_equal(a, b, equal_nan=True)


def _same(a: pd.DataFrame, b: pd.DataFrame, method: str) -> None:
    """Equal frames: exactly, or for Green-Ampt to its Newton tolerance.

    Green-Ampt's ponded equation is solved by Newton steps that go on while most units of an
    engine call are outside the tolerance, so a row's last bits depend on the other rows of
    its call (DEVELOPERS.md); the other methods are computed row by row.
    """
    if method == "green_ampt":
        pd.testing.assert_frame_equal(a, b, check_exact=False, rtol=10 * NEWTON_RTOL,
                                      atol=1e-15)
    else:
        pd.testing.assert_frame_equal(a, b, check_exact=True)


@pytest.mark.parametrize("method", METHODS)
def test_each_subcatchment_gets_the_bands_of_its_own_column(method):
    # three different columns (a gauge each): subcatchment i's band is the band it gets when
    # its column falls on every subcatchment as a storm of one series
    params = _params(method=method)
    scale = _scale(params)
    columns = np.column_stack([RAIN, 0.4 * RAIN, np.roll(RAIN, 3) * 1.7])
    areal = _analyse(params, {"areal": columns}, scale).bands[0]
    for i in range(len(SUBS)):
        own = _analyse(params, {"uniform": columns[:, i]}, scale).bands[0]
        _same(areal.iloc[[i]], own.iloc[[i]], method)
    assert areal["runoff_depth_p50_m"].nunique() == 3


def test_zero_width_ranges_give_the_runs_own_areal_results_exactly():
    params = _params()
    scale = _scale(params)
    columns = np.column_stack([RAIN * 1.4, 0.6 * RAIN, np.roll(RAIN, 2)])
    run = run_storm(params, STORM, DT, sub_ids=SUBS, rain_scale=scale, rain_per_step_m=columns)
    chunk = ChunkInputs(SUBS, ("areal",), (columns,), DT, RANGES, rain_scale=scale)
    part = prepare_parts(params, chunk, [run.units])
    assert part.ranges.draw_names()
    for column in part.ranges.draw:  # every range of zero width
        part.ranges.low[column] = part.ranges.central[column].copy()
        part.ranges.high[column] = part.ranges.central[column].copy()
        part.ranges.draw[column][:] = ""
    bands = chunk_bands([part], SETTINGS, BandStorms(("areal",), (columns,), DT, 0.3))[0].bands[0]
    subs = run.subcatchments
    for p in ("p10", "p50", "p90"):
        assert np.array_equal(bands[f"runoff_depth_{p}_m"], subs["runoff_depth_m"])
        assert np.array_equal(bands[f"runoff_volume_{p}_m3"], subs["runoff_volume_m3"])
        assert np.array_equal(bands[f"time_to_ponding_{p}_s"], subs["time_to_ponding_s"],
                              equal_nan=True)
    assert np.array_equal(bands["ponding_probability"],
                          np.isfinite(subs["time_to_ponding_s"]).astype(float))


@pytest.mark.parametrize("method", ["green_ampt", "horton", "curve_number"])
def test_more_rain_gives_more_runoff_at_every_percentile(method):
    # two subcatchments of the same soil and cover; the second's rain is the first's x 1.5 in
    # every step. Each sample gives both the same parameters, and runoff grows with rain
    # (Green-Ampt, Horton: Chow et al. 1988 sec. 4.3-4.4; curve number: TR-55 eq. 2-3)
    rows = [("S1", "B", "open_space_good", 4000.0), ("S2", "B", "open_space_good", 4000.0)]
    params = _params(rows, method)
    subs = np.array(["S1", "S2"], dtype=object)
    heavy = RAIN * 4.0  # so every sample runs off
    columns = np.column_stack([heavy, 1.5 * heavy])
    bands = _analyse(params, {"areal": columns}, subs=subs).bands[0]
    for p in (10, 50, 90):
        depth = bands[f"runoff_depth_p{p}_m"].to_numpy()
        assert depth[1] > depth[0] > 0, (p, depth)
    assert bands["runoff_depth_p90_m"].gt(bands["runoff_depth_p10_m"]).all()
    if method != "curve_number":  # no ponding time for the curve number
        ponds = bands["time_to_ponding_p50_s"].to_numpy()
        assert ponds[1] <= ponds[0]


def test_rows_are_distinct_per_part_and_rain_column():
    params = _params()
    units = [run_storm(params, STORM, DT, sub_ids=SUBS).units]
    part = prepare_parts(params, ChunkInputs(SUBS, ("s",), (RAIN,), DT, RANGES), units)
    sampled = np.zeros(len(part.parts.keys), dtype=bool)
    for column in part.ranges.draw:
        sampled |= part.ranges.sampled(column)
    used = sampled[part.parts.inverse]
    # one column for all: one row per sampled part, as in the run-wide table
    table, (unit_row,) = column_rows([part], [np.arange(3)], np.repeat(RAIN[:, None], 3, axis=1))
    assert len(table.frame) == sampled.sum() == len(gather_rows([part]).frame)
    assert len(set(table.rain_columns)) == 1
    # S1 and S3 share a column, S2 has its own: B open space (in S2 and S3) needs two rows
    rain = np.column_stack([RAIN, 2 * RAIN, RAIN])
    table, (unit_row,) = column_rows([part], [np.arange(3)], rain)
    pairs = {(p, s if s != "S3" else "S1") for p, s, u in
             zip(part.parts.inverse, part.unit_sub_ids, used, strict=True) if u}
    assert len(table.frame) == len(pairs) == sampled.sum() + 1
    assert np.all(unit_row[~used] == -1) and np.all(unit_row[used] >= 0)
    of_unit = rain[:, table.rain_columns[unit_row[used]]]  # each unit's row: its own rain
    own = rain[:, pd.Index(SUBS).get_indexer(part.unit_sub_ids[used])]
    assert np.array_equal(of_unit, own)


@pytest.mark.parametrize("method", METHODS)
def test_engine_calls_of_any_size_give_the_same_bands(monkeypatch, method):
    # a table longer than an engine call is run in blocks of rows; the totals do not change
    params = _params(method=method)
    columns = np.column_stack([RAIN, 0.4 * RAIN, np.roll(RAIN, 3)])
    rains = {"uniform": RAIN, "areal": columns}
    whole = _analyse(params, rains, _scale(params))
    monkeypatch.setattr(sampling, "BATCH_ROWS", 3)
    blocks = _analyse(params, rains, _scale(params))
    for a, b in zip(whole.bands, blocks.bands, strict=True):
        _same(a, b, method)
    _same(whole.sensitivity, blocks.sensitivity, method)


def test_bands_do_not_depend_on_how_the_subcatchments_are_chunked():
    # the same units in one chunk and in two: the areal storm's table is gathered from every
    # chunk in key order, so every engine call, and every band, is the same (exactly, even for
    # Green-Ampt, whose last bits depend on the other rows of a call)
    params = _params()
    scale = _scale(params)
    columns = np.column_stack([RAIN, 0.4 * RAIN, RAIN])  # S1 and S3 on one gauge
    rains = (RAIN, columns)
    units = [run_storm(params, STORM, DT, sub_ids=SUBS, rain_scale=scale,
                       rain_per_step_m=rain).units for rain in rains]
    storms = ("uniform", "areal")

    def parts(groups):
        out = []
        for ids in groups:
            at = params["subcatchment_id"].isin(ids).to_numpy()
            chunk = ChunkInputs(np.array(ids, dtype=object), storms, rains, DT, RANGES,
                                rain_scale=scale[at])
            out.append(prepare_parts(params[at], chunk, [u[at] for u in units]))
        return out

    def bands(groups):
        where = {s: i for i, s in enumerate(SUBS)}
        cols = tuple(np.array([where[s] for s in ids]) for ids in groups)
        done = chunk_bands(parts(groups), SETTINGS, BandStorms(storms, rains, DT, 0.3, cols))
        return [pd.concat([d.bands[k] for d in done]).set_index("subcatchment_id").loc[SUBS]
                for k in range(2)]

    one, two = bands([list(SUBS)]), bands([["S3", "S1"], ["S2"]])
    for a, b in zip(one, two, strict=True):
        pd.testing.assert_frame_equal(a, b, check_exact=True)
