"""The sampler and the stated distributions: marginals checked against scipy.stats.

Every check draws a Latin hypercube column with a fixed seed and compares the values
with the distribution the module states, using scipy.stats (an independent reference)
and the Kolmogorov-Smirnov statistic. Tolerance: a Latin hypercube puts exactly one of
n samples in each stratum of width 1/n, so the empirical distribution of exactly
transformed values is within 1/n of the true one everywhere; the statistic must be at
most 1/n (plus float noise). A wrong distribution (another spread, no truncation, a
normal for a log-normal) is off by far more than 1/n at n = 400.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
from scipy.stats import qmc

from gisrun.uncertainty.sampler import draw_columns, draw_seed
from gisrun.uncertainty.spread import SPREADS, Z_10_90, values_from_uniform

N = 400
TOLERANCE = 1.0 / N + 1e-9


def _u(name: str = "x", n: int = N, seed: int = 20261203) -> np.ndarray:
    return draw_columns([name], n, seed)[name]


def _ks(values: np.ndarray, cdf) -> float:
    return float(stats.kstest(values, cdf).statistic)


def test_latin_hypercube_puts_one_sample_in_each_stratum():
    u = _u(n=50)
    assert sorted(np.floor(u * 50).astype(int).tolist()) == list(range(50))


def test_same_seed_same_draws_other_seed_other_draws():
    a = draw_columns(["ks|loam", "cn"], 64, seed=7)
    b = draw_columns(["cn", "ks|loam"], 64, seed=7)
    c = draw_columns(["ks|loam"], 64, seed=8)
    assert np.array_equal(a["ks|loam"], b["ks|loam"]) and np.array_equal(a["cn"], b["cn"])
    assert not np.array_equal(a["ks|loam"], c["ks|loam"])
    # a draw's column does not depend on which other draws exist (chunks agree)
    assert np.array_equal(draw_columns(["ks|loam"], 64, seed=7)["ks|loam"], a["ks|loam"])
    # draws are not copies of each other
    assert abs(np.corrcoef(a["ks|loam"], a["cn"])[0, 1]) < 0.3


def test_conductivity_is_log_normal_with_the_range_as_one_log_standard_deviation():
    # Rawls et al. (1983) report suction head as a geometric mean x/÷ one log SD; conductivity
    # is log-normal as the soils literature reports it (the module's stated choice).
    c, sigma = 0.34 / 36000, 1.5  # loam Ks 0.34 cm/h in m/s
    values = values_from_uniform(_u(), c, c * np.exp(-sigma), c * np.exp(sigma),
                                 SPREADS["ks_m_per_s"])
    assert _ks(values, stats.lognorm(s=sigma, scale=c).cdf) <= TOLERANCE
    assert _ks(values, stats.lognorm(s=2 * sigma, scale=c).cdf) > 10 * TOLERANCE
    assert _ks(values, stats.norm(c, c).cdf) > 10 * TOLERANCE


def test_suction_head_range_is_log_normal_about_its_geometric_mean():
    # loam 8.89 (1.33-59.38) cm, Rawls et al. (1983) / Chow et al. (1988) Table 4.3.1 (memory)
    low, high = 1.33, 59.38
    c = np.sqrt(low * high)
    values = values_from_uniform(_u("psi"), c, low, high, SPREADS["suction_head_m"])
    sigma = np.log(high / c)
    assert _ks(values, stats.lognorm(s=sigma, scale=c).cdf) <= TOLERANCE


def test_effective_porosity_is_a_normal_bounded_to_zero_one():
    # mean 0.95, SD 0.1: the bound at 1 cuts the upper half at z = 0.5 (scipy truncnorm)
    c, sd = 0.95, 0.1
    values = values_from_uniform(_u("por"), c, c - sd, c + sd, SPREADS["effective_porosity"])
    truncated = stats.truncnorm((0.0 - c) / sd, (1.0 - c) / sd, loc=c, scale=sd)
    assert _ks(values, truncated.cdf) <= TOLERANCE
    assert values.max() <= 1.0
    assert _ks(values, stats.norm(c, sd).cdf) > 10 * TOLERANCE  # an unbounded normal fails


def test_curve_number_range_is_its_10th_and_90th_percentile():
    c, low, high = 70.0, 60.0, 80.0
    sd = (high - c) / Z_10_90
    values = values_from_uniform(_u("cn"), c, low, high, SPREADS["curve_number"])
    truncated = stats.truncnorm((0.0 - c) / sd, (100.0 - c) / sd, loc=c, scale=sd)
    assert _ks(values, truncated.cdf) <= TOLERANCE
    assert Z_10_90 == pytest.approx(stats.norm.ppf(0.9), rel=1e-12)


def test_an_uneven_range_keeps_each_end_at_its_percentile_and_the_centre_as_median():
    # ARC I / III ranges are uneven (CN 50: 29.6 / 69.7 by Chow et al. 1988 eqs. 5.5.4-5.5.5);
    # far from the bounds 0 and 100 each end stays at its percentile and the centre the median
    spread = SPREADS["curve_number"]
    at = values_from_uniform(np.array([0.1, 0.5, 0.9]), 50.0, 42.0, 62.0, spread)
    assert at == pytest.approx([42.0, 50.0, 62.0], rel=1e-6)
    # near the bound the distribution is cut at 100: no value above it
    near = values_from_uniform(_u("cn90"), 80.0, 62.7, 90.2, spread)
    assert near.max() < 100.0 and near.min() > 0.0


def test_group_rates_are_uniform_over_the_class_interval():
    low, high = 0.15, 0.30  # group B, TR-55 (1986) App. A, in/h
    values = values_from_uniform(_u("b"), 0.225, low, high, SPREADS["constant_loss_m_per_s"])
    assert _ks(values, stats.uniform(loc=low, scale=high - low).cdf) <= TOLERANCE


@pytest.mark.parametrize("column", list(SPREADS))
def test_zero_width_gives_the_central_value_exactly(column):
    c = np.array([0.2, 3e-6, 75.0, 0.0])
    u = np.array([1e-15, 0.3, 0.999, 1.0])
    values = values_from_uniform(u, c, c, c, SPREADS[column])
    assert np.array_equal(values, c)


@pytest.mark.parametrize("n", [1, 2, 7, 400])
@pytest.mark.parametrize("name", ["ks_m_per_s|texture loam", "cn", "arc"])
def test_the_column_is_scipys_latin_hypercube_number_for_number(name, n):
    # scipy.stats.qmc.LatinHypercube (scipy >= 1.15, d = 1, scrambled; McKay, Beckman and
    # Conover 1979) is the reference the numpy column must equal to the bit, so a run's
    # uncertainty bands are those scipy's sampler gives for the same seed.
    got = draw_columns([name], n, seed=20261203)[name]
    rng = np.random.default_rng(draw_seed(20261203, name))
    want = qmc.LatinHypercube(d=1, rng=rng).random(n)[:, 0]
    assert got.dtype == want.dtype and np.array_equal(got, want)
