"""Model inputs to hand on: lumped parameters per subcatchment and excess-rainfall series.

Compute only (frames in, frames out); :mod:`gisrun.write.extras` writes them as
CSV and :mod:`gisrun.present.layers` as GeoPackage tables.

``lumped_parameters`` (long form, the canonical table)
    One row per subcatchment, loss method, basis (``area_weighted``,
    ``equivalent``, ``fitted``), storm (or ``all storms``), surface and
    parameter: ``value`` with its ``unit``, gisrun's ``runoff_depth``, the
    ``lumped_runoff_depth`` the set gives run lumped through the same engine,
    their ``lumped_difference`` (lumped minus gisrun; on ``all storms`` rows the
    root-mean-square of the storms' differences) and a ``note`` where no value
    reproduces the runoff. Built by :mod:`gisrun.parameters.equivalent`.
Wide form, one table per loss method (:func:`lumped_wide`)
    One row per subcatchment, basis and storm, one column per parameter row of
    the long table, named from gisrun's parameter registry with the output unit
    (``ks_mm_per_h``, ``horton_recovery_per_h``, ``impervious_depression_storage_mm``)
    in declaration order.

Units: depths and rates follow the project's unit system; decay and recovery
constants are given per hour; dimensionless values have unit ``-``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..engine import PARAMETERS
from ..units import UnitSystem, from_si, present_frame

__all__ = ["lumped_layer", "lumped_wide", "parameter_name", "output_unit", "wide_column",
           "excess_series_table"]

#: SI unit of a declared parameter -> (ending of its SI column name, unit-system attribute or
#: a fixed output unit); dimensionless values keep their name and get unit ``-``.
_ENDINGS = {"m/s": ("_m_per_s", "rate"), "m": ("_m", "depth"), "1/s": ("_per_s", "per_h"),
            "-": ("", None)}
_DIMENSIONLESS = "-"


def parameter_name(column: str) -> str:
    """A parameter's name without its unit (``ks_m_per_s`` -> ``ks``).

    Examples
    --------
    >>> parameter_name("horton_recovery_per_s"), parameter_name("curve_number")
    ('horton_recovery', 'curve_number')
    """
    if column not in PARAMETERS:
        return column
    ending = _ENDINGS[PARAMETERS[column].unit][0]
    return column[: -len(ending)] if ending else column


def output_unit(column: str, system: UnitSystem) -> str:
    """The unit a parameter column is written in (a key of the unit table, or ``-``).

    Examples
    --------
    >>> from gisrun.units import SI
    >>> output_unit("ks_m_per_s", SI), output_unit("horton_decay_per_s", SI)
    ('mm_per_h', 'per_h')
    """
    if column not in PARAMETERS:
        return _DIMENSIONLESS
    kind = _ENDINGS[PARAMETERS[column].unit][1]
    if kind is None:
        return _DIMENSIONLESS
    return getattr(system, kind) if kind in ("rate", "depth") else kind


def _label(unit: str) -> str:
    """``mm_per_h`` -> ``mm/h``, ``per_h`` -> ``1/h``, ``mm`` -> ``mm``."""
    if unit.startswith("per_"):
        return "1/" + unit[4:]
    return unit.replace("_per_", "/")


def wide_column(surface: str, parameter: str, unit: str) -> str:
    """The wide-table column of a long-table parameter row.

    Examples
    --------
    >>> wide_column("impervious", "depression_storage", "mm")
    'impervious_depression_storage_mm'
    >>> wide_column("pervious", "horton_decay", "1/h"), wide_column("whole", "curve_number", "-")
    ('horton_decay_per_h', 'curve_number')
    """
    prefix = "impervious_" if surface == "impervious" else ""
    if unit == _DIMENSIONLESS:
        return prefix + parameter
    suffix = "per_" + unit[2:] if unit.startswith("1/") else unit.replace("/", "_per_")
    return f"{prefix}{parameter}_{suffix}"


def lumped_layer(table: pd.DataFrame, system: UnitSystem) -> pd.DataFrame:
    """The lumped parameter table in the project's units (the GeoPackage layer).

    ``table`` is :attr:`gisrun.model.RunResult.lumped_parameters` (SI).
    """
    columns = table["parameter"].astype(str)
    units = pd.Series({c: output_unit(c, system) for c in columns.unique()}, dtype=object)
    out_unit = units.reindex(columns.to_numpy()).to_numpy()
    value = table["value"].to_numpy(dtype=np.float64).copy()
    for unit in set(out_unit) - {_DIMENSIONLESS}:
        rows = out_unit == unit
        value[rows] = from_si(value[rows], unit)
    frame = table.assign(parameter=[parameter_name(c) for c in columns], value=value,
                         unit=[_label(u) for u in out_unit])
    for column in ("loss_method", "basis", "storm", "surface", "note"):
        frame[column] = frame[column].astype(str)
    frame = present_frame(frame, system)
    order = ["subcatchment_id", "loss_method", "basis", "storm", "surface", "parameter",
             "value", "unit"]
    return frame[[*order, *[c for c in frame.columns if c not in order]]]


def lumped_wide(layer: pd.DataFrame, method: str) -> pd.DataFrame:
    """One method's rows of :func:`lumped_layer` as a wide table.

    One row per subcatchment, basis and storm (the long table's order); one column
    per parameter row, named by :func:`wide_column`, in the long table's order;
    then the runoff columns and the note.
    """
    rows = layer[layer["loss_method"] == method]
    keys = ["subcatchment_id", "basis", "storm"]
    names = [wide_column(s, p, u) for s, p, u in
             zip(rows["surface"], rows["parameter"], rows["unit"], strict=True)]
    rows = rows.assign(column=names)
    order = list(dict.fromkeys(names))
    sets = pd.MultiIndex.from_frame(rows[keys].drop_duplicates())
    wide = rows.set_index([*keys, "column"])["value"].unstack("column").reindex(sets)
    runoff = [c for c in rows.columns if c.startswith(("runoff_depth", "lumped_"))]
    rest = rows.drop_duplicates(keys).set_index(keys)[[*runoff, "note"]]
    out = wide.reindex(columns=order).join(rest).reset_index()
    out.columns.name = None
    return out


def excess_series_table(storms: Any, system: UnitSystem) -> pd.DataFrame:
    """Long table of every storm's per-subcatchment step series, in ``system`` units.

    The same columns as the GeoPackage's ``excess_series`` table: ``storm``,
    ``subcatchment_id``, ``time_end_min``, ``rain_<depth>``, ``infiltration_<depth>``,
    ``excess_<depth>`` (depth in the step) and the same as ``_intensity_<rate>``; ids
    as plain text, as the table holds them (a run keeps them as a categorical).
    """
    frames = [present_frame(storm.series, system).assign(storm=storm.name) for storm in storms]
    frame = pd.concat(frames, ignore_index=True)
    frame["subcatchment_id"] = frame["subcatchment_id"].astype(str)
    return frame[["storm", *[c for c in frame.columns if c != "storm"]]]
