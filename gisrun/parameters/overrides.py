"""User parameter overrides: column names with units, conversion to SI, checks.

An override table (a CSV read by :func:`gisrun.io.tables.read_parameter_overrides`,
or a DataFrame) has key columns and parameter columns. Keys say which units a
row applies to; a blank key matches everything:

``subcatchment_id``, ``soil_class``, ``cover_class``
    Match the unit table's labels exactly (soil labels as mapped in the project's
    soil code table, e.g. ``"B/D"``, not the group it resolves to).
``surface``
    ``pervious`` (the default when blank) or ``impervious``.

Parameter columns carry their unit in the name: the SI name of the unit
parameter contract (``ks_m_per_s``, ``suction_head_m``) or the same quantity in
a published unit (``ks_mm_per_h``, ``ks_cm_per_h``, ``ks_in_per_h``,
``suction_head_mm``, ``suction_head_cm``, ``suction_head_in``,
``depression_storage_mm``, ``horton_decay_per_h``, ``horton_recovery_per_h``
...). ``effective_porosity`` and ``total_porosity`` are accepted too: the moisture
deficit is then recomputed from the effective porosity. A blank cell leaves the
parameter alone. A ``note`` column is allowed and ignored.

Any parameter column may have a range beside it for the uncertainty runs:
``<column>_low`` and ``<column>_high`` (``ks_mm_per_h_low``, ``ks_mm_per_h_high``),
both given or both blank in a row, ``low <= high``, each within the parameter's
allowed range; they become ``<SI column>_low`` / ``_high`` and do not change the
value a run uses (:mod:`gisrun.uncertainty.ranges` reads them).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..engine import ENGINES, PARAMETERS, Parameter, method_name
from ..errors import ParameterError
from ..options import did_you_mean
from ..units import FACTORS_TO_SI

__all__ = [
    "KEY_COLUMNS",
    "LOSS_METHODS",
    "PARAMETER_COLUMNS",
    "SOIL_PROPERTIES",
    "ALIASES",
    "accepted_columns",
    "normalize_overrides",
    "check_loss_method",
]

#: Columns that say which units an override row applies to.
KEY_COLUMNS: tuple[str, ...] = ("subcatchment_id", "soil_class", "cover_class", "surface")
#: Loss methods a unit may use (the engine's registry).
LOSS_METHODS: tuple[str, ...] = tuple(ENGINES)
#: SI parameter columns of the unit parameter contract (DEVELOPERS.md), in order: the
#: declared parameters of every method that a table gives per unit.
PARAMETER_COLUMNS: tuple[str, ...] = tuple(
    c for c, p in PARAMETERS.items() if p.in_frame and p.overridable)
#: Declared soil properties that only feed another parameter (the porosities).
SOIL_PROPERTIES: tuple[str, ...] = tuple(
    c for c, p in PARAMETERS.items() if not p.in_frame and p.overridable)
#: The published units an override column may use, per SI unit, with their factor to SI.
_UNITALIASES: dict[str, tuple[str, dict[str, float]]] = {
    "m/s": ("_m_per_s", {u: FACTORS_TO_SI[u]
                         for u in ("m_per_s", "mm_per_h", "cm_per_h", "in_per_h", "um_per_s")}),
    "1/s": ("_per_s", {"per_s": 1.0, "per_min": 1 / 60.0, "per_h": 1 / 3600.0,
                       "per_day": 1 / 86400.0}),
    "m": ("_m", {u: FACTORS_TO_SI[u] for u in ("m", "mm", "cm", "in")}),
}
_IGNORED = ("note",)


def _aliases(parameter: Parameter) -> dict[str, tuple[str, float]]:
    """Override column names of one declared parameter -> (SI column, factor to SI)."""
    si = parameter.column
    if parameter.unit not in _UNITALIASES:
        return {si: (si, 1.0)}
    suffix, units = _UNITALIASES[parameter.unit]
    stem = si[: -len(suffix)]
    return {f"{stem}_{u.removeprefix('_')}": (si, f) for u, f in units.items()}


#: Every accepted parameter column name (SI or a published unit) -> (SI column, factor to SI).
ALIASES: dict[str, tuple[str, float]] = {
    name: target for c in (*PARAMETER_COLUMNS, *SOIL_PROPERTIES)
    for name, target in _aliases(PARAMETERS[c]).items()}


def accepted_columns() -> list[str]:
    """Every column name an override table may have (keys, parameters, ``note``)."""
    return [*KEY_COLUMNS, *sorted(ALIASES), "loss_method", *_IGNORED]


def check_loss_method(name: object, where: str) -> str:
    """Return a valid loss method name or raise :class:`ParameterError` (see ``method_name``).

    Examples
    --------
    >>> check_loss_method(" Horton ", "x")
    'horton'
    """
    return method_name(name, where=where)


def normalize_overrides(
    frame: pd.DataFrame, *, where: str = "overrides", row_names: list[str] | None = None
) -> pd.DataFrame:
    """Check an override table and convert its parameter columns to SI.

    Parameters
    ----------
    frame : DataFrame
        Key columns and parameter columns (see the module docstring).
    where : str
        Name used in error messages (the CSV path).
    row_names : list of str, optional
        One name per row for messages (``"line 4"``); default ``"row 1"``...

    Returns
    -------
    DataFrame
        Key columns (str or None), SI parameter columns (float, NaN = not set),
        ``loss_method`` if given, and ``override_source`` (``"<where>:<row>"``).
        Already normalized input passes through unchanged.

    Raises
    ------
    ParameterError
        Unknown or doubled column, a row with no key, a value that is not a
        number or out of its range, or two rows with the same keys.
    """
    if "override_source" in frame.columns:
        return frame
    names = row_names or [f"row {i + 1}" for i in range(len(frame))]
    frame = frame.reset_index(drop=True)
    frame.columns = [str(c).strip() for c in frame.columns]
    out = pd.DataFrame(index=frame.index)
    for key in KEY_COLUMNS:
        out[key] = _key_column(frame, key)
    given_as: dict[str, str] = {}
    for col in _parameter_columns(frame, where):
        alias = col if col in ALIASES else _range_name(col) or col
        si, factor = ALIASES[alias]
        si += col[len(alias):]  # "_low" / "_high" of a range column
        given_as[si] = col
        given = _numbers(frame[col], where, col, names)
        out[si] = given * factor
        _check_range(out[si], si, where, col, names, out["surface"], given)
    _check_range_pairs(out, where, names, given_as)
    if "loss_method" in frame.columns:
        out["loss_method"] = pd.Series([
            None if _blank(v) else check_loss_method(v, f"{where}:{names[i]}:loss_method")
            for i, v in enumerate(frame["loss_method"])
        ], index=out.index, dtype=object)
    out["override_source"] = [f"{where}:{n}" for n in names]
    _check_rows(out, where, names)
    return out


def _range_name(col: str) -> str | None:
    """The parameter alias of a range column (``ks_mm_per_h_low`` -> ``ks_mm_per_h``)."""
    for end in ("_low", "_high"):
        if col.endswith(end) and col.removesuffix(end) in ALIASES:
            return col.removesuffix(end)
    return None


def _check_range_pairs(out: pd.DataFrame, where: str, names: list[str],
                       given_as: dict[str, str]) -> None:
    """Both ends of a range given together, low <= high (named as the user wrote them)."""
    for col in [c for c in out.columns if c.endswith("_high")]:
        if f"{col.removesuffix('_high')}_low" not in out.columns:
            raise ParameterError(f"{where}:{given_as[col]}", "has no matching _low column",
                                 "give both ends of the range")
    for col in [c for c in out.columns if c.endswith("_low") and c in given_as]:
        stem = col.removesuffix("_low")
        low = out[col]
        high = out[f"{stem}_high"] if f"{stem}_high" in out.columns else low * np.nan
        bad = (low.isna() != high.isna()) | (low > high).fillna(False)
        if bad.any():
            i = int(np.flatnonzero(bad.to_numpy())[0])
            name = given_as[col]
            raise ParameterError(
                f"{where}:{names[i]}:{name}",
                f"and {name.removesuffix('_low')}_high are not a range (one blank, or low "
                "above high)", "give both ends, the low one first, or leave both blank")


def _blank(value: object) -> bool:
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return True
    return str(value).strip() == ""


def _key_column(frame: pd.DataFrame, key: str) -> pd.Series:
    if key not in frame.columns:
        return pd.Series([None] * len(frame), index=frame.index, dtype=object)
    values = [None if _blank(v) else str(v).strip() for v in frame[key]]
    if key == "surface":
        values = [None if v is None else v.lower() for v in values]
    return pd.Series(values, index=frame.index, dtype=object)


def _parameter_columns(frame: pd.DataFrame, where: str) -> list[str]:
    accepted = accepted_columns()
    seen: dict[str, str] = {}
    cols = []
    for col in frame.columns:
        if col in KEY_COLUMNS or col in _IGNORED or col == "loss_method":
            continue
        if col not in ALIASES and _range_name(col) is None:
            near = did_you_mean(col, accepted)
            hint = f"{near}; " if near.startswith("did") else ""
            raise ParameterError(
                f"{where}:{col}", "is not a parameter column",
                f"{hint}name a parameter with its unit, e.g. ks_mm_per_h, suction_head_mm",
            )
        alias = col if col in ALIASES else _range_name(col) or col
        si = ALIASES[alias][0] + col[len(alias):]
        if si in seen:
            raise ParameterError(
                f"{where}:{col}", f"gives the same parameter as column {seen[si]!r}",
                "keep one of the two columns",
            )
        seen[si] = col
        cols.append(col)
    return cols


def _numbers(series: pd.Series, where: str, col: str, names: list[str]) -> pd.Series:
    values = pd.to_numeric(series.map(lambda v: np.nan if _blank(v) else v), errors="coerce")
    bad = values.isna() & ~series.map(_blank)
    bad |= ~np.isfinite(values.fillna(0.0))
    if bad.any():
        i = int(np.flatnonzero(bad.to_numpy())[0])
        raise ParameterError(
            f"{where}:{names[i]}:{col}", f"value {series.iloc[i]!r} is not a finite number",
            "enter a number or leave the cell blank",
        )
    return values.astype(float)


def _check_range(
    values: pd.Series, si: str, where: str, col: str, names: list[str], surface: pd.Series,
    given: pd.Series,
) -> None:
    """Check values against the parameter's declared range."""
    p = PARAMETERS[si] if si in PARAMETERS else PARAMETERS[
        si.removesuffix("_low").removesuffix("_high")]
    v = values.to_numpy()
    if p.allowed:
        bad = ~np.isin(np.round(v, 12), p.allowed)
    else:
        bad = (v < p.low) | (v > p.high) | ((v == p.low) & p.low_open)
    if p.positive_when_pervious:
        bad |= (v <= 0) & (surface.to_numpy() != "impervious")
    bad &= ~np.isnan(v)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise ParameterError(
            f"{where}:{names[i]}:{col}",
            f"value {given.iloc[i]:g} is out of range ({si} must be {p.allowed_text()})",
            "correct the value or leave the cell blank",
        )


def _check_rows(out: pd.DataFrame, where: str, names: list[str]) -> None:
    for i, row in enumerate(out.to_dict("records")):
        if all(row[k] is None for k in ("subcatchment_id", "soil_class", "cover_class")):
            raise ParameterError(
                f"{where}:{names[i]}", "has no subcatchment_id, soil_class or cover_class",
                "fill in at least one key so the row applies to known units",
            )
        if row["surface"] not in (None, "pervious", "impervious"):
            raise ParameterError(
                f"{where}:{names[i]}:surface", f"value {row['surface']!r} is not a surface",
                "use 'pervious', 'impervious' or leave it blank (pervious)",
            )
    keys = out[list(KEY_COLUMNS)].fillna("\0").astype(str).agg("|".join, axis=1)
    dup = keys.duplicated(keep="first")
    if dup.any():
        i = int(np.flatnonzero(dup.to_numpy())[0])
        first = int(np.flatnonzero((keys == keys.iloc[i]).to_numpy())[0])
        raise ParameterError(
            f"{where}:{names[i]}", f"has the same keys as {names[first]}",
            "merge the two rows into one",
        )
