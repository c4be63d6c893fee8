"""Rain as weighted means of sources (:mod:`gisrun.storm.mix`), made a few columns at a time.

References: the plain computations each mix stands for (a matrix's own columns, a series times
a factor, :func:`gisrun.storm.areal.weighted_mean` through numpy and scipy), compared to the
bit where the mix promises it; and the rule that a mean of equal values is that value (common
practice for a weighted mean, exact here by construction: every ``x - min`` is 0).
"""

from __future__ import annotations

import pickle

import numpy as np
import pytest
from scipy import sparse

import gisrun.storm.areal as areal_module
import gisrun.storm.mix as mix_module
from gisrun.errors import StormError
from gisrun.storm import ArealRain, weighted_mean
from gisrun.storm.mix import SourceMix, gauge_mix, identity_mix, scaling_mix


def random_depth(rng: np.random.Generator, steps: int, n: int) -> np.ndarray:
    """Depths in m over several decades, a third of them 0 (dry)."""
    depth = 10.0 ** rng.uniform(-7, -1.5, size=(steps, n))
    depth[rng.uniform(size=depth.shape) < 1 / 3] = 0.0
    return depth


def random_mean_weights(rng: np.random.Generator, n: int, sources: int) -> sparse.csr_array:
    """Rows of 1 to 7 sources adding up to 1 (the kernel's own loops for 1-4 and the rest)."""
    dense = np.zeros((n, sources))
    for i in range(n):
        cols = rng.choice(sources, size=1 + i % 7, replace=False)
        dense[i, cols] = rng.uniform(0.01, 1.0, size=cols.size) ** 3
    return sparse.csr_array(dense / dense.sum(axis=1, keepdims=True))


def test_an_identity_mix_gives_the_matrix_back_to_the_bit():
    depth = random_depth(np.random.default_rng(1), 17, 40)
    mix = identity_mix(depth)
    assert np.array_equal(mix.columns(), depth)
    rows = np.array([39, 0, 7, 7])
    assert np.array_equal(mix.columns(rows), depth[:, rows])


def test_a_scaling_mix_gives_series_times_factor_to_the_bit():
    rng = np.random.default_rng(2)
    series, factor = random_depth(rng, 30, 1)[:, 0], rng.uniform(0.5, 1.0, size=25)
    assert np.array_equal(scaling_mix(series, factor).columns(), series[:, None] * factor)


def test_a_mean_mix_is_scipys_weighted_mean_to_the_bit_in_any_rows():
    rng = np.random.default_rng(3)
    values, weights = random_depth(rng, 19, 60), random_mean_weights(rng, 200, 60)
    expected = weighted_mean(values, weights)  # numpy minimum, scipy CSR product
    mix = SourceMix(np.ascontiguousarray(values.T), weights, values.min(axis=1))
    assert np.array_equal(mix.columns(), expected)
    rows = rng.permutation(200)[:33]
    assert np.array_equal(mix.columns(rows), expected[:, rows])
    assert np.array_equal(mix.subset(rows).columns(), expected[:, rows])


def test_a_subset_picks_rows_as_numpy_indexes_them():
    # Reference: numpy's own indexing of the whole matrix's columns (positions, negatives,
    # slices, boolean masks), and a subset of a subset is the subset of the composed rows.
    rng = np.random.default_rng(10)
    values, weights = random_depth(rng, 9, 30), random_mean_weights(rng, 50, 30)
    mix = SourceMix(np.ascontiguousarray(values.T), weights, values.min(axis=1))
    whole = mix.columns()
    mask = rng.uniform(size=50) < 0.4
    for rows in (np.array([49, -1, 0, -50, 7, 7]), slice(3, 40, 4), slice(None, None, -3), mask,
                 np.array([], dtype=np.intp)):
        assert np.array_equal(mix.columns(rows), whole[:, rows])
    part = mix.subset(np.array([40, 2, 17, 33, 9]))
    assert part.size == 5 and np.array_equal(part.columns(), whole[:, [40, 2, 17, 33, 9]])
    assert np.array_equal(part.subset(np.array([4, 0, -2])).columns(), whole[:, [9, 40, 33]])
    assert np.array_equal(part.columns(slice(1, 3)), whole[:, [2, 17]])
    assert np.array_equal(part.scaled(0.5).columns(), whole[:, [40, 2, 17, 33, 9]] * 0.5)


@pytest.mark.parametrize("rows", [np.array([50]), np.array([-51]), np.array([0, 3, 99]),
                                  np.ones(49, dtype=bool)])
def test_a_row_out_of_range_is_refused_before_the_kernel_reads_it(rows):
    # The kernel does not check its indices: an index past the weights would read memory
    # that is not theirs. numpy's rule (IndexError) is kept.
    rng = np.random.default_rng(11)
    values, weights = random_depth(rng, 5, 20), random_mean_weights(rng, 50, 20)
    mix = SourceMix(np.ascontiguousarray(values.T), weights, values.min(axis=1))
    with pytest.raises(IndexError):
        mix.columns(rows)
    with pytest.raises(IndexError):
        mix.subset(rows)
    with pytest.raises(StormError, match="names rows"):
        SourceMix(mix.values_m, weights, mix.low_m, rows=np.array([0, 50]))


def test_a_subset_pickles_only_the_sources_it_uses():
    rng = np.random.default_rng(4)
    values, weights = random_depth(rng, 12, 500), random_mean_weights(rng, 300, 500)
    mix = SourceMix(np.ascontiguousarray(values.T), weights, values.min(axis=1))
    rows = np.array([5, 6])
    sub = mix.subset(rows)
    assert sub.values_m is not None and np.shares_memory(sub.values_m, mix.values_m)
    back = pickle.loads(pickle.dumps(sub))
    assert back.rows is None and back.matrix.shape == (2, back.values_m.shape[0])
    assert back.values_m.shape[0] == np.unique(weights[rows].indices).size <= 14
    assert np.array_equal(back.columns(), mix.columns(rows))
    assert len(pickle.dumps(sub)) < len(pickle.dumps(mix)) / 20


def test_gauges_that_agree_give_their_common_record_exactly():
    rng = np.random.default_rng(5)
    record = random_depth(rng, 24, 1)
    weights = rng.uniform(0.1, 1.0, size=(50, 4))
    weights /= weights.sum(axis=1, keepdims=True)
    mix = gauge_mix(np.repeat(record, 4, axis=1), weights)
    assert np.all(mix.columns() == record)


def test_gauge_means_match_numpys_dense_product():
    rng = np.random.default_rng(6)
    records = random_depth(rng, 24, 5)
    weights = rng.uniform(0.0, 1.0, size=(80, 5))
    weights[weights < 0.3] = 0.0  # Thiessen weights are mostly 0
    weights[:, 0] += 1e-3
    weights /= weights.sum(axis=1, keepdims=True)
    # Summation order may differ from the dense BLAS product's in the last place only.
    np.testing.assert_allclose(gauge_mix(records, weights).columns(),
                               weighted_mean(records, weights), rtol=1e-14, atol=1e-18)


def test_mean_over_and_column_sums_do_not_depend_on_the_blocks(monkeypatch):
    rng = np.random.default_rng(7)
    values, weights = random_depth(rng, 15, 90), random_mean_weights(rng, 130, 90)
    mix = SourceMix(np.ascontiguousarray(values.T), weights, values.min(axis=1))
    share = rng.uniform(0.1, 1.0, size=130)
    share /= share.sum()
    whole = mix.columns()
    one_block = mix.mean_over(share)  # weighted_mean's own arithmetic on the whole matrix
    assert np.array_equal(one_block, weighted_mean(whole, share[None, :])[:, 0])
    sums = mix.column_sums()
    assert np.array_equal(sums, whole.sum(axis=0))
    monkeypatch.setattr(mix_module, "COLUMN_BLOCK", 16)
    np.testing.assert_allclose(mix.mean_over(share), one_block, rtol=1e-14)
    assert np.array_equal(mix.column_sums(), sums)  # each column summed alone
    same = identity_mix(np.repeat(values[:, :1], 130, axis=1))  # columns that agree: exact
    assert np.array_equal(same.mean_over(share), values[:, 0])


def test_scaling_a_mix_multiplies_in_order():
    rng = np.random.default_rng(8)
    depth = random_depth(rng, 10, 6)
    got = identity_mix(depth).scaled(0.7).scaled(1.3).columns()
    assert np.array_equal(got, depth * 0.7 * 1.3)


def test_a_mix_is_frozen_and_leaves_the_callers_array_alone():
    values = np.ones((3, 4))
    mix = SourceMix(values, sparse.csr_array(np.eye(3)), np.zeros(4))
    with pytest.raises(ValueError):
        mix.values_m[0, 0] = 2.0
    values[0, 0] = 5.0  # the caller's array is still writable
    assert values.flags.writeable


@pytest.mark.parametrize("weights, low, match", [
    (np.array([[1.0, -0.5, 0.5]]), np.zeros(2), "weight of -0.5"),
    (np.array([[1.0, np.nan, 0.0]]), np.zeros(2), "weight of nan"),
    (np.array([[1.0, 0.0, 0.0]]), np.array([0.0, np.inf]), "step minimum of inf"),
    (np.array([[1.0, 0.0]]), np.zeros(2), "sources of shape"),
])
def test_bad_weights_or_minima_are_refused(weights, low, match):
    with pytest.raises(StormError, match=match):
        SourceMix(np.zeros((3, 2)), sparse.csr_array(weights), low)


def test_areal_rain_resampled_by_blocks_and_by_subsets_is_the_same(monkeypatch):
    rng = np.random.default_rng(9)
    values, weights = random_depth(rng, 12, 40), random_mean_weights(rng, 70, 40)
    mix = SourceMix(np.ascontiguousarray(values.T), weights, values.min(axis=1))
    rain = ArealRain(mix, 600.0, tuple(f"S{i}" for i in range(70)), "test")
    whole = rain.resample(300.0)
    assert whole.shape == (24, 70) and rain.resample_steps(300.0) == 24
    monkeypatch.setattr(areal_module, "COLUMN_BLOCK", 9)
    assert np.array_equal(rain.resample(300.0), whole)
    rows = np.array([69, 3, 40])
    part = rain.subset(rows)
    assert part.subcatchment_ids == ("S69", "S3", "S40")
    assert np.array_equal(part.resample(300.0), whole[:, rows])
    np.testing.assert_allclose(rain.total_depth_m, whole.sum(axis=0), rtol=1e-13)
