"""Raster classes from an attribute table: map-unit keys -> class, and what each key sets.

A soil survey raster holds map-unit keys, often thousands; its attribute table
gives per key what the project file's code table would (the class) and more.
:func:`keyed_classes` checks such a table (already read into text cells by
:mod:`gisrun.io.attribute_tables`) and returns a :class:`KeyedClasses`: the
code table the overlay uses (key -> class label) and the values each class
sets.

Columns (a key column, named in the project file, and any of):

soil
    ``hydrologic_soil_group`` (A-D, A/D, B/D, C/D, water, rock), ``texture``
    (a USDA texture class), ``ks_least_transmissive_<rate unit>`` (Ksat of the
    least transmissive layer), ``restrictive_layer_depth_<length unit>`` (depth
    to a water-impermeable layer), ``water_table_depth_<length unit>``; a blank
    group is derived from the last three by the NEH 630 Ch. 7 criteria
    (:mod:`gisrun.parameters.hsg_criteria`), or from the texture (TR-55 App. A).
cover
    ``cover_class`` (a shipped cover class), ``impervious_percent`` (0-100) or
    ``impervious_fraction`` (0-1): the class's impervious share instead of the
    cover table's (an impervious-share grid still wins).
both
    any parameter column of the override table, unit in the name
    (``ks_mm_per_h``, ``suction_head_mm``, ``depression_storage_mm`` ...).

Other columns are listed as not used. Keys of one class whose values differ
become separate classes (soil only), labelled ``"<class> (key <first key>)"``;
keys whose values agree share a class, and a class whose keys set no values
keeps its plain label, so a table that only names classes gives exactly the
units of the same classes typed as codes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import ParameterError
from ..options import did_you_mean
from .hsg_criteria import CRITERIA_SOURCE
from .key_columns import (
    PROPERTIES,
    cover_classes,
    impervious_shares,
    property_names,
    property_of,
    soil_classes,
)
from .overrides import ALIASES, normalize_overrides

__all__ = ["KeyedClass", "KeyedClasses", "keyed_classes", "UNLISTED_KEYS", "SOIL_COLUMNS",
           "COVER_COLUMNS"]

#: ``unlisted_keys``: what a raster key missing from the table does.
UNLISTED_KEYS = ("error", "nodata")
#: Class columns of a soil table (the group and the texture).
SOIL_COLUMNS = ("hydrologic_soil_group", "texture")
#: Class columns of a cover table: the class, and its impervious share (one of the two units).
COVER_COLUMNS = ("cover_class", "impervious_percent", "impervious_fraction")
#: Stems of parameter columns, to tell a misspelt unit from an unrelated column.
_STEMS = tuple(sorted({name.rsplit("_", 1)[0].split("_per")[0] + "_" for name in ALIASES
                       if "_" in name} | {f"{s}_" for s in PROPERTIES}, key=len, reverse=True))


@dataclass(frozen=True)
class KeyedClass:
    """One class of a keyed raster: its label and what its keys set."""

    label: str
    base_class: str
    keys: int
    first_key: int
    group: str | None = None
    group_source: str = ""
    texture: str | None = None
    #: A cover class's impervious share from the table (None: the cover table's).
    impervious_fraction: float | None = None
    #: (SI parameter column, value) pairs the keys set.
    values: tuple[tuple[str, float], ...] = ()

    @property
    def source(self) -> str:
        """How parameter sources name this class's rows of the table."""
        more = f" (+{self.keys - 1} more with the same values)" if self.keys > 1 else ""
        return f"key {self.first_key}{more}"


@dataclass(frozen=True)
class KeyedClasses:
    """A keyed raster's classes (see the module docstring).

    Attributes
    ----------
    kind : str
        ``"soil"`` or ``"cover"``.
    where : str
        The table, as named in messages and parameter sources.
    codes : dict
        Raster key -> class label (what the overlay looks up).
    classes : tuple of KeyedClass
        One per label, in label order.
    used, unused : tuple of str
        The table's columns that were used, and those that were not.
    derived_groups : int
        Keys whose group came from the NEH 630 Ch. 7 criteria.
    """

    kind: str
    where: str
    codes: dict[int, str]
    classes: tuple[KeyedClass, ...]
    used: tuple[str, ...]
    unused: tuple[str, ...]
    derived_groups: int = 0

    def by_label(self) -> dict[str, KeyedClass]:
        """Each class by its label."""
        return {c.label: c for c in self.classes}

    def base_classes(self) -> dict[str, str]:
        """Label -> the class it is a variant of (itself for a plain label)."""
        return {c.label: c.base_class for c in self.classes}

    def values_frame(self) -> pd.DataFrame:
        """Per label, the SI parameter values its keys set (NaN: not set) and ``source``."""
        rows = [{"label": c.label, **dict(c.values), "source": f"{self.where}:{c.source}"}
                for c in self.classes]
        return pd.DataFrame(rows).set_index("label") if rows else pd.DataFrame()

    def summary(self) -> str:
        """One line for ``gisrun check`` and the report: what the table supplied."""
        derived = (f"; {self.derived_groups} key(s) got their group from the {CRITERIA_SOURCE}"
                   if self.derived_groups else "")
        unused = f"; columns not used: {', '.join(self.unused)}" if self.unused else ""
        return (f"{self.where}: {len(self.codes)} {self.kind} keys in {len(self.classes)} "
                f"class(es); columns used: {', '.join(self.used)}{derived}{unused}")


def keyed_classes(frame: pd.DataFrame, *, key: str, kind: str, where: str,
                  row_names: list[str], classification: str = "hydrologic_soil_group"
                  ) -> KeyedClasses:
    """Check an attribute table and build its :class:`KeyedClasses`.

    Parameters
    ----------
    frame : DataFrame
        The table as text cells (blank = not given).
    key : str
        The key column (raster values).
    kind : {"soil", "cover"}
    where : str
        The table's name for messages (file, and layer).
    row_names : list of str
        One name per row for messages (``"line 4"``).
    classification : str
        The project's soil classification (soil only).

    Raises
    ------
    ParameterError
        Missing key column, a key that is blank, not whole or repeated, a
        column with a unit that is not known, a bad value, a class that is
        unknown or cannot be derived, or (cover) keys of one class that set
        different values.
    """
    frame = frame.reset_index(drop=True)
    frame.columns = [str(c).strip() for c in frame.columns]
    keys = _keys(frame, key, where, row_names)
    classes_cols = SOIL_COLUMNS if kind == "soil" else COVER_COLUMNS
    parameters, properties, unused = _sort_columns(frame, key, classes_cols, where)
    values = _parameter_values(frame, parameters, where, row_names, keys)
    if kind == "soil":
        labels, extra, derived = soil_classes(frame, properties, where, row_names,
                                               classification)
    else:
        labels, derived = cover_classes(frame, where, row_names), 0
        extra = {"impervious_fraction": impervious_shares(frame, where, row_names)}
    used = tuple(c for c in frame.columns if c not in unused)
    table = pd.DataFrame({"key": keys, "label": labels}).join(values).join(
        pd.DataFrame(extra, index=frame.index))
    codes, classes = _group_keys(table, kind, where, row_names)
    return KeyedClasses(kind, where, codes, classes, used, tuple(unused), derived)


def _keys(frame: pd.DataFrame, key: str, where: str, names: list[str]) -> np.ndarray:
    if key not in frame.columns:
        near = did_you_mean(key, list(frame.columns))
        hint = f"{near}; " if near.startswith("did") else ""
        raise ParameterError(f"{where}", f"has no key column {key!r} (columns: "
                             f"{', '.join(list(frame.columns)[:8])})",
                             f"{hint}name the column of raster values with attributes_key")
    out = np.zeros(len(frame), dtype=np.int64)
    for i, value in enumerate(frame[key].astype(str).str.strip()):
        try:
            number = float(value)
        except ValueError:
            number = float("nan")
        if not np.isfinite(number) or number != round(number) or abs(number) >= 2**63:
            raise ParameterError(f"{where}:{names[i]}:{key}", f"key {value!r} is not a whole "
                                 "number", "give the raster value of each row as an integer")
        out[i] = int(number)
    dup = pd.Series(out).duplicated(keep="first").to_numpy()
    if dup.any():
        i = int(np.flatnonzero(dup)[0])
        first = int(np.flatnonzero(out == out[i])[0])
        raise ParameterError(f"{where}:{names[i]}:{key}", f"key {out[i]} is also on "
                             f"{names[first]}", "keep one row per key")
    return out


def _sort_columns(frame: pd.DataFrame, key: str, class_cols: tuple[str, ...], where: str
                  ) -> tuple[list[str], dict[str, tuple[str, float]], list[str]]:
    """Parameter columns, property columns (-> (stem, factor)) and columns not used."""
    parameters, properties, unused = [], {}, []
    for col in frame.columns:
        if col == key or col in class_cols:
            continue
        if col in ALIASES:
            parameters.append(col)
        elif property_of(col) is not None:
            properties[col] = property_of(col)
        elif col.startswith(_STEMS):
            stem = next(s for s in _STEMS if col.startswith(s))
            known = sorted(n for n in [*ALIASES, *property_names()] if n.startswith(stem))
            raise ParameterError(f"{where}:{col}", "has a unit gisrun does not know",
                                 f"name the unit as one of: {', '.join(known[:8])}")
        else:
            unused.append(col)
    return parameters, properties, unused


def _parameter_values(frame: pd.DataFrame, columns: list[str], where: str, names: list[str],
                      keys: np.ndarray) -> pd.DataFrame:
    """SI parameter values (checked like an override table), one row per key."""
    if not columns:
        return pd.DataFrame(index=frame.index)
    probe = frame[columns].assign(soil_class=[str(k) for k in keys])
    si = normalize_overrides(probe, where=where, row_names=names)
    return si[[ALIASES[c][0] for c in columns]]


def _group_keys(table: pd.DataFrame, kind: str, where: str, names: list[str]
                ) -> tuple[dict[int, str], tuple[KeyedClass, ...]]:
    """Keys with the same class and values share a label; see the module docstring."""
    value_cols = [c for c in table.columns if c not in ("key", "label")]
    sig = table[value_cols].astype(object).where(table[value_cols].notna(), None)
    table = table.assign(signature=[tuple(r) for r in sig.itertuples(index=False)])
    codes: dict[int, str] = {}
    classes: list[KeyedClass] = []
    for label, rows in table.groupby("label", sort=True):
        signatures = list(dict.fromkeys(rows["signature"]))
        if kind == "cover" and len(signatures) > 1:
            i = int(rows.index[rows["signature"] != signatures[0]][0])
            raise ParameterError(f"{where}:{names[i]}", f"sets other values for cover class "
                                 f"{label!r} than {names[int(rows.index[0])]}", "give every "
                                 "key of one cover class the same values, or override them")
        for sig_values in signatures:
            part = rows[rows["signature"] == sig_values]
            plain = len(signatures) == 1 or all(v is None for v in sig_values)
            name = str(label) if plain else f"{label} (key {int(part['key'].iloc[0])})"
            classes.append(_keyed_class(name, str(label), part, value_cols, sig_values, where))
            codes.update(dict.fromkeys(part["key"].astype(int).tolist(), name))
    return codes, tuple(sorted(classes, key=lambda c: c.label))


def _keyed_class(name: str, base: str, part: pd.DataFrame, value_cols: list[str],
                 values: tuple[object, ...], where: str) -> KeyedClass:
    given = dict(zip(value_cols, values, strict=True))
    group, texture = given.pop("group", None), given.pop("texture", None)
    share = given.pop("impervious_fraction", None)
    first = int(part["key"].iloc[0])
    source = f"{where}: key {first}" + (" and keys with the same values" if len(part) > 1 else "")
    return KeyedClass(
        label=name, base_class=base, keys=len(part), first_key=first,
        group=None if group is None else str(group), group_source=source,
        texture=None if texture is None else str(texture),
        impervious_fraction=None if share is None else float(share),
        values=tuple((c, float(v)) for c, v in given.items() if v is not None))
