"""How numbers, units, methods and column names are shown to people (maps, plots, the report).

Plain formatting, no scientific notation: thousands separators, decimals that
suit the size of the number, units written the way engineers read them
(``mm/h``, ``m²``, ``1/h``) and our own plain column headers with the unit in
brackets (``runoff depth (mm)``).

Examples
--------
>>> human(4_509_123.4), human(32.46), human(0.2243), human(0.0), human(float("nan"))
('4,509,123', '32.5', '0.224', '0', '-')
>>> header("runoff_depth_mm")
'runoff depth (mm)'
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from ..units import UnitSystem, present_frame

__all__ = ["METHOD_NAMES", "method_name", "human", "human_range", "unit_label", "header",
           "display_frame", "present_units", "distance_label"]

#: How each loss method is named to people.
METHOD_NAMES = {"green_ampt": "Green-Ampt", "horton": "Horton", "curve_number": "curve number",
                "constant_loss": "initial and constant loss", "phi_index": "phi-index"}

#: Unit suffixes of column names and how they are written (longest first).
_UNIT_LABELS = (
    ("_mm_per_h", "mm/h"), ("_in_per_h", "in/h"), ("_m_per_s", "m/s"), ("_per_h", "1/h"),
    ("_per_s", "1/s"), ("_acre", "acre"), ("_m2", "m²"), ("_ft3", "ft³"), ("_m3", "m³"),
    ("_min", "min"), ("_mm", "mm"), ("_in", "in"), ("_ft", "ft"), ("_m", "m"), ("_s", "s"),
)

#: Column names whose plain wording is not just the name with spaces.
_WORDS = {"loss_method": "method", "subcatchment_id": "subcatchment", "unit_parts": "unit parts",
          "ponding_rank": "rank", "ponding_rank_in_method": "rank within method",
          "modelled_area": "modelled area", "nodata_fraction": "nodata share",
          "soil_class": "soil", "cover_class": "cover"}


def method_name(method: str) -> str:
    """The plain name of a loss method (``green_ampt`` -> ``Green-Ampt``)."""
    return METHOD_NAMES.get(str(method), str(method).replace("_", " "))


def _decimals(value: float) -> int:
    size = abs(value)
    if size >= 100:
        return 0
    if size >= 10:
        return 1
    if size >= 1:
        return 2
    return min(8, 2 - math.floor(math.log10(size)))


def human(value: object) -> str:
    """A number as people write it: thousands separators, sensible decimals, never ``1e+06``.

    Integers keep every digit; other numbers get three significant figures below 100
    and none after the point from 100 up; missing values are ``-``.
    """
    if value is None or value is pd.NA:
        return "-"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    if not isinstance(value, (float, np.floating)):
        return str(value)
    v = float(value)
    if not math.isfinite(v):
        return "-" if math.isnan(v) else ("no limit" if v > 0 else "-no limit")
    if v == 0:
        return "0"
    if float(v).is_integer() and abs(v) < 1e15:
        return f"{int(v):,}"
    text = f"{v:,.{_decimals(v)}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def human_range(low: float, high: float) -> str:
    """``low–high`` with both ends formatted by :func:`human` (one value when equal)."""
    a, b = human(float(low)), human(float(high))
    return a if a == b else f"{a}–{b}"


def unit_label(column: str) -> str | None:
    """The unit of a column name as written (``_mm_per_h`` -> ``mm/h``), or None."""
    for suffix, label in _UNIT_LABELS:
        if column.endswith(suffix):
            return label
    return None


def header(column: str) -> str:
    """A column name in plain words with its unit in brackets."""
    for suffix, label in _UNIT_LABELS:
        if column.endswith(suffix):
            stem = column[: -len(suffix)]
            return f"{_WORDS.get(stem, stem.replace('_', ' '))} ({label})"
    return _WORDS.get(column, column.replace("_", " "))


def display_frame(frame: pd.DataFrame, system: UnitSystem | None = None) -> pd.DataFrame:
    """Text cells and plain headers: SI columns converted to ``system`` first when given."""
    from_units = frame if system is None else present_units(frame, system)
    out = pd.DataFrame({header(str(c)): [human(v) for v in from_units[c].tolist()]
                        for c in from_units.columns})
    return out


def present_units(frame: pd.DataFrame, system: UnitSystem) -> pd.DataFrame:
    """SI columns in ``system`` (1/s constants shown per hour, as the tables publish them)."""
    out = present_frame(frame, system)
    per_s = [c for c in out.columns if isinstance(c, str) and c.endswith("_per_s")]
    for c in per_s:
        out[c] = out[c].astype(float) * 3600.0
    return out.rename(columns={c: c[: -len("_per_s")] + "_per_h" for c in per_s})


def distance_label(length: float, unit: str) -> str:
    """A scale-bar length: ``500 m``, ``2 km``, ``800 ft``, ``1.5 mi``."""
    if unit == "m":
        return f"{human(length / 1000)} km" if length >= 1000 else f"{human(length)} m"
    return f"{human(length / 5280)} mi" if length >= 5280 else f"{human(length)} ft"
