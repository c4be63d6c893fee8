"""The columns of a class attribute table: soil class and group, cover class and share.

Helpers of :func:`gisrun.parameters.class_keys.keyed_classes` (see there for the columns);
each returns one value per row and raises :class:`ParameterError` naming the row.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import ParameterError
from ..options import did_you_mean
from ..units import FACTORS_TO_SI
from .hsg_criteria import group_from_properties
from .overrides import ALIASES
from .soils import check_cover_labels, valid_soil_labels
from .tables import (
    DUAL_GROUPS,
    HYDROLOGIC_SOIL_GROUPS,
    NON_INFILTRATING_SOILS,
    TEXTURE_CLASSES,
    green_ampt_by_texture,
)

__all__ = ["PROPERTIES", "property_of", "property_names", "soil_classes", "cover_classes",
           "impervious_shares"]

_LENGTH_UNITS = ("m", "cm", "mm", "in", "ft")
_RATE_UNITS = ("m_per_s", "mm_per_h", "cm_per_h", "in_per_h", "um_per_s")
#: Property columns (stem -> units accepted) that only feed the group criteria.
PROPERTIES = {"ks_least_transmissive": _RATE_UNITS, "restrictive_layer_depth": _LENGTH_UNITS,
              "water_table_depth": _LENGTH_UNITS}


def property_of(col: str) -> tuple[str, float] | None:
    """(property, factor to SI) of an attribute column named ``<property>_<unit>``, or None."""
    for stem, units in PROPERTIES.items():
        unit = col.removeprefix(f"{stem}_")
        if col.startswith(f"{stem}_") and unit in units:
            return stem, FACTORS_TO_SI[unit]
    return None


def property_names() -> list[str]:
    """Every attribute column name a table may use for a soil property."""
    return [f"{stem}_{u}" for stem, units in PROPERTIES.items() for u in units]


def _cells(frame: pd.DataFrame, col: str) -> list[str | None]:
    if col not in frame.columns:
        return [None] * len(frame)
    return [None if pd.isna(v) or not str(v).strip() else str(v).strip() for v in frame[col]]


def soil_classes(frame: pd.DataFrame, properties: dict[str, tuple[str, float]], where: str,
                  names: list[str], classification: str
                  ) -> tuple[list[str], dict[str, list[object]], int]:
    """Label of each row, per-row group/texture columns, and how many groups were derived."""
    given = _checked(_cells(frame, "hydrologic_soil_group"), "hydrologic_soil_group",
                     (*HYDROLOGIC_SOIL_GROUPS, *DUAL_GROUPS, *NON_INFILTRATING_SOILS), where,
                     names, upper=True)
    texture = _checked(_cells(frame, "texture"), "texture",
                       (*TEXTURE_CLASSES, *NON_INFILTRATING_SOILS), where, names)
    derived = _derived_groups(frame, properties, where, names)
    group = [g if g is not None else d for g, d in zip(given, derived, strict=True)]
    n_derived = sum(1 for g, d in zip(given, derived, strict=True) if g is None and d is not None)
    if classification == "texture":
        labels = _required(texture, "texture", where, names)
        return labels, {"group": group, "texture": [None] * len(labels)}, n_derived
    by_texture = green_ampt_by_texture()["hydrologic_soil_group"].to_dict()
    labels = [g if g is not None else _texture_group(t, by_texture)
              for g, t in zip(group, texture, strict=True)]
    labels = [lab if lab in valid_soil_labels(classification) else None for lab in labels]
    missing = [i for i, lab in enumerate(labels) if lab is None]
    if missing:
        i = missing[0]
        raise ParameterError(f"{where}:{names[i]}", "gives no hydrologic_soil_group and nothing "
                             "to derive it from", "fill in the group, or ks_least_transmissive_"
                             "um_per_s with the depths, or a texture")
    tex = [t if t not in NON_INFILTRATING_SOILS else None for t in texture]
    return labels, {"group": [None] * len(labels), "texture": tex}, n_derived


def _texture_group(texture: str | None, by_texture: dict[str, str]) -> str | None:
    """The group of a texture (TR-55 1986, App. A); silt as silt loam, as the texture path."""
    if texture is None or texture in NON_INFILTRATING_SOILS:
        return texture
    return by_texture.get("silt loam" if texture == "silt" else texture)


def _checked(cells: list[str | None], col: str, valid: tuple[str, ...], where: str,
             names: list[str], *, upper: bool = False) -> list[str | None]:
    out = []
    for i, cell in enumerate(cells):
        value = cell
        if upper and cell is not None and cell not in valid:
            value = cell.upper() if cell.upper() in valid else cell.lower()
        if value is not None and value not in valid:
            near = did_you_mean(value, list(valid))
            hint = f"{near}; " if near.startswith("did") else ""
            raise ParameterError(f"{where}:{names[i]}:{col}", f"value {cell!r} is not known",
                                 f"{hint}use one of {', '.join(valid)}")
        out.append(value)
    return out


def _required(cells: list[str | None], col: str, where: str, names: list[str]) -> list[str]:
    for i, cell in enumerate(cells):
        if cell is None:
            raise ParameterError(f"{where}:{names[i]}:{col}", "is blank",
                                 f"give every key its {col}")
    return [str(c) for c in cells]


def _derived_groups(frame: pd.DataFrame, properties: dict[str, tuple[str, float]], where: str,
                    names: list[str]) -> list[str | None]:
    """The group from the profile where a Ksat is given (NEH 630 Ch. 7, Table 7-1)."""
    si = {"ks_least_transmissive": np.full(len(frame), np.nan),
          "restrictive_layer_depth": np.full(len(frame), np.nan),
          "water_table_depth": np.full(len(frame), np.nan)}
    ks_fallback = next((c for c in frame.columns if c in ALIASES
                        and ALIASES[c][0] == "ks_m_per_s"), None)
    sources = dict(properties)
    if not any(s == "ks_least_transmissive" for s, _ in properties.values()) and ks_fallback:
        sources[ks_fallback] = ("ks_least_transmissive", ALIASES[ks_fallback][1])
    for col, (stem, factor) in sources.items():
        cells = _cells(frame, col)
        values = pd.to_numeric(pd.Series(cells, dtype=object), errors="coerce").to_numpy(float)
        bad = np.array([c is not None for c in cells]) & ~(np.isfinite(values) & (values >= 0))
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise ParameterError(f"{where}:{names[i]}:{col}", f"value {cells[i]!r} is not a "
                                 "number of 0 or more", "enter a number or leave it blank")
        si[stem] = values * factor
    groups = group_from_properties(si["ks_least_transmissive"], si["restrictive_layer_depth"],
                                   si["water_table_depth"])
    profile = np.isfinite(si["ks_least_transmissive"]) | (si["restrictive_layer_depth"] < 0.5)
    return [g if ok else None for g, ok in zip(groups.tolist(), profile, strict=True)]


def impervious_shares(frame: pd.DataFrame, where: str, names: list[str]) -> list[float | None]:
    """Each key's impervious share (0-1) from ``impervious_percent`` or ``_fraction``."""
    given = [c for c in ("impervious_percent", "impervious_fraction") if c in frame.columns]
    if len(given) > 1:
        raise ParameterError(f"{where}:{given[1]}", "gives the same share as impervious_percent",
                             "keep one of the two columns")
    if not given:
        return [None] * len(frame)
    col, scale = given[0], (100.0 if given[0] == "impervious_percent" else 1.0)
    out: list[float | None] = []
    for i, cell in enumerate(_cells(frame, col)):
        value = pd.to_numeric(cell, errors="coerce") if cell is not None else None
        if value is not None and not (np.isfinite(value) and 0.0 <= value <= scale):
            raise ParameterError(f"{where}:{names[i]}:{col}", f"value {cell!r} is outside "
                                 f"0-{scale:g}", "give the share of the class that is "
                                 "impervious, or leave it blank for the cover table's")
        out.append(None if value is None else float(value) / scale)
    return out


def cover_classes(frame: pd.DataFrame, where: str, names: list[str]) -> list[str]:
    """The ``cover_class`` column of a cover attribute table (required, no blanks)."""
    labels = _required(_cells(frame, "cover_class"), "cover_class", where, names)
    for i, label in enumerate(labels):
        check_cover_labels([label], f"{where}:{names[i]}:cover_class")
    return labels
