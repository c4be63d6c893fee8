"""The root search of lumped parameters on depths that jump or are tiny.

The depth functions here are written out (a straight line in the value or in its
logarithm, with or without a step), so the value giving a target is known exactly.
"""

from __future__ import annotations

import numpy as np
import pytest

from gisrun.parameters.inverse import (
    JUMPS_PAST,
    REPRODUCED,
    Search,
    fit_least_squares,
    reproduces,
    solve_for_depth,
)


def stepped(values: np.ndarray, problems: np.ndarray) -> np.ndarray:
    """1 mm less per unit of value from 10 mm, and 2 mm less again from the value 5 on."""
    return (10.0 - values) * 1e-3 - np.where(values >= 5.0, 2e-3, 0.0)


def test_a_target_inside_a_jump_is_said_with_the_value_just_short_of_it():
    # the depth falls from 5 mm to 3 mm at 5: 4 mm is given by no value; 7 mm is (at 3)
    target = np.array([4e-3, 7e-3])
    values, notes = solve_for_depth(stepped, target, Search(np.zeros(2), np.full(2, 9.0),
                                                            log=False))
    assert notes == [JUMPS_PAST, REPRODUCED]
    assert values[0] == pytest.approx(5.0, abs=1e-12)  # at the jump, to float resolution
    assert stepped(values[:1], np.arange(1))[0] == pytest.approx(3e-3)  # the side short of it
    assert not reproduces(stepped(values[:1], np.arange(1)), target[:1]).any()
    assert values[1] == pytest.approx(3.0, rel=1e-9)


def test_a_tiny_target_is_found_relative_to_itself():
    """A steep depth on a log scale (1 m per decade of the rate below the root, 0.01 above:
    a kink at the root, which slows interpolation). Targets of 1e-10 to 1e-5 m are
    reproduced to REPRODUCE_RTOL of themselves; a search that stops on an absolute depth
    tolerance of 1e-12 m misses the 1e-10 m target by 0.7 %."""
    target = np.array([1e-10, 1e-8, 1e-7, 1e-5])
    root = 10.0 ** (-6.3 + np.arange(4) * 0.1)  # per problem, the value giving its target

    def depth(values: np.ndarray, problems: np.ndarray) -> np.ndarray:
        u = np.log10(root[problems]) - np.log10(values)  # > 0 below the root
        return target[problems] + np.where(u > 0, 1.0 * u, 0.01 * u)

    values, notes = solve_for_depth(depth, target, Search(np.full(4, 1e-8), np.full(4, 1e-3),
                                                          log=True))
    assert notes == [REPRODUCED] * 4
    got = depth(values, np.arange(4))
    assert reproduces(got, target).all()
    assert np.abs(got / target - 1).max() <= 1e-5  # the floor of 1e-15 m at 1e-10 m
    np.testing.assert_allclose(values, root, rtol=1e-9)


def test_a_target_reached_below_the_inner_low_of_a_log_scale_is_bisected_for():
    """The log scale starts 1e-10 of the upper bound above 0; a depth that changes only
    below that (a square root near 0, as Green-Ampt's does with conductivity) is solved on
    a linear scale between 0 and there."""
    def depth(values: np.ndarray, problems: np.ndarray) -> np.ndarray:
        return 1e-3 - np.sqrt(values)

    high = 1e-3
    target = np.array([1e-3 - np.sqrt(1e-15)])  # the value 1e-15, far below 1e-10 * high
    values, notes = solve_for_depth(depth, target, Search(np.zeros(1), np.full(1, high),
                                                          log=True))
    assert notes == [REPRODUCED]
    assert reproduces(depth(values, np.arange(1)), target).all()
    assert 0.0 < values[0] < 1e-10 * high


def test_a_plateau_that_reaches_the_upper_bound_gives_where_it_starts_not_the_bound():
    """Runoff that stops falling above a conductivity (the soil takes all the rain, only the
    impervious part runs off) gives the target at every larger value, to rounding. With the
    depth at the upper bound a rounding (1e-16 m) off the target, the search gave the upper
    bound itself; the value given must be where the plateau starts (exactly 2 here), whatever
    the last bits at the bound."""
    plateau = 0.08e-3  # m, the impervious part's runoff

    def depth(values, problems):
        out = plateau + np.maximum(2.0 - values, 0.0) * 1e-3
        noise = np.where(values > 50.0, 1e-16, 0.0)  # rounding at large values only
        return out + noise * np.where(problems % 2 == 0, 1.0, -1.0)

    target = np.full(2, plateau)
    values, notes = solve_for_depth(depth, target, Search(np.zeros(2), np.full(2, 100.0),
                                                          log=True))
    assert notes == [REPRODUCED, REPRODUCED]
    # on the plateau, within the sections' resolution: 10 decades searched / 16^5 sections
    assert (values >= 2.0).all()
    np.testing.assert_allclose(values, 2.0, rtol=5e-5)
    assert reproduces(depth(values, np.arange(2)), target).all()


def test_a_least_squares_minimum_in_the_last_grid_interval_is_found_not_the_end():
    """Two storms whose depths are straight lines in the value, reproduced at 1 and at 100:
    the sum of squares (v - 1)^2 + 25 (v - 100)^2 is least at v = (1 + 2500) / 26 = 96.19
    (set its derivative to 0), inside the last interval of a 9-point grid over [1, 100],
    whose end 100 beats every other grid point. The end was given before."""
    def depths(values, problems):
        return np.stack([(values - 1.0) * 1e-3, 5.0 * (values - 100.0) * 1e-3])

    targets = np.zeros((2, 1))
    value = fit_least_squares(depths, targets, (np.array([1.0]), np.array([100.0])),
                              Search(np.zeros(1), np.full(1, 1000.0), log=False))
    assert value[0] == pytest.approx(2501.0 / 26.0, rel=1e-3)
