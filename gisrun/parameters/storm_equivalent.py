"""The equivalent set of each storm: the values that give a lumped subcatchment gisrun's runoff.

Per (subcatchment, storm), the method's declared equivalent parameter
(``Parameter.equivalent``) is set so that the lumped runoff equals gisrun's, the
others keeping their area-weighted values: the closed-form inverse of the method
where it has one (``equivalent_for_runoff``, the curve number), otherwise a
bracketed root search (:func:`gisrun.parameters.inverse.solve_for_depth`).

Lowering in turn
    Where no value of the solved parameter gives enough runoff (at its lowest it
    still gives too little, or the runoff jumps past the target at a value), it is
    held at that value (its lowest, or where its runoff falls just short) and the
    parameter it declares next (``Parameter.then_lower``) is searched below its
    area-weighted value, and so on down the chain: constant loss rate, initial
    loss, depression storage; Horton final capacity, initial capacity, depression
    storage; Green-Ampt conductivity and phi-index, depression storage. Lowering
    only ever adds runoff, so the search below the area-weighted value covers
    every value that can help. The note says :data:`LOWERED` where the chain
    reproduces the runoff, or why not (:data:`gisrun.parameters.inverse.SHORT`),
    with the last parameter searched at the value coming nearest from below.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine import ENGINES, PARAMETERS, Parameter
from .inverse import (
    ABOVE_REACH,
    BELOW_REACH,
    DEPTH_TOLERANCE_M,
    NO_RAIN,
    REPRODUCED,
    SHORT,
    Search,
    solve_for_depth,
)
from .lumping import LumpedRunner

__all__ = ["LOWERED", "equivalent_values", "search_bounds", "lowered_next"]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.intp]

#: Note of an equivalent set reproduced by lowering the parameters after the solved one.
LOWERED = ("no value of the solved parameter alone gives this runoff: "
           "the next parameters lowered in turn")
#: Rate columns searched up to this many times their area-weighted value, then further.
_HIGH_FACTOR = 1e3
_LARGEST_RATE_M_PER_S = 1.0


def lowered_next(method: str, solved: Parameter) -> list[Parameter]:
    """The parameters lowered in turn after ``solved`` (its ``then_lower`` chain)."""
    declared = {p.column: p for p in ENGINES[method].PARAMETERS}
    chain: list[Parameter] = []
    p = solved
    while p.then_lower is not None:
        p = declared[p.then_lower]
        chain.append(p)
    return chain


def search_bounds(runner: LumpedRunner, solved: Parameter, subs: IntArray) -> Search:
    """Bounds of the equivalent value of subcatchments ``subs``."""
    u = runner.units
    rate = solved.unit == "m/s"
    low = solved.low + (1e-6 if solved.low_open else 0.0)
    cap = min(solved.high, _LARGEST_RATE_M_PER_S) if rate else solved.high
    aw = u.pervious[solved.column].to_numpy(float)[subs]
    high = np.minimum(np.maximum(aw, 1e-6) * _HIGH_FACTOR, cap) if rate else np.full(
        len(subs), cap if np.isfinite(cap) else _HIGH_FACTOR * max(np.max(aw), 1.0))
    if solved.at_most is not None:
        high = np.minimum(high, u.pervious[solved.at_most].to_numpy(float)[subs])
    return Search(np.full(len(subs), low), np.maximum(high, low), log=rate)


def _pervious_targets(runner: LumpedRunner, targets: FloatArray) -> FloatArray:
    """The pervious unit's runoff (storms, subs) that makes the lumped runoff gisrun's."""
    u = runner.units
    perv = u.pervious_area_m2
    with np.errstate(divide="ignore", invalid="ignore"):
        return (u.area_m2 * targets - u.impervious_area_m2 * runner.impervious_depth) / perv


def equivalent_values(runner: LumpedRunner, solved: Parameter, targets: FloatArray
                      ) -> tuple[dict[str, FloatArray], NDArray[np.object_]]:
    """Per storm and subcatchment, the equivalent value(s) and a note.

    Parameters
    ----------
    runner : LumpedRunner
        The lumped units of one method's subcatchments and the storms.
    solved : Parameter
        The method's equivalent parameter.
    targets : ndarray, shape (storms, subs)
        gisrun's runoff depth, m.

    Returns
    -------
    values : dict
        Pervious column -> values (storms, subs), NaN where the area-weighted value stays.
    notes : ndarray of str, shape (storms, subs)
    """
    u = runner.units
    n_storms, n = targets.shape
    goal = _pervious_targets(runner, targets)
    values = {solved.column: np.full((n_storms, n), np.nan)}
    notes = np.full((n_storms, n), REPRODUCED, dtype=object)
    notes[runner.rain_total <= 0] = NO_RAIN
    storms, subs = np.nonzero((runner.rain_total > 0) & (u.pervious_area_m2 > 0)[None, :])
    if not subs.size:
        return values, notes
    inverse = getattr(ENGINES[runner.method], "equivalent_for_runoff", None)
    if inverse is not None:
        found, said = _closed_form(inverse, runner, goal[storms, subs], subs, storms)
    else:
        found, said = _searched(runner, solved, goal[storms, subs], subs, storms)
    values[solved.column][storms, subs] = found
    notes[storms, subs] = said
    held = {solved.column: found}
    short = np.flatnonzero([note in SHORT for note in said])
    for lowered in lowered_next(runner.method, solved):
        if not short.size:
            break
        s, k = subs[short], storms[short]
        found, said = _searched(runner, lowered, goal[k, s], s, k,
                                held={c: v[short] for c, v in held.items()})
        values[lowered.column] = np.full((n_storms, n), np.nan)
        values[lowered.column][k, s] = found
        held[lowered.column] = np.full(subs.size, np.nan)
        held[lowered.column][short] = found
        notes[k, s] = [LOWERED if note == REPRODUCED else note for note in said]
        short = short[[note in SHORT for note in said]]
    return values, notes


def _closed_form(inverse: Any, runner: LumpedRunner, goal: FloatArray, subs: IntArray,
                 storms: IntArray) -> tuple[FloatArray, list[str]]:
    rain = runner.rain_total[storms, subs]
    frame = runner.units.pervious.iloc[subs].reset_index(drop=True)
    notes = np.where(goal > rain + DEPTH_TOLERANCE_M, ABOVE_REACH,
                     np.where(goal < -DEPTH_TOLERANCE_M, BELOW_REACH, REPRODUCED))
    return inverse(frame, rain, goal), list(notes)


def _searched(runner: LumpedRunner, solved: Parameter, goal: FloatArray, subs: IntArray,
              storms: IntArray, held: Mapping[str, FloatArray] | None = None
              ) -> tuple[FloatArray, list[str]]:
    """Root search of ``solved`` for each (subcatchment, storm) problem.

    ``held`` (column -> values per problem) holds the parameters before it in the
    chain while ``solved`` is lowered: searched below its area-weighted value
    and above the held value of any parameter it bounds (``at_most``).
    """
    held = dict(held or {})
    search = search_bounds(runner, solved, subs)
    if held:
        aw = runner.units.pervious[solved.column].to_numpy(float)[subs]
        low = search.low
        for column, given in held.items():
            if PARAMETERS[column].at_most == solved.column:
                low = np.maximum(low, given)
        search = Search(low, np.maximum(aw, low), log=search.log)

    def depth(values: FloatArray, which: IntArray) -> FloatArray:
        return runner.pervious_depth(solved.column, values, subs[which], storms[which],
                                     held={c: v[which] for c, v in held.items()})

    return solve_for_depth(depth, goal, search)
