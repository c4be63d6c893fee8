"""Lumped parameters per subcatchment, storm and loss method, beside the runoff they give.

A drainage model that takes one parameter set per subcatchment runs it as one
pervious unit beside the impervious share (:mod:`gisrun.parameters.lumping`).
Averaging the parameters of a subcatchment's soils and covers does not give the
runoff of running them one by one (runoff is not linear in the parameters: the
wettest soils and covers run off first), so three sets are given, each with the
runoff it gives through the same engine and its difference from gisrun's
per-unit runoff:

``area_weighted``
    Every parameter averaged by area over the parts of its surface (the
    lumping a model input usually gets); the difference is the lumping error.
``equivalent``
    Per storm, the method's declared equivalent parameter (``Parameter.equivalent``:
    Green-Ampt conductivity, Horton final capacity, curve number, constant loss
    rate, phi-index) set so that the lumped runoff equals gisrun's, the others
    area-weighted. The curve number uses the closed-form inverse of the runoff
    equation (Hawkins 1993, :func:`gisrun.engine.curve_number.equivalent_for_runoff`);
    the rates a bracketed root search (:func:`gisrun.parameters.inverse.solve_for_depth`).
    Where no value of it gives enough runoff, the parameters it declares next
    (``Parameter.then_lower``) are lowered in turn
    (:mod:`gisrun.parameters.storm_equivalent`); where nothing reproduces the
    runoff, the value coming nearest is given and the note says why; the
    difference column holds the residual.
``fitted``
    One value of the equivalent parameter for all storms of the run, fitted by
    least squares on runoff depth (:func:`gisrun.parameters.inverse.fit_least_squares`),
    with each storm's residual, for models that take one value per subcatchment.

Rows with storm :data:`ALL_STORMS` (area-weighted and fitted sets) carry the set's
values once, with the root-mean-square of its per-storm differences.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..engine import ENGINES, Parameter
from .inverse import REPRODUCED, fit_least_squares
from .lumping import LumpedRunner, LumpedUnits, lump_units
from .storm_equivalent import LOWERED, equivalent_values, search_bounds

__all__ = ["BASES", "ALL_STORMS", "IMPERVIOUS_FRACTION", "NO_PERVIOUS_AREA", "LOWERED",
           "StormRunoff", "table_parameters", "lumped_parameters", "LUMPED_COLUMNS"]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.intp]

#: The parameter sets, in table order.
BASES = ("area_weighted", "equivalent", "fitted")
#: The storm of rows that hold a set for every storm of the run.
ALL_STORMS = "all storms"
#: The parameter row giving the impervious share of the modelled area.
IMPERVIOUS_FRACTION = "impervious_fraction"
NO_PERVIOUS_AREA = "no pervious area: nothing to solve for"
#: Columns of the lumped parameter table (SI), in order.
LUMPED_COLUMNS = ("subcatchment_id", "loss_method", "basis", "storm", "surface", "parameter",
                  "value", "runoff_depth_m", "lumped_runoff_depth_m", "lumped_difference_m",
                  "note")


@dataclass(frozen=True)
class StormRunoff:
    """One storm as the lumped parameters need it (SI).

    ``rain_per_step_m`` is ``(steps,)``, or ``(steps, subcatchments)`` for areal rain;
    ``runoff_depth_m`` is gisrun's per-unit runoff depth of each subcatchment; subcatchments
    in the order of the ``sub_ids`` given to :func:`lumped_parameters`.
    """

    name: str
    rain_per_step_m: FloatArray
    runoff_depth_m: FloatArray


def table_parameters(method: str) -> list[tuple[str, Parameter | None]]:
    """(surface, parameter) rows of a method's lumped set, in declaration order.

    The impervious share first (parameter None), then every declared frame column
    for the pervious unit, then those the impervious unit takes from a rule of
    its own (``Parameter.impervious`` names one; run options excepted).
    """
    declared = [p for p in ENGINES[method].PARAMETERS if p.in_frame]
    return ([("whole", None)] + [("pervious", p) for p in declared]
            + [("impervious", p) for p in declared
               if isinstance(p.impervious, str) and not p.allowed])


def lumped_parameters(params: pd.DataFrame, sub_ids: Any, storms: Sequence[StormRunoff],
                      dt_s: float, *, default_method: str,
                      rain_scale: FloatArray | None = None, solve: bool = True) -> pd.DataFrame:
    """The lumped parameter table (SI, long form) of a set of subcatchments.

    Parameters
    ----------
    params : DataFrame
        Unit parameters, one row per unit part (the run's, ``combine = "units"``).
    sub_ids : array_like
        Subcatchment ids in output order.
    storms : sequence of StormRunoff
        Every storm of the run with gisrun's runoff per subcatchment.
    dt_s : float
        The run's time step, s.
    default_method : str
        Method of parts without a ``loss_method`` column.
    rain_scale : ndarray, optional
        Factor on storm depth per subcatchment (order of ``sub_ids``).
    solve : bool
        Also find the equivalent and fitted sets (root searches); False gives
        the area-weighted set only.

    Returns
    -------
    DataFrame
        :data:`LUMPED_COLUMNS`; ``parameter`` is the SI column name (or
        ``impervious_fraction``) and ``value`` is in SI.
    """
    units = lump_units(params, sub_ids, default_method=default_method)
    scale = None if rain_scale is None else np.asarray(rain_scale, float)[units.rows]
    frames = []
    for method in (m for m in ENGINES if m in set(units.method)):
        which = np.flatnonzero(units.method == method)
        rains = [s.rain_per_step_m if np.ndim(s.rain_per_step_m) == 1
                 else s.rain_per_step_m[:, units.rows[which]] for s in storms]
        runner = LumpedRunner(units.take(which), method, rains, dt_s,
                              None if scale is None else scale[which])
        targets = np.stack([s.runoff_depth_m[units.rows[which]] for s in storms])
        frames += _method_sets(runner, targets, [s.name for s in storms], solve=solve)
    if not frames:
        return pd.DataFrame({c: [] for c in LUMPED_COLUMNS})
    return _ordered(pd.concat(frames, ignore_index=True), units, [s.name for s in storms])


def _method_sets(runner: LumpedRunner, targets: FloatArray, names: list[str], *, solve: bool
                 ) -> list[pd.DataFrame]:
    """The sets of one method's subcatchments, each as a long frame."""
    u, method = runner.units, runner.method
    solved = next((p for p in ENGINES[method].PARAMETERS if p.equivalent), None)
    n_storms, n = targets.shape
    base_notes = np.where(u.mixed, f"parts use several loss methods; lumped as {method}", "")
    none = np.full((n_storms, n), REPRODUCED, dtype=object)
    # each set: (basis, pervious values that differ from the area-weighted ones, notes)
    sets: list[tuple[str, dict[str, FloatArray], NDArray[np.object_]]] = [
        ("area_weighted", {}, none)]
    if solve and solved is not None:
        eq, notes = equivalent_values(runner, solved, targets)
        fit = _fitted(runner, solved, targets, eq[solved.column])
        sets += [("equivalent", eq, notes),
                 ("fitted", {solved.column: np.broadcast_to(fit, (n_storms, n))}, none)]
    lumped = _lumped_depth(runner, [values for _, values, _ in sets], n_storms)
    return [_long(runner, basis, names, values, depth, targets,
                  _joined(notes, base_notes, u.pervious_area_m2 > 0))
            for (basis, values, notes), depth in zip(sets, lumped, strict=True)]


def _joined(notes: NDArray[np.object_], base: NDArray[np.object_],
            has_pervious: NDArray[np.bool_]) -> NDArray[np.object_]:
    out = np.where(has_pervious[None, :], notes, NO_PERVIOUS_AREA).astype(object)
    both = (out != "") & (base[None, :] != "")
    return np.where(both, out + "; " + base[None, :], np.where(out == "", base[None, :], out))


def _lumped_depth(runner: LumpedRunner, sets: list[dict[str, FloatArray]], n_storms: int
                  ) -> FloatArray:
    """Subcatchment runoff (sets, storms, subs) of the lumped units, in one engine run.

    Each set maps pervious columns to their values (storms, subs); NaN keeps the
    area-weighted value.
    """
    n = len(runner.units.sub_ids)
    subs = np.tile(np.arange(n), len(sets) * n_storms)
    storms = np.tile(np.repeat(np.arange(n_storms), n), len(sets))
    frame = runner.units.pervious.iloc[subs].reset_index(drop=True)
    for column in dict.fromkeys(c for values in sets for c in values):
        merged = frame[column].to_numpy(dtype=np.float64).copy()
        for i, values in enumerate(sets):
            if column in values:
                block = slice(i * n_storms * n, (i + 1) * n_storms * n)
                given = np.asarray(values[column], dtype=np.float64).reshape(-1)
                merged[block] = np.where(np.isnan(given), merged[block], given)
        frame[column] = merged
    depth = runner.run(frame, subs, storms)
    return runner.whole_depth(depth, subs, storms).reshape(len(sets), n_storms, n)


def _fitted(runner: LumpedRunner, solved: Parameter, targets: FloatArray, eq: FloatArray
            ) -> FloatArray:
    """One value per subcatchment for all storms, least squares on the subcatchment runoff."""
    u = runner.units
    n_storms, n = targets.shape
    out = np.full(n, np.nan)
    subs = np.flatnonzero((u.pervious_area_m2 > 0) & np.isfinite(eq).any(axis=0))
    if not subs.size:
        return out
    search = search_bounds(runner, solved, subs)
    span = (np.nanmin(eq[:, subs], axis=0), np.nanmax(eq[:, subs], axis=0))

    def depths(values: FloatArray, which: IntArray) -> FloatArray:
        chosen = subs[which]
        each = np.tile(chosen, n_storms)
        storms = np.repeat(np.arange(n_storms), len(chosen))
        perv = runner.pervious_depth(solved.column, np.tile(values, n_storms), each, storms)
        return runner.whole_depth(perv, each, storms).reshape(n_storms, len(chosen))

    out[subs] = fit_least_squares(depths, targets[:, subs], span, search)
    return out


def _long(runner: LumpedRunner, basis: str, names: list[str], values: dict[str, FloatArray],
          lumped: FloatArray, targets: FloatArray, notes: NDArray[np.object_]) -> pd.DataFrame:
    """One set in long form: a row per subcatchment, storm and parameter."""
    u = runner.units
    n_storms, n = targets.shape
    labels = list(names)
    diff = lumped - targets
    blocks = {"runoff": targets, "lumped": lumped, "diff": diff, "note": notes}
    if basis != "equivalent":  # one set for every storm: its values once, the RMS difference
        labels.append(ALL_STORMS)
        values = {c: np.vstack([v, v[:1]]) for c, v in values.items()}
        blocks = {"runoff": np.vstack([targets, np.full((1, n), np.nan)]),
                  "lumped": np.vstack([lumped, np.full((1, n), np.nan)]),
                  "diff": np.vstack([diff, np.sqrt(np.mean(diff * diff, axis=0))[None, :]]),
                  "note": np.vstack([notes, _worst_note(notes)[None, :]])}
    k = len(labels)
    frames = []
    for surface, p in table_parameters(runner.method):
        frames.append(pd.DataFrame({
            "subcatchment_id": np.tile(u.sub_ids, k), "storm": np.repeat(labels, n),
            "surface": surface, "parameter": IMPERVIOUS_FRACTION if p is None else p.column,
            "value": _parameter_values(u, surface, p, values, (k, n)).reshape(-1),
            "runoff_depth_m": blocks["runoff"].reshape(-1),
            "lumped_runoff_depth_m": blocks["lumped"].reshape(-1),
            "lumped_difference_m": blocks["diff"].reshape(-1),
            "note": blocks["note"].reshape(-1)}))
    return pd.concat(frames, ignore_index=True).assign(loss_method=runner.method, basis=basis)


def _worst_note(notes: NDArray[np.object_]) -> NDArray[np.object_]:
    """Per subcatchment, the first non-empty note over its storms."""
    filled = notes != ""
    first = np.argmax(filled, axis=0)
    return np.where(filled.any(axis=0), notes[first, np.arange(notes.shape[1])], "")


def _parameter_values(u: LumpedUnits, surface: str, p: Parameter | None,
                      values: dict[str, FloatArray], shape: tuple[int, int]) -> FloatArray:
    """Values (storm rows, subs) of one parameter row of a set; NaN for a surface of no area."""
    if p is None:
        return np.broadcast_to(u.impervious_fraction, shape)
    area = u.pervious_area_m2 if surface == "pervious" else u.impervious_area_m2
    frame = u.pervious if surface == "pervious" else u.impervious
    out = np.broadcast_to(frame[p.column].to_numpy(float), shape)
    if surface == "pervious" and p.column in values:
        out = np.where(np.isnan(values[p.column]), out, values[p.column])
    return np.where(area[None, :] > 0, out, np.nan)


def _ordered(table: pd.DataFrame, units: LumpedUnits, names: list[str]) -> pd.DataFrame:
    """Rows by subcatchment (input order), basis, storm (run order, then all) and parameter."""
    position = pd.Series(units.rows, index=units.sub_ids)
    storms = [*names, ALL_STORMS]
    # each set's rows were made parameter by parameter, so their running count is the order
    in_set = table.groupby(["subcatchment_id", "basis", "storm"], sort=False).cumcount()
    order = np.lexsort((in_set.to_numpy(),
                        pd.Categorical(table["storm"], categories=storms).codes,
                        pd.Categorical(table["basis"], categories=BASES).codes,
                        position.reindex(table["subcatchment_id"].to_numpy()).to_numpy()))
    out = table.iloc[order].reset_index(drop=True)
    for column in ("loss_method", "basis", "storm", "surface", "parameter", "note"):
        out[column] = out[column].astype("category")
    return out[list(LUMPED_COLUMNS)]
