"""A storm on a run's step, held or made when asked (:class:`gisrun.storm.StepRain`).

References: the arrays it stands for (held as given; areal rain resampled column by column
as :meth:`gisrun.storm.ArealRain.resample` does, which ``tests/test_mix.py`` checks against
scipy and numpy); the column order is the positions given (common practice: a layer's order).
"""

from __future__ import annotations

import numpy as np
import pytest

from gisrun.errors import StormError
from gisrun.storm import ArealRain, StepRain


def test_held_rain_is_given_back_as_it_is():
    series = np.array([0.0, 1e-3, 2e-3])
    shared = StepRain.held(series)
    assert shared.ndim == 1 and shared.steps == 3
    assert np.array_equal(shared.whole(), series) and np.array_equal(shared.columns([1]), series)
    matrix = np.arange(12.0).reshape(3, 4) * 1e-4
    held = StepRain.held(matrix)
    assert held.ndim == 2 and np.array_equal(held.columns([3, 1]), matrix[:, [3, 1]])
    with pytest.raises(ValueError):
        held.whole()[0, 0] = 1.0  # frozen like the rest of a run's result


def test_areal_rain_is_made_in_the_order_of_the_positions_on_the_run_step():
    rng = np.random.default_rng(12)
    depth = rng.uniform(0.0, 2e-3, size=(6, 5))  # 6 steps of 10 min, 5 subcatchments
    areal = ArealRain(depth, 600.0, tuple("ABCDE"), "test")
    layer = np.array([4, 0, 2, 1, 3])  # the layer lists E, A, C, B, D
    rain = StepRain.of_areal(areal, layer, 300.0)
    assert rain.values_m is None and rain.ndim == 2 and rain.steps == 12
    whole = rain.whole()
    assert np.array_equal(whole, areal.resample(300.0, layer))
    # Halving the step splits each step's depth evenly (linear cumulative depth).
    np.testing.assert_allclose(whole[0::2] + whole[1::2], depth[:, layer], rtol=1e-12)
    assert np.array_equal(rain.columns(np.array([2, 0])), whole[:, [2, 0]])


def test_it_needs_exactly_one_source():
    areal = ArealRain(np.ones((2, 1)), 600.0, ("A",), "test")
    with pytest.raises(StormError, match="either the values or the areal rain"):
        StepRain(None)
    with pytest.raises(StormError, match="either the values or the areal rain"):
        StepRain(np.ones(2), areal, np.array([0]), 600.0)
