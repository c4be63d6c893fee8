"""Model inputs to hand on: per-subcatchment loss parameters and excess-rainfall series.

Compute only (frames in, frames out); :mod:`gisrun.deliverables` writes them
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

from .units import UnitSystem, present_frame

__all__ = ["METHOD_COLUMNS", "model_inputs", "excess_series_table"]

#: Output column (SI name) -> (unit parameter column, weighting) per loss method.
METHOD_COLUMNS: dict[str, dict[str, tuple[str, str]]] = {
    "green_ampt": {
        "pervious_ks_m_per_s": ("ks_m_per_s", "pervious"),
        "pervious_suction_head_m": ("suction_head_m", "pervious"),
        "pervious_moisture_deficit": ("moisture_deficit", "pervious"),
        "pervious_depression_storage_m": ("depression_storage_m", "pervious"),
        "impervious_depression_storage_m": ("depression_storage_m", "impervious"),
    },
    "horton": {
        "pervious_horton_initial_capacity_m_per_s": ("horton_f0_m_per_s", "pervious"),
        "pervious_horton_final_capacity_m_per_s": ("horton_fc_m_per_s", "pervious"),
        "pervious_horton_decay_per_s": ("horton_decay_per_s", "pervious"),
        "pervious_horton_recovery_per_s": ("horton_recovery_per_s", "pervious"),
        "pervious_depression_storage_m": ("depression_storage_m", "pervious"),
        "impervious_depression_storage_m": ("depression_storage_m", "impervious"),
    },
    "curve_number": {
        "composite_curve_number": ("curve_number", "all"),
        "initial_abstraction_ratio": ("initial_abstraction_ratio", "all"),
    },
    "constant_loss": {
        "pervious_initial_loss_m": ("initial_loss_m", "pervious"),
        "pervious_constant_loss_rate_m_per_s": ("constant_loss_m_per_s", "pervious"),
        "impervious_depression_storage_m": ("depression_storage_m", "impervious"),
    },
    "phi_index": {
        "pervious_phi_index_m_per_s": ("phi_index_m_per_s", "pervious"),
        "pervious_depression_storage_m": ("depression_storage_m", "pervious"),
        "impervious_depression_storage_m": ("depression_storage_m", "impervious"),
    },
}


def model_inputs(params: pd.DataFrame, sub_ids: Any, system: UnitSystem,
                 *, default_method: str) -> pd.DataFrame:
    """Per-subcatchment loss parameters for each subcatchment's loss method.

    Parameters
    ----------
    params : DataFrame
        Unit parameters (``subcatchment_id``, ``surface``, ``area_m2``,
        ``loss_method`` and the SI parameter columns), one row per unit part.
    sub_ids : array_like
        Subcatchment ids in output order.
    system : UnitSystem
        Output units.
    default_method : str
        Method of subcatchments without a ``loss_method`` column.

    Returns
    -------
    DataFrame
        ``subcatchment_id``, ``loss_method``, ``area_m2``, ``impervious_fraction``
        and the columns of every method present (empty where a subcatchment uses
        another method), in ``system`` units.
    """
    rows = [_one(params[params["subcatchment_id"] == sid], sid, default_method)
            for sid in sub_ids]
    frame = pd.DataFrame(rows)
    ordered = ["subcatchment_id", "loss_method", "area_m2", "impervious_fraction"]
    for method in METHOD_COLUMNS:
        ordered += [c for c in METHOD_COLUMNS[method] if c in frame.columns and c not in ordered]
    return present_frame(frame[ordered], system)


def _one(part: pd.DataFrame, sid: Any, default_method: str) -> dict[str, Any]:
    area = part["area_m2"].to_numpy(dtype=np.float64)
    surface = part["surface"].to_numpy()
    impervious = surface == "impervious"
    total = float(area.sum())
    methods = part["loss_method"].unique() if "loss_method" in part else [default_method]
    method = str(methods[0]) if len(methods) else default_method
    row: dict[str, Any] = {
        "subcatchment_id": sid, "loss_method": method, "area_m2": total,
        "impervious_fraction": float(area[impervious].sum() / total) if total > 0 else 0.0,
    }
    if "impervious_fraction" in part.columns and (surface == "composite").all():
        row["impervious_fraction"] = float(part["impervious_fraction"].iloc[0])
    for out, (col, weighting) in METHOD_COLUMNS.get(method, {}).items():
        keep = {"pervious": ~impervious, "impervious": impervious,
                "all": np.ones_like(impervious)}[weighting]
        w = area * keep
        row[out] = float(np.dot(w, part[col].to_numpy(float)) / w.sum()) if w.sum() > 0 else np.nan
    return row


def excess_series_table(storms: Any, system: UnitSystem) -> pd.DataFrame:
    """Long table of every storm's per-subcatchment step series, in ``system`` units.

    The same columns as the GeoPackage's ``excess_series`` table: ``storm``,
    ``subcatchment_id``, ``time_end_min``, ``rain_<depth>``, ``infiltration_<depth>``,
    ``excess_<depth>`` (depth in the step) and the same as ``_intensity_<rate>``.
    """
    from .layers import series_layer

    frames = [series_layer(storm.series, storm.name, system) for storm in storms]
    return pd.concat(frames, ignore_index=True)
