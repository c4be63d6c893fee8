"""Area-weighted results per subcatchment from per-unit loss results.

A subcatchment's depth is the area-weighted mean of its units' depths, so its
volume is the sum of its units' volumes. The mass balance
``rain = infiltration + runoff + surface storage`` is checked per
subcatchment, to a relative tolerance of 1e-9.

Time to ponding describes pervious ground: an impervious surface has no
infiltration capacity to exceed, so its parts have none (NaN, whatever the loss
method: the engines give them 0 under Green-Ampt and Horton, and the time
runoff starts under the curve number). A subcatchment's time to ponding is the
earliest ponding instant among its pervious units; it is missing (NaN) where no
pervious unit ponds. The time runoff first leaves any part of the subcatchment
is reported separately (``runoff_start_s``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import scipy.sparse as sp
from numpy.typing import NDArray

from .aggregate_kernels import series_and_first_steps

__all__ = [
    "MASS_BALANCE_TOLERANCE",
    "StepTotals",
    "area_weights",
    "step_totals",
    "summarize_subcatchments",
    "summarize_units",
    "subcatchment_series",
    "soil_shares",
    "earliest_ponding",
    "MassBalanceError",
]

#: Relative tolerance of the per-subcatchment mass balance check.
MASS_BALANCE_TOLERANCE = 1e-9


class MassBalanceError(ArithmeticError):
    """Water was created or lost between rain and its fates (an internal fault).

    Not a :class:`~gisrun.errors.GisrunError`: no input can cause it, so the
    command line reports it as an internal error (exit 1), as the README says.
    """


def area_weights(
    unit_sub_ids: NDArray[np.object_] | pd.Series,
    unit_area_m2: NDArray[np.float64],
    sub_ids: NDArray[np.object_] | pd.Series,
) -> sp.csr_matrix:
    """Sparse matrix (subcatchments x units) of each unit's share of its subcatchment's area.

    Rows sum to one for subcatchments with modelled area and to zero otherwise.

    Examples
    --------
    >>> w = area_weights(np.array(["a", "a", "b"]), np.array([1.0, 3.0, 2.0]), np.array(["a", "b"]))
    >>> w.toarray()
    array([[0.25, 0.75, 0.  ],
           [0.  , 0.  , 1.  ]])
    """
    rows, share, _ = _unit_shares(unit_sub_ids, unit_area_m2, sub_ids)
    return _weights(rows, share, len(sub_ids))


def _weights(rows: NDArray[np.intp], share: NDArray[np.float64], n_subs: int) -> sp.csr_matrix:
    return sp.csr_matrix((share, (rows, np.arange(len(share)))), shape=(n_subs, len(share)))


def _unit_shares(unit_sub_ids: NDArray[np.object_] | pd.Series, unit_area_m2: NDArray[np.float64],
                 sub_ids: NDArray[np.object_] | pd.Series
                 ) -> tuple[NDArray[np.intp], NDArray[np.float64], NDArray[np.float64]]:
    """Each unit's subcatchment (position in ``sub_ids``), share of its area, and the areas."""
    index = pd.Index(np.asarray(sub_ids, dtype=object))
    rows = index.get_indexer(np.asarray(unit_sub_ids, dtype=object))
    if np.any(rows < 0):
        raise ValueError("unit rows name subcatchments that are not in the list")
    area = np.asarray(unit_area_m2, dtype=np.float64)
    totals = np.bincount(rows, weights=area, minlength=len(index))
    share = np.divide(area, totals[rows], out=np.zeros_like(area), where=totals[rows] > 0)
    return rows, share, totals


@dataclass(frozen=True)
class StepTotals:
    """What the tables need from a storm's step arrays, read once (:func:`step_totals`).

    ``unit_*_m``: each unit's total rain, infiltration and excess, m; ``unit_peak_excess_m``:
    its largest excess in a step (at least 0); ``unit_first_excess_step``: its first step with
    excess (-1: none); ``series``: (3, subcatchments, steps) area-weighted rain, infiltration
    and excess per step, m (``weights @ depth.T`` of :func:`area_weights`, to the last bit);
    ``weights``: that :func:`area_weights` matrix; ``modelled_area_m2``: each subcatchment's
    units' area (both made once here for the tables).
    """

    unit_rain_m: NDArray[np.float64]
    unit_infil_m: NDArray[np.float64]
    unit_excess_m: NDArray[np.float64]
    unit_peak_excess_m: NDArray[np.float64]
    unit_first_excess_step: NDArray[np.int64]
    series: NDArray[np.float64]
    weights: sp.csr_matrix
    modelled_area_m2: NDArray[np.float64]


def step_totals(loss: object, params: pd.DataFrame,
                sub_ids: NDArray[np.object_] | pd.Series) -> StepTotals:
    """Per-unit totals and per-subcatchment series of a storm (``loss``, steps x units).

    One compiled pass over the three step arrays (:mod:`gisrun.aggregate_kernels`) instead
    of a sparse product per array (each copying its array into unit-major order) and two
    passes for the start of runoff; the unit totals and peaks are numpy's, as before, made
    once for the unit and the subcatchment tables.
    """
    rows, share, area = _unit_shares(params["subcatchment_id"], params["area_m2"].to_numpy(),
                                     sub_ids)
    series, first = series_and_first_steps(loss.rain_m, loss.infil_m, loss.excess_m,
                                           rows.astype(np.int64), share, len(sub_ids))
    return StepTotals(unit_rain_m=loss.rain_m.sum(axis=0), unit_infil_m=loss.infil_m.sum(axis=0),
                      unit_excess_m=loss.excess_m.sum(axis=0),
                      unit_peak_excess_m=loss.excess_m.max(axis=0, initial=0.0),
                      unit_first_excess_step=first, series=series,
                      weights=_weights(rows, share, len(sub_ids)), modelled_area_m2=area)


def summarize_units(loss: object, params: pd.DataFrame, dt_s: float, *,
                    totals: StepTotals | None = None) -> pd.DataFrame:
    """Per-unit totals in SI: rain, infiltration, runoff, storage, ponding time, peak excess.

    Parameters
    ----------
    loss : LossResult
        From :func:`gisrun.engine.run_losses`; arrays are (steps x units).
    params : DataFrame
        The unit parameter frame the loss was computed for (same row order).
    dt_s : float
        The run's time step, seconds.
    totals : StepTotals, optional
        :func:`step_totals` of ``loss``, when already computed.

    Returns
    -------
    DataFrame
        ``params``' identifying columns plus ``rain_depth_m``, ``infiltration_depth_m``,
        ``runoff_depth_m``, ``storage_depth_m``, ``runoff_volume_m3``,
        ``runoff_coefficient``, ``time_to_ponding_s`` (NaN for impervious parts),
        ``peak_excess_intensity_m_per_s``; with run-on (:mod:`gisrun.runon`) also
        ``runon_depth_m`` (received) and ``routed_depth_m`` (sent onto pervious ground).
    """
    keep = [c for c in ("subcatchment_id", "soil_class", "cover_class", "surface", "area_m2",
                        "loss_method") if c in params.columns]
    out = params[keep].reset_index(drop=True).copy()
    rain, infil, excess = _unit_sums(loss, totals)
    out["rain_depth_m"] = rain
    out["infiltration_depth_m"] = infil
    out["runoff_depth_m"] = excess
    out["storage_depth_m"] = loss.storage_m
    out["runoff_volume_m3"] = out["runoff_depth_m"] * out["area_m2"]
    out["runoff_coefficient"] = _share(out["runoff_depth_m"].to_numpy(), rain)
    ponding = np.array(loss.time_to_ponding_s, dtype=np.float64)
    if "surface" in params.columns:  # pervious ground only (see the module docstring)
        ponding[(params["surface"] == "impervious").to_numpy()] = np.nan
    out["time_to_ponding_s"] = ponding
    peak = (loss.excess_m.max(axis=0, initial=0.0) if totals is None
            else totals.unit_peak_excess_m)
    out["peak_excess_intensity_m_per_s"] = peak / dt_s
    if getattr(loss, "runon_m", None) is not None:  # disconnected impervious area (runon.py)
        out["runon_depth_m"] = loss.runon_m.sum(axis=0)
        out["routed_depth_m"] = loss.routed_m.sum(axis=0)
    return out


def summarize_subcatchments(
    loss: object,
    params: pd.DataFrame,
    sub_ids: NDArray[np.object_] | pd.Series,
    dt_s: float,
    *,
    weights: sp.csr_matrix | None = None,
    excess_by_subcatchment: NDArray[np.float64] | None = None,
    totals: StepTotals | None = None,
) -> pd.DataFrame:
    """Area-weighted subcatchment results in SI, with a checked mass balance.

    Parameters
    ----------
    loss : LossResult
        Per-unit results (steps x units) in the row order of ``params``.
    params : DataFrame
        Unit parameters with ``subcatchment_id``, ``area_m2`` and ``surface``.
    sub_ids : array_like
        Subcatchment ids in output order.
    dt_s : float
        Time step, seconds.
    weights : sparse matrix, optional
        :func:`area_weights` of ``params`` and ``sub_ids``, when already computed.
    excess_by_subcatchment : ndarray, optional
        ``weights @ loss.excess_m.T`` (subcatchments x steps), when already
        computed (the excess column of :func:`subcatchment_series`).
    totals : StepTotals, optional
        :func:`step_totals` of ``loss`` for ``sub_ids``, when already computed (then
        ``excess_by_subcatchment`` is not needed).

    Returns
    -------
    DataFrame
        One row per subcatchment: ``subcatchment_id``, ``modelled_area_m2``,
        ``rain_depth_m``, ``infiltration_depth_m``, ``runoff_depth_m``,
        ``storage_depth_m``, ``runoff_volume_m3``, ``runoff_coefficient``,
        ``time_to_ponding_s``, ``runoff_start_s``, ``peak_excess_intensity_m_per_s``,
        ``impervious_fraction``, ``mass_balance_error_m``; with run-on
        (:mod:`gisrun.runon`) also ``runon_depth_m``: the runoff of disconnected
        impervious area run onto pervious ground, as a depth over the subcatchment.

    Raises
    ------
    MassBalanceError
        If rain differs from infiltration + runoff + storage by more than
        :data:`MASS_BALANCE_TOLERANCE` (relative) in any subcatchment.
    """
    sub_ids = np.asarray(sub_ids, dtype=object)
    if weights is None and totals is not None:
        weights = totals.weights
    if weights is None:
        weights = area_weights(params["subcatchment_id"], params["area_m2"].to_numpy(), sub_ids)
    area = totals.modelled_area_m2 if totals is not None else np.bincount(
        pd.Index(sub_ids).get_indexer(params["subcatchment_id"]),
        weights=params["area_m2"].to_numpy(), minlength=len(sub_ids),
    )
    rain, infil, excess = _unit_sums(loss, totals)
    depth = {
        "rain_depth_m": weights @ rain,
        "infiltration_depth_m": weights @ infil,
        "runoff_depth_m": weights @ excess,
        "storage_depth_m": weights @ loss.storage_m,
    }
    out = pd.DataFrame({"subcatchment_id": sub_ids, "modelled_area_m2": area, **depth})
    out["runoff_volume_m3"] = out["runoff_depth_m"] * area
    rain = out["rain_depth_m"].to_numpy()
    out["runoff_coefficient"] = _share(out["runoff_depth_m"].to_numpy(), rain)
    pervious = (params["surface"] != "impervious").to_numpy()
    out["time_to_ponding_s"] = _group_min(loss.time_to_ponding_s, weights, pervious)
    if totals is None:
        started = loss.excess_m > 0
        first_step = np.where(started.any(axis=0), started.argmax(axis=0) * dt_s, np.nan)
    else:
        first = totals.unit_first_excess_step
        first_step = np.where(first >= 0, first * dt_s, np.nan)
    out["runoff_start_s"] = _group_min(first_step, weights, np.ones_like(pervious))
    if totals is not None:
        excess_by_sub = totals.series[2]
    elif excess_by_subcatchment is None:
        excess_by_sub = np.asarray(weights @ loss.excess_m.T)  # (subcatchments x steps)
    elif excess_by_subcatchment.shape == (len(sub_ids), loss.excess_m.shape[0]):
        excess_by_sub = excess_by_subcatchment
    else:
        raise ValueError(f"excess_by_subcatchment has shape {excess_by_subcatchment.shape}, "
                         f"not (subcatchments, steps) = {(len(sub_ids), loss.excess_m.shape[0])}")
    out["peak_excess_intensity_m_per_s"] = excess_by_sub.max(axis=1, initial=0.0) / dt_s
    impervious_area = np.asarray(weights @ (~pervious).astype(float)).ravel()
    out["impervious_fraction"] = impervious_area
    if getattr(loss, "routed_m", None) is not None:  # water moved onto pervious ground
        out["runon_depth_m"] = weights @ loss.routed_m.sum(axis=0)
    out["mass_balance_error_m"] = rain - (
        out["infiltration_depth_m"] + out["runoff_depth_m"] + out["storage_depth_m"]
    ).to_numpy()
    _check_mass_balance(out)
    return out


def subcatchment_series(
    loss: object,
    params: pd.DataFrame,
    sub_ids: NDArray[np.object_] | pd.Series,
    dt_s: float,
    *,
    totals: StepTotals | None = None,
) -> pd.DataFrame:
    """Long-format series per subcatchment and step: rain, infiltration and excess depths.

    ``totals`` (:func:`step_totals` of ``loss`` for ``sub_ids``) holds the sums already;
    without it they are made here.

    Returns
    -------
    DataFrame
        ``subcatchment_id`` (a categorical of ``sub_ids``: a run's series has millions of
        rows and few ids), ``time_end_s`` (end of the step), ``rain_m``,
        ``infiltration_m``, ``excess_m`` (area-weighted depths in the step).
    """
    sub_ids = np.asarray(sub_ids, dtype=object)
    if totals is None:
        totals = step_totals(loss, params, sub_ids)
    n_steps = loss.rain_m.shape[0]
    frames = {name: totals.series[k].ravel()  # (subs x steps) flattened, sub-major
              for k, name in enumerate(("rain_m", "infiltration_m", "excess_m"))}
    codes = np.repeat(np.arange(len(sub_ids), dtype=np.int32), n_steps)
    return pd.DataFrame({
        "subcatchment_id": pd.Categorical.from_codes(codes, categories=pd.Index(sub_ids)),
        "time_end_s": np.tile(np.arange(1, n_steps + 1) * dt_s, len(sub_ids)),
        **frames,
    })


def _unit_sums(loss: object, totals: StepTotals | None
               ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Each unit's total rain, infiltration and excess over the storm."""
    if totals is not None:
        return totals.unit_rain_m, totals.unit_infil_m, totals.unit_excess_m
    return loss.rain_m.sum(axis=0), loss.infil_m.sum(axis=0), loss.excess_m.sum(axis=0)


def soil_shares(units: pd.DataFrame, sub_ids: NDArray[np.object_] | pd.Series) -> pd.DataFrame:
    """Area share of each soil class per subcatchment, one column per class.

    Column names are ``soil_<class>_fraction`` with characters other than
    letters and digits replaced by ``_`` (``B/D`` -> ``soil_B_D_fraction``).
    """
    table = units.pivot_table(index="subcatchment_id", columns="soil_class", values="area_m2",
                              aggfunc="sum", fill_value=0.0)
    table = table.reindex(pd.Index(np.asarray(sub_ids, dtype=object)), fill_value=0.0)
    totals = table.sum(axis=1).to_numpy()[:, None]
    shares = np.divide(table.to_numpy(), totals, out=np.zeros(table.shape), where=totals > 0)
    names = [f"soil_{_safe(c)}_fraction" for c in table.columns]
    return pd.DataFrame(shares, columns=names, index=table.index).reset_index(
        names="subcatchment_id")


def _share(part: NDArray[np.float64], whole: NDArray[np.float64]) -> NDArray[np.float64]:
    """``part / whole``, 0 where ``whole`` is 0 (no rain: no runoff coefficient to speak of)."""
    return np.divide(part, whole, out=np.zeros(len(part)), where=whole > 0)


def _safe(label: object) -> str:
    return "".join(ch if ch.isalnum() else "_" for ch in str(label)).strip("_")


def _group_min(values: NDArray[np.float64], weights: sp.csr_matrix,
               mask: NDArray[np.bool_]) -> NDArray[np.float64]:
    """Smallest non-NaN value of the masked units in each row of ``weights``; NaN if none."""
    coo = weights.tocoo()
    keep = mask[coo.col] & np.isfinite(values[coo.col]) & (coo.data > 0)
    out = np.full(weights.shape[0], np.inf)
    np.minimum.at(out, coo.row[keep], values[coo.col[keep]])
    out[np.isinf(out)] = np.nan
    return out


def earliest_ponding(unit_ponding_s: NDArray[np.float64], weights: sp.csr_matrix,
                     pervious: NDArray[np.bool_]) -> NDArray[np.float64]:
    """A subcatchment's time to ponding from its units' (as :func:`summarize_subcatchments`).

    The earliest ponding instant among the pervious units of each row of
    ``weights``; NaN where none ponds.
    """
    return _group_min(unit_ponding_s, weights, pervious)


def _check_mass_balance(out: pd.DataFrame) -> None:
    scale = np.maximum(out["rain_depth_m"].to_numpy(), 1e-12)
    rel = np.abs(out["mass_balance_error_m"].to_numpy()) / scale
    breach = ~(rel <= MASS_BALANCE_TOLERANCE)  # NaN compares false: a breach too
    if np.any(breach):
        worst = int(np.argmax(np.where(np.isnan(rel), np.inf, rel)))
        raise MassBalanceError(
            f"subcatchment {out['subcatchment_id'].iloc[worst]}: mass balance is off by "
            f"{rel[worst]:.2e} of the rain (an internal fault)")
