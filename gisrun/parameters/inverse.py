"""One parameter from a runoff depth: a bracketed root search and a least-squares fit.

Both work on many independent problems at once (one per subcatchment and storm):
the depth function is called with an array of trial values and the indices of the
problems they belong to, so one engine run serves every problem still open.

Root search
    :func:`solve_for_depth` finds the value whose runoff depth equals a target,
    for a depth that is monotonic in the value (more conductivity, less runoff).
    It uses :func:`scipy.optimize.elementwise.find_root`, Chandrupatla's (1997)
    bracketing method: inverse quadratic interpolation safeguarded by bisection,
    the vectorized relative of Brent's method, guaranteed to converge inside a
    valid bracket. Rates are searched on a logarithmic scale. Where the depth is
    flat at the target (no runoff for every value above a threshold, or only the
    impervious part's, to rounding, up to the upper bound), the
    threshold is found by sectioning (a kink there defeats interpolation) and the
    value given is the smallest found that gives the target exactly. A target
    outside what any value in the bounds gives is reported as such, with the
    bound that comes nearest. Every value found is checked against its target
    relative to the target (:data:`REPRODUCE_RTOL`): a search that stopped on
    its bracket width short of that is bisected on to the resolution of floats;
    a depth that still misses jumps past the target there (a step function of
    the value: Horton's capacity recovers only in steps without supply, so the
    step in which depression storage runs dry switches a whole step of recovery
    on or off), which is reported as such, with the value just short of it.
Least-squares fit
    :func:`fit_least_squares` finds one value per problem that minimizes the sum
    of squared depth differences over several storms: a grid over the range the
    per-storm values span (outside it every difference grows), then
    :func:`scipy.optimize.elementwise.find_minimum` (Chandrupatla's minimizer)
    inside the best grid point's bracket; where the best grid point is an end of
    the span, narrowing grids in the end interval instead (the minimum can lie
    just inside an end, and the minimizer needs a lower middle point).

References
----------
Chandrupatla, T. R. (1997). A new hybrid quadratic/bisection algorithm for
finding the zero of a nonlinear function without using derivatives. Advances in
Engineering Software 28(3), 145-149.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import elementwise

__all__ = ["REPRODUCED", "ABOVE_REACH", "BELOW_REACH", "JUMPS_PAST", "NO_RAIN", "SHORT",
           "REPRODUCE_RTOL", "Search", "solve_for_depth", "reproduces", "fit_least_squares"]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.intp]
#: ``depth(values, problems)``: runoff depth (m) of each problem at its trial value.
DepthFunction = Callable[[FloatArray, IntArray], FloatArray]
#: ``depths(values, problems)``: depth of each problem under every storm, (storms, problems).
StormsFunction = Callable[[FloatArray, IntArray], FloatArray]

#: Outcomes of a search, as written in the ``note`` of a lumped parameter set.
REPRODUCED = ""
ABOVE_REACH = "runoff above what any value gives: value at its bound"
BELOW_REACH = "runoff below what any value gives: value at its bound"
JUMPS_PAST = "runoff jumps past gisrun's at this value: the value just short of it"
NO_RAIN = "no rain: every value gives the same runoff"
#: Outcomes whose value gives less runoff than the target (more is only had from another
#: parameter).
SHORT = (ABOVE_REACH, JUMPS_PAST)

#: Depth (m) within which a bound is taken to give the target itself.
DEPTH_TOLERANCE_M = 1e-12
#: Share of the target depth within which a value found gives the target: far inside what
#: the depths are wanted to, on the smallest runoff as on the largest.
REPRODUCE_RTOL = 1e-6
#: ...down to this depth (m), some ten thousand times the rounding of a depth of rain.
_REPRODUCE_FLOOR_M = 1e-15
#: Most halvings of a bracket after the root search: from its width to float resolution.
_MOST_HALVINGS = 200
#: Sections per round and rounds of the threshold search: 16**5, about 1e6 times narrower.
_SECTIONS = 16
_SECTION_ROUNDS = 5
_TOLERANCES = {"xatol": 1e-10, "xrtol": 0.0, "fatol": 1e-12, "frtol": 0.0}
#: The fit's tolerance on the search scale (log10 of a rate: 2e-5 relative; curve number 1e-5).
_FIT_TOLERANCES = {"xatol": 1e-5, "xrtol": 0.0}
_GRID = 9
#: Rounds of grids narrowing on a minimum at an end of the fit's first grid (to about
#: 1/8 x 1/4^5 of the span).
_NARROWING_ROUNDS = 5


@dataclass(frozen=True)
class Search:
    """Bounds of the value searched, per problem, and whether to search on a log scale.

    ``low`` may be 0 on a log scale: the search then starts a factor
    ``1e-10`` below ``high``, and a target reached only below that is given 0.
    """

    low: FloatArray
    high: FloatArray
    log: bool

    def inner_low(self) -> FloatArray:
        """The lowest value searched on the search scale's own terms (positive on a log scale)."""
        if not self.log:
            return self.low
        return np.maximum(self.low, self.high * 1e-10)

    def to_scale(self, values: FloatArray) -> FloatArray:
        """Values on the search scale."""
        return np.log10(values) if self.log else values

    def from_scale(self, x: FloatArray, problems: IntArray) -> FloatArray:
        """Values from the search scale, kept inside each problem's bounds."""
        values = 10.0 ** x if self.log else x
        return np.clip(values, self.low[problems], self.high[problems])


def reproduces(depth: FloatArray, target: FloatArray) -> NDArray[np.bool_]:
    """Whether each depth gives its target: within :data:`REPRODUCE_RTOL` of it (m)."""
    return np.abs(depth - target) <= _tolerance(target)


def _tolerance(target: FloatArray) -> FloatArray:
    return np.maximum(_REPRODUCE_FLOOR_M, REPRODUCE_RTOL * np.abs(target))


def solve_for_depth(depth: DepthFunction, target: FloatArray, search: Search
                    ) -> tuple[FloatArray, list[str]]:
    """The value giving each problem's target depth, and a note per problem.

    Parameters
    ----------
    depth : callable
        ``depth(values, problems)`` -> depth (m) per problem, monotonic in the value.
    target : ndarray, shape (n,)
        Depth to reproduce, m.
    search : Search
        Bounds per problem.

    Returns
    -------
    values : ndarray, shape (n,)
    notes : list of str
        :data:`REPRODUCED` (the value's depth :func:`reproduces` the target),
        :data:`ABOVE_REACH` / :data:`BELOW_REACH` with the value at the bound that
        comes nearest, or :data:`JUMPS_PAST` with the value whose depth falls just
        short of the target.
    """
    n = target.size
    every = np.arange(n)
    at_low, at_high = depth(search.low, every), depth(search.high, every)
    miss_low, miss_high = np.abs(at_low - target), np.abs(at_high - target)
    values = np.where(miss_low <= miss_high, search.low, search.high)
    top, bottom = np.maximum(at_low, at_high), np.minimum(at_low, at_high)
    notes = [REPRODUCED] * n
    for i in np.flatnonzero(target > top + DEPTH_TOLERANCE_M):
        notes[i] = ABOVE_REACH
    for i in np.flatnonzero(target < bottom - DEPTH_TOLERANCE_M):
        notes[i] = BELOW_REACH
    between = (target <= top + DEPTH_TOLERANCE_M) & (target >= bottom - DEPTH_TOLERANCE_M)
    # a bound within DEPTH_TOLERANCE_M gives the target, if within its share of a tiny one too
    low_is_near = (miss_low <= DEPTH_TOLERANCE_M) & reproduces(at_low, target)
    high_is_near = ((miss_high <= DEPTH_TOLERANCE_M) & (at_high != target)
                    & reproduces(at_high, target))
    near = np.flatnonzero(high_is_near & ~low_is_near)
    if near.size:  # the smallest value that gives the target, not the bound that happens to
        values[near] = _smallest_reproducing(depth, target, search, near)
    todo = np.flatnonzero(between & ~low_is_near & ~high_is_near)
    if todo.size:
        values[todo], jumped = _inside(depth, target, search, todo,
                                       (at_low[todo] - target[todo], at_high[todo] - target[todo]))
        for i in todo[jumped]:
            notes[i] = JUMPS_PAST
    return values, notes


def _inside(depth: DepthFunction, target: FloatArray, search: Search, problems: IntArray,
            g_ends: tuple[FloatArray, FloatArray]) -> tuple[FloatArray, NDArray[np.bool_]]:
    """Values of problems whose target lies between the depths at their bounds, and jumps.

    ``g_ends`` are the depths at the lower and upper bound minus the target; 0 at
    the upper bound means the depth is flat at the target up to it (no runoff for
    any larger rate), and the value sought is where the flat part begins
    (:func:`_threshold`). A target reached only below the inner low of a log
    scale is bisected for between the lower bound and the inner low.
    """
    g_low, g_hi = g_ends
    lo_s = search.to_scale(search.inner_low()[problems])
    hi_s = search.to_scale(search.high[problems])
    g_lo = depth(search.from_scale(lo_s, problems), problems) - target[problems]
    # g_lo == 0: the inner low gives the target; same signs: only values below it do
    out = np.where(g_lo == 0.0, search.from_scale(lo_s, problems), search.low[problems])
    jumped = np.zeros(problems.size, dtype=bool)
    flat = (g_hi == 0.0) & (g_lo != 0.0)
    root = (g_hi != 0.0) & (g_lo != 0.0) & (np.sign(g_lo) != np.sign(g_hi))
    below = ~flat & ~root & (g_lo != 0.0) & ~reproduces(g_low + target[problems],
                                                        target[problems])
    if root.any():
        def g(x: FloatArray, which: IntArray) -> FloatArray:
            return depth(search.from_scale(x, which), which) - target[which]

        res = elementwise.find_root(g, (lo_s[root], hi_s[root]), args=(problems[root],),
                                    tolerances=_TOLERANCES)
        x, jumped[root] = _closer(g, res, problems[root], target)
        out[root] = search.from_scale(x, problems[root])
    if flat.any():
        out[flat] = _threshold(depth, target, search, problems[flat], lo_s[flat], hi_s[flat])
    if below.any():
        ends = (search.low[problems[below]], search.inner_low()[problems[below]])
        out[below], jumped[below] = _bisect(
            lambda v, which: depth(v, which) - target[which], ends,
            (g_low[below], g_lo[below]), problems[below], target)
    return out, jumped


def _closer(g: DepthFunction, res: Any, problems: IntArray, target: FloatArray
            ) -> tuple[FloatArray, NDArray[np.bool_]]:
    """The roots found, bisected on where they stopped short of :func:`reproduces`."""
    x, jumped = np.array(res.x, dtype=np.float64), np.zeros(problems.size, dtype=bool)
    open_ = ~reproduces(res.f_x + target[problems], target[problems])
    if open_.any():  # stopped on the bracket width: halve on to float resolution
        ends = (res.bracket[0][open_], res.bracket[1][open_])
        misses = (res.f_bracket[0][open_], res.f_bracket[1][open_])
        x[open_], jumped[open_] = _bisect(g, ends, misses, problems[open_], target)
    return x, jumped


def _bisect(g: DepthFunction, ends: tuple[FloatArray, FloatArray],
            misses: tuple[FloatArray, FloatArray], problems: IntArray, target: FloatArray
            ) -> tuple[FloatArray, NDArray[np.bool_]]:
    """Halve brackets until a midpoint gives the target or no float lies between the ends.

    The misses ``g`` at the ends of each bracket have opposite signs. Where no float is
    left between them, the depth jumps past the target there, and the end whose depth
    falls short is given (second result True).
    """
    a, b = (np.array(e, dtype=np.float64) for e in ends)
    g_a, g_b = (np.array(m, dtype=np.float64) for m in misses)
    tol = _tolerance(target[problems])
    found = np.full(a.size, np.nan)
    live = np.arange(a.size)
    for _ in range(_MOST_HALVINGS):
        mid = a[live] + (b[live] - a[live]) / 2.0
        split = (mid > np.minimum(a[live], b[live])) & (mid < np.maximum(a[live], b[live]))
        live, mid = live[split], mid[split]
        if not live.size:
            break
        g_mid = g(mid, problems[live])
        hit = np.abs(g_mid) <= tol[live]
        found[live[hit]] = mid[hit]
        left = np.sign(g_mid) == np.sign(g_a[live])  # the root is between mid and b
        a[live], g_a[live] = np.where(left, mid, a[live]), np.where(left, g_mid, g_a[live])
        b[live], g_b[live] = np.where(left, b[live], mid), np.where(left, g_b[live], g_mid)
        live = live[~hit]
    jumped = np.isnan(found)
    return np.where(jumped, np.where(g_a < 0, a, b), found), jumped


def _smallest_reproducing(depth: DepthFunction, target: FloatArray, search: Search,
                          problems: IntArray) -> FloatArray:
    """The smallest value on the target's plateau, where the upper bound is on it.

    A depth that is flat at the target above some value (only the impervious part runs off
    once the soil takes all the rain) gives the target at every larger value, to rounding:
    the upper bound is one answer of many, and which one a search stops on would follow the
    last bits of the depths. The lowest is given instead: the threshold, found by sections.
    """
    lo_s = search.to_scale(search.inner_low()[problems])
    hi_s = search.to_scale(search.high[problems])
    at_inner = depth(search.from_scale(lo_s, problems), problems)
    out = search.from_scale(lo_s, problems)
    rest = ~_on_plateau(at_inner, target[problems])
    if rest.any():
        out[rest] = _threshold(depth, target, search, problems[rest], lo_s[rest], hi_s[rest],
                               flat_if=_on_plateau)
    return out


def _on_plateau(depth: FloatArray, target: FloatArray) -> NDArray[np.bool_]:
    """Within :data:`DEPTH_TOLERANCE_M` of the target and :func:`reproduces` it (as a bound)."""
    return (np.abs(depth - target) <= DEPTH_TOLERANCE_M) & reproduces(depth, target)


def _threshold(depth: DepthFunction, target: FloatArray, search: Search, problems: IntArray,
               a: FloatArray, b: FloatArray,
               flat_if: Callable[[FloatArray, FloatArray], NDArray[np.bool_]] = np.equal
               ) -> FloatArray:
    """Where the depth becomes flat at the target, between ``a`` (not flat) and ``b`` (flat).

    Each round evaluates :data:`_SECTIONS` - 1 points inside every bracket in one
    call and keeps the section where the flat part begins; the value returned is
    on the flat part (its depth is the target exactly, or as ``flat_if`` says), within the
    final section.
    A depth with a kink at the threshold defeats interpolating root searches,
    which is why sections are used here.
    """
    inner = np.arange(1, _SECTIONS) / _SECTIONS
    m = problems.size
    for _ in range(_SECTION_ROUNDS):
        xs = a[None, :] + (b - a)[None, :] * inner[:, None]  # (points, problems)
        which = np.tile(problems, inner.size)
        flat = flat_if(depth(search.from_scale(xs.reshape(-1), which), which),
                       target[which]).reshape(inner.size, m)
        first = np.where(flat.any(axis=0), np.argmax(flat, axis=0), inner.size)
        cols = np.arange(m)
        b = np.where(first < inner.size, xs[np.minimum(first, inner.size - 1), cols], b)
        a = np.where(first > 0, xs[np.maximum(first - 1, 0), cols], a)
    return search.from_scale(b, problems)


def fit_least_squares(depths: StormsFunction, targets: FloatArray, span: tuple[FloatArray,
                      FloatArray], search: Search) -> FloatArray:
    """One value per problem minimizing the sum of squared depth differences over storms.

    Parameters
    ----------
    depths : callable
        ``depths(values, problems)`` -> depth (m), shape (storms, len(problems)).
    targets : ndarray, shape (storms, n)
        Depths to come near, m (NaN for a storm to leave out).
    span : (ndarray, ndarray)
        Per problem, the smallest and largest per-storm value: the minimum lies
        between them when each depth is monotonic in the value.
    search : Search
        Bounds and scale.
    """
    n = targets.shape[1]
    every = np.arange(n)
    lo = search.to_scale(np.maximum(span[0], search.inner_low()))
    hi = search.to_scale(np.maximum(span[1], search.inner_low()))
    hi = np.maximum(hi, lo)

    def cost(x: FloatArray, which: IntArray) -> FloatArray:
        diff = depths(search.from_scale(x, which), which) - targets[:, which]
        return np.nansum(diff * diff, axis=0)

    grid = lo[None, :] + (hi - lo)[None, :] * np.linspace(0.0, 1.0, _GRID)[:, None]
    costs = cost(grid.reshape(-1), np.tile(every, _GRID)).reshape(_GRID, n)  # one engine run
    best = np.argmin(costs, axis=0)
    out = grid[best, every]
    inner = np.flatnonzero((best > 0) & (best < _GRID - 1) & (hi > lo))
    if inner.size:
        b = best[inner]
        init = (grid[b - 1, inner], grid[b, inner], grid[b + 1, inner])
        res = elementwise.find_minimum(cost, init, args=(inner,), tolerances=_FIT_TOLERANCES)
        better = res.f_x <= costs[b, inner]
        out[inner] = np.where(better, res.x, out[inner])
    end = np.flatnonzero(((best == 0) | (best == _GRID - 1)) & (hi > lo))
    if end.size:  # the minimum may lie in the end interval: narrow it down there too
        b, inside = best[end], np.where(best[end] == 0, 1, _GRID - 2)
        out[end] = _narrowed(cost, (grid[np.minimum(b, inside), end],
                                    grid[np.maximum(b, inside), end]),
                             end, out[end], costs[b, end])
    return search.from_scale(out, every)


def _narrowed(cost: DepthFunction, bracket: tuple[FloatArray, FloatArray], which: IntArray,
              best_x: FloatArray, best_f: FloatArray) -> FloatArray:
    """The lowest-cost point of :data:`_NARROWING_ROUNDS` grids, each around the last's best.

    For a minimum the first grid put at one end of the span: Chandrupatla's minimizer
    needs a middle point lower than both ends, which an end of the grid does not give.
    Each round keeps the two grid intervals beside its best point (a quarter of the
    last); the best point seen is returned, never worse than ``best_x``.
    """
    a, b = bracket
    cols = np.arange(which.size)
    steps = np.linspace(0.0, 1.0, _GRID)[:, None]
    for _ in range(_NARROWING_ROUNDS):
        xs = a[None, :] + (b - a)[None, :] * steps
        f = cost(xs.reshape(-1), np.tile(which, _GRID)).reshape(_GRID, which.size)
        k = np.argmin(f, axis=0)
        take = f[k, cols] < best_f
        best_x = np.where(take, xs[k, cols], best_x)
        best_f = np.where(take, f[k, cols], best_f)
        a, b = xs[np.maximum(k - 1, 0), cols], xs[np.minimum(k + 1, _GRID - 1), cols]
    return best_x
