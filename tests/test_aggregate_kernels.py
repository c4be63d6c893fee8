"""The compiled pass over a storm's step arrays against the numpy/scipy computation it replaced.

The reference is general-purpose libraries: scipy's sparse product ``weights @ depth.T`` for the
area-weighted series, numpy's ``argmax`` for the first step of runoff. The kernel must give
their results to the last bit (DEVELOPERS.md, "Compiled kernels (numba)").
"""

from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from gisrun.aggregate import (
    area_weights,
    step_totals,
    subcatchment_series,
    summarize_subcatchments,
    summarize_units,
)
from gisrun.aggregate_kernels import series_and_first_steps

DT = 300.0


def _case(seed: int, n_steps: int = 37, n_units: int = 211, n_subs: int = 23,
          shared_rain: bool = True):
    """Random units in shuffled subcatchment order, one subcatchment of zero area, one empty."""
    rng = np.random.default_rng(seed)
    sub_ids = np.array([f"S{i:03d}" for i in range(n_subs)], dtype=object)
    unit_subs = sub_ids[rng.integers(0, n_subs - 1, n_units)]  # the last one gets no unit
    area = rng.uniform(1.0, 5e4, n_units) * (unit_subs != sub_ids[3])  # S003: zero area
    params = pd.DataFrame({"subcatchment_id": unit_subs, "area_m2": area,
                           "surface": rng.choice(["pervious", "impervious"], n_units),
                           "soil_class": "B", "cover_class": "woods_good"})
    rain_steps = rng.uniform(0.0, 4e-3, n_steps)
    rain = (np.broadcast_to(rain_steps[:, None], (n_steps, n_units)) if shared_rain
            else rng.uniform(0.0, 4e-3, (n_steps, n_units)))
    share_lost = np.where(rng.random((n_steps, n_units)) < 0.6, 1.0,
                          rng.uniform(0.0, 1.0, (n_steps, n_units)))
    share_lost[:, 5] = 1.0  # a unit that never runs off
    infil = rain * share_lost
    excess = rain - infil  # mass balanced, no storage left
    loss = SimpleNamespace(rain_m=rain, infil_m=infil, excess_m=excess,
                           storage_m=np.zeros(n_units),
                           time_to_ponding_s=np.where(rng.random(n_units) < 0.5, np.nan,
                                                      rng.uniform(0, 1e4, n_units)))
    return params, loss, sub_ids


@pytest.mark.parametrize("seed, shared", [(1, True), (2, False), (3, True)])
def test_series_equal_scipy_sparse_product_to_the_last_bit(seed, shared):
    params, loss, sub_ids = _case(seed, shared_rain=shared)
    weights = area_weights(params["subcatchment_id"], params["area_m2"].to_numpy(), sub_ids)
    totals = step_totals(loss, params, sub_ids)
    for k, arr in enumerate((loss.rain_m, loss.infil_m, loss.excess_m)):
        expected = np.asarray(weights @ arr.T)  # scipy: (subcatchments x steps)
        assert totals.series[k].shape == expected.shape
        assert np.array_equal(totals.series[k].view(np.int64), expected.view(np.int64))


def test_first_steps_equal_numpy_argmax():
    params, loss, sub_ids = _case(4)
    rows = pd.Index(sub_ids).get_indexer(params["subcatchment_id"]).astype(np.int64)
    _, first = series_and_first_steps(loss.rain_m, loss.infil_m, loss.excess_m, rows,
                                      np.ones(len(rows)), len(sub_ids))
    started = loss.excess_m > 0
    expected = np.where(started.any(axis=0), started.argmax(axis=0), -1)
    assert first[5] == -1  # the unit that never runs off
    assert np.array_equal(first, expected)


def test_tables_with_totals_equal_tables_without():
    """Totals read once give the same unit and subcatchment tables as each table on its own."""
    params, loss, sub_ids = _case(5)
    weights = area_weights(params["subcatchment_id"], params["area_m2"].to_numpy(), sub_ids)
    totals = step_totals(loss, params, sub_ids)
    excess = np.asarray(weights @ loss.excess_m.T)
    pd.testing.assert_frame_equal(summarize_units(loss, params, DT, totals=totals),
                                  summarize_units(loss, params, DT), check_exact=True)
    plain = summarize_subcatchments(loss, params, sub_ids, DT, weights=weights,
                                    excess_by_subcatchment=excess)
    pd.testing.assert_frame_equal(
        summarize_subcatchments(loss, params, sub_ids, DT, weights=weights, totals=totals),
        plain, check_exact=True)
    # the totals' own weights and modelled areas (made once for a storm's tables) are the same
    assert (totals.weights != weights).nnz == 0
    pd.testing.assert_frame_equal(summarize_subcatchments(loss, params, sub_ids, DT,
                                                          totals=totals),
                                  plain, check_exact=True)
    assert np.isnan(plain.set_index("subcatchment_id").loc["S022", "runoff_start_s"])  # no units
    series = subcatchment_series(loss, params, sub_ids, DT, totals=totals)
    assert np.array_equal(series["excess_m"].to_numpy(), excess.ravel())
