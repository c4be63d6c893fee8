"""Model inputs to hand on: per-subcatchment loss parameters and excess-rainfall series.

Compute only (frames in, frames out); :mod:`gisrun.write.extras` writes them
as CSV and as GeoPackage tables. Columns are our own plain names with units,
converted to the project's unit system at the end (``_mm``, ``_mm_per_h``,
``_m2`` for ``units = "si"``).

Weighting (per subcatchment, over its soil x cover x surface units)
-------------------------------------------------------------------
``green_ampt``
    Area-weighted means over the pervious units of conductivity, suction head,
    moisture deficit and depression storage; impervious share and the
    impervious depression storage stated separately (common practice: the
    impervious part is modelled as a separate, non-infiltrating surface).
``horton``
    Area-weighted pervious initial and final capacity, decay and recovery
    constants and depression storage, plus the impervious share.
``curve_number``
    Composite curve number: area-weighted over the whole subcatchment with the
    impervious parts at their own curve number (TR-55, 1986, ch. 2), and the
    initial abstraction ratio.
``constant_loss``, ``phi_index``
    Area-weighted pervious rates and initial loss, plus the impervious share.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..engine import ENGINES
from ..units import UnitSystem, present_frame

__all__ = ["METHOD_COLUMNS", "model_inputs", "model_inputs_si", "join_model_inputs",
           "excess_series_table"]

#: Output column (SI name) -> (unit parameter column, weighting) per loss method: each
#: method module's ``MODEL_INPUTS`` declaration.
METHOD_COLUMNS: dict[str, dict[str, tuple[str, str]]] = {
    name: dict(module.MODEL_INPUTS) for name, module in ENGINES.items()
}


def model_inputs(params: pd.DataFrame, sub_ids: Any, system: UnitSystem,
                 *, default_method: str) -> pd.DataFrame:
    """Per-subcatchment loss parameters for each subcatchment's loss method, in ``system`` units.

    :func:`model_inputs_si` followed by the conversion to ``system``.
    """
    return present_frame(model_inputs_si(params, sub_ids, default_method=default_method), system)


def model_inputs_si(params: pd.DataFrame, sub_ids: Any, *, default_method: str) -> pd.DataFrame:
    """Per-subcatchment loss parameters for each subcatchment's loss method (SI columns).

    Parameters
    ----------
    params : DataFrame
        Unit parameters (``subcatchment_id``, ``surface``, ``area_m2``,
        ``loss_method`` and the SI parameter columns), one row per unit part.
    sub_ids : array_like
        Subcatchment ids in output order.
    default_method : str
        Method of subcatchments without a ``loss_method`` column.

    Returns
    -------
    DataFrame
        ``subcatchment_id``, ``loss_method``, ``area_m2``, ``impervious_fraction``
        and the columns of every method present (empty where a subcatchment uses
        another method), SI. Tables of disjoint sets of subcatchments join with
        :func:`join_model_inputs`.
    """
    sub_ids = pd.Index(np.asarray(sub_ids, dtype=object))
    row = sub_ids.get_indexer(params["subcatchment_id"].to_numpy(dtype=object))
    n = len(sub_ids)
    area = params["area_m2"].to_numpy(dtype=np.float64)
    surface = params["surface"].to_numpy()
    impervious = surface == "impervious"
    total = np.bincount(row, weights=area, minlength=n)
    frame = pd.DataFrame({
        "subcatchment_id": sub_ids.to_numpy(),
        "loss_method": _first_method(params, row, n, default_method),
        "area_m2": total,
        "impervious_fraction": _ratio(np.bincount(row, weights=area * impervious, minlength=n),
                                      total),
    })
    if "impervious_fraction" in params.columns and (surface == "composite").all():
        frame["impervious_fraction"] = _first(params["impervious_fraction"].to_numpy(float),
                                              row, n)
    masks = {"pervious": ~impervious, "impervious": impervious,
             "all": np.ones_like(impervious)}
    for method, columns in METHOD_COLUMNS.items():
        uses = frame["loss_method"].to_numpy() == method
        if not uses.any():
            continue
        for out, (col, weighting) in columns.items():
            if out in frame.columns:  # shared name (e.g. depression storage): fill its rows
                target = frame[out].to_numpy(dtype=np.float64).copy()
            else:
                target = np.full(n, np.nan)
            w = area * masks[weighting]
            weight = np.bincount(row, weights=w, minlength=n)
            value = _ratio(np.bincount(row, weights=w * params[col].to_numpy(float),
                                       minlength=n), weight, empty=np.nan)
            target[uses] = value[uses]
            frame[out] = target
    return frame[_model_input_columns(frame.columns)]


def join_model_inputs(tables: list[pd.DataFrame]) -> pd.DataFrame:
    """Stack :func:`model_inputs_si` tables of disjoint subcatchment sets (e.g. chunks).

    The result equals one :func:`model_inputs_si` call over all of them: a
    method's columns appear when any table has them, empty for the other rows.
    """
    frame = pd.concat(tables, ignore_index=True)
    return frame[_model_input_columns(frame.columns)]


def _model_input_columns(present: Any) -> list[str]:
    ordered = ["subcatchment_id", "loss_method", "area_m2", "impervious_fraction"]
    for method in METHOD_COLUMNS:
        ordered += [c for c in METHOD_COLUMNS[method] if c in present and c not in ordered]
    return ordered


def _ratio(num: np.ndarray, den: np.ndarray, empty: float = 0.0) -> np.ndarray:
    return np.divide(num, den, out=np.full(len(num), empty), where=den > 0)


def _first(values: np.ndarray, row: np.ndarray, n: int, fill: Any = np.nan) -> np.ndarray:
    """Each subcatchment's value from its first unit row; ``fill`` where it has none."""
    out = np.full(n, fill, dtype=values.dtype if values.dtype == object else np.float64)
    groups, first = np.unique(row, return_index=True)
    keep = groups >= 0
    out[groups[keep]] = values[first[keep]]
    return out


def _first_method(params: pd.DataFrame, row: np.ndarray, n: int, default: str) -> np.ndarray:
    if "loss_method" not in params.columns:
        return np.full(n, default, dtype=object)
    return _first(params["loss_method"].to_numpy(dtype=object), row, n, fill=default)


def excess_series_table(storms: Any, system: UnitSystem) -> pd.DataFrame:
    """Long table of every storm's per-subcatchment step series, in ``system`` units.

    The same columns as the GeoPackage's ``excess_series`` table: ``storm``,
    ``subcatchment_id``, ``time_end_min``, ``rain_<depth>``, ``infiltration_<depth>``,
    ``excess_<depth>`` (depth in the step) and the same as ``_intensity_<rate>``.
    """
    frames = [present_frame(storm.series, system).assign(storm=storm.name) for storm in storms]
    frame = pd.concat(frames, ignore_index=True)
    return frame[["storm", *[c for c in frame.columns if c != "storm"]]]
