"""Shipped parameter values of unit parts, from each parameter's declared ``default``.

Every parameter a loss method declares (:mod:`gisrun.engine.declare`) names the
rule of :data:`RULES` that gives its value on pervious parts (``default``) and
the value or rule on impervious parts (``impervious``). :func:`shipped_values`
applies them to every part; nothing here is per method.

Pervious rules
    ``texture_green_ampt``: Rawls, Brakensiek and Miller (1983) for the part's
    texture; ``moisture_deficit``: effective porosity x (1 - initial saturation);
    ``cover_depression_storage``: the cover table (common practice);
    ``group_horton`` / ``group_horton_recovery``: the Horton table by group;
    ``cover_curve_number``: TR-55 (1986) pervious curve number of the cover for
    the group; ``initial_loss``: depression storage + the group's initial soil
    loss (common practice); ``group_min_infiltration``: midpoint of the group's
    minimum infiltration range (TR-55 1986, App. A); ``run_abstraction_ratio``:
    the run's Ia/S.
``table:<name>``
    The shipped table ``data/<name>.csv`` (see :mod:`gisrun.parameters.tables`):
    its first column is the key (group, texture or cover class), and the value is
    the column named for the parameter in a published unit, converted to SI.
Impervious rules
    ``impervious_depression_storage`` (the run's, 1.5 mm by default, common
    practice), ``impervious_curve_number`` (98, TR-55 1986 Table 2-2a),
    ``run_abstraction_ratio``; a number is used as is (0 = no infiltration).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd

from ..engine import PARAMETERS
from ..errors import GisrunWarning, ParameterError
from .overrides import ALIASES, PARAMETER_COLUMNS, SOIL_PROPERTIES
from .soils import SoilInfo
from .tables import (
    DEFAULT_INITIAL_ABSTRACTION_RATIO,
    HYDROLOGIC_SOIL_GROUPS,
    IMPERVIOUS_CURVE_NUMBER,
    UNSPECIFIED_COVER,
    UNSPECIFIED_COVER_STANDS_FOR,
    cover_table,
    green_ampt_by_texture,
    group_defaults,
    horton_by_group,
    hsg_conductivity,
    read_shipped_table,
)

__all__ = ["RULES", "IMPERVIOUS_RULES", "rule", "ASSIGNED_COLUMNS", "RunSettings", "shipped_values",
           "covers_without_pervious_part", "bare_cover_warnings"]

#: Every column a part gets a value and a source for: parameters, soil properties, method.
ASSIGNED_COLUMNS: tuple[str, ...] = (*PARAMETER_COLUMNS, *SOIL_PROPERTIES, "loss_method")


@dataclass(frozen=True)
class RunSettings:
    """The run's settings that shipped values depend on."""

    saturation: float
    impervious_depression_storage_m: float
    initial_abstraction_ratio: float


def covers_without_pervious_part(covers: pd.Series) -> np.ndarray:
    """Rows whose cover class the table gives no pervious part (``impervious``, paved streets).

    Such a cover can still have pervious area when an impervious grid measures less than
    100 %; that area is priced as :data:`UNSPECIFIED_COVER_STANDS_FOR`, the pervious part
    TR-55's urban composites assume (TR-55 1986, Table 2-2a footnote).
    """
    bare = cover_table()["pervious_depression_storage_m"].isna()
    return covers.map(bare).fillna(False).to_numpy(dtype=bool)


def bare_cover_warnings(rows: pd.DataFrame) -> list[GisrunWarning]:
    """A warning when pervious parts have a cover the table gives no pervious part."""
    bare = covers_without_pervious_part(rows["cover_class"]) & (
        rows["surface"] == "pervious").to_numpy()
    if not bare.any():
        return []
    return [GisrunWarning(
        f"cover class(es) {sorted(set(rows.loc[bare, 'cover_class']))} have no pervious part in "
        "the cover table, but the impervious shares leave them some: that part is priced as "
        f"{UNSPECIFIED_COVER_STANDS_FOR} (TR-55 1986 Table 2-2a footnote)")]


class _Parts:
    """Pervious parts with their soil and cover looked up once (vectorized over rows)."""

    def __init__(self, rows: pd.DataFrame, soils: dict[str, SoilInfo], run: RunSettings) -> None:
        self.info = [soils[s] for s in rows["soil_class"]]
        self.group = pd.Index([s.group for s in self.info])
        self.run = run
        self.unspecified = (rows["cover_class"] == UNSPECIFIED_COVER).to_numpy()
        self.bare = covers_without_pervious_part(rows["cover_class"])
        self.cover_key = np.where(self.unspecified | self.bare, UNSPECIFIED_COVER_STANDS_FOR,
                                  rows["cover_class"])

    @cached_property
    def green_ampt(self) -> pd.DataFrame:
        return green_ampt_by_texture().loc[[s.texture for s in self.info]]

    @cached_property
    def cover(self) -> pd.DataFrame:
        return cover_table().loc[self.cover_key]

    @cached_property
    def min_infiltration(self) -> tuple[np.ndarray, list[str]]:
        rate = hsg_conductivity().loc[self.group, "min_infiltration_mid_m_per_s"].to_numpy()
        return rate, [f"midpoint of group {g} minimum infiltration range (TR-55 1986 App. A)"
                      for g in self.group]


Value = tuple[object, object]


def _texture_green_ampt(parts: _Parts, column: str) -> Value:
    return parts.green_ampt[column].to_numpy(), [s.green_ampt_source for s in parts.info]


def _moisture_deficit(parts: _Parts, column: str) -> Value:
    saturation = parts.run.saturation
    return (parts.green_ampt["effective_porosity"].to_numpy() * (1.0 - saturation),
            f"effective porosity x (1 - initial_saturation {saturation:g})")


def _cover_depression_storage(parts: _Parts, column: str) -> Value:
    return (parts.cover["pervious_depression_storage_m"].to_numpy(),
            [f"cover table, {k} (common practice)" for k in parts.cover_key])


def _group_horton(parts: _Parts, column: str) -> Value:
    return (horton_by_group().loc[parts.group, column].to_numpy(),
            [f"horton_hsg table, group {s.group} ({s.group_source}; f0 and decay Akan 1993,"
             " fc TR-55 1986 App. A)" for s in parts.info])


def _group_horton_recovery(parts: _Parts, column: str) -> Value:
    return (horton_by_group().loc[parts.group, column].to_numpy(),
            [f"horton_hsg table, group {g} (common practice)" for g in parts.group])


def _cover_curve_number(parts: _Parts, column: str) -> Value:
    cover, groups = parts.cover, list(HYDROLOGIC_SOIL_GROUPS)
    by_group = cover[[f"pervious_cn_{g}" for g in groups]].to_numpy(float)
    cn = by_group[np.arange(len(parts.group)), [groups.index(g) for g in parts.group]]
    said = np.where(parts.unspecified, " (cover unspecified)", "")
    said = np.where(parts.bare, " (standing in for a cover the table gives no pervious part)",
                    said)
    return cn, [f"TR-55 (1986) Table {t}, pervious part of {k}{w}, group {s.group} "
                f"({s.group_source})"
                for t, k, w, s in zip(cover["tr55_table"], parts.cover_key, said, parts.info,
                                      strict=True)]


def _initial_loss(parts: _Parts, column: str) -> Value:
    soil_loss = group_defaults().loc[parts.group, "initial_soil_loss_m"].to_numpy()
    ds = parts.cover["pervious_depression_storage_m"].to_numpy()
    return ds + soil_loss, [
        f"depression storage + initial soil loss of group {g} (common practice)"
        for g in parts.group]


def _group_min_infiltration(parts: _Parts, column: str) -> Value:
    return parts.min_infiltration


def _run_abstraction_ratio(run: RunSettings) -> Value:
    ratio = run.initial_abstraction_ratio
    if ratio not in PARAMETERS["initial_abstraction_ratio"].allowed:
        raise ParameterError("[method] initial_abstraction_ratio", f"value {ratio!r}",
                             "use 0.2 (TR-55) or 0.05 (Woodward et al. 2003)")
    if ratio == DEFAULT_INITIAL_ABSTRACTION_RATIO:
        return ratio, "TR-55 (1986): Ia = 0.2 S"
    return ratio, (f"[method] initial_abstraction_ratio {ratio:g} (S converted after Hawkins "
                   "et al. 2002 / Woodward et al. 2003)")


def _from_table(parts: _Parts, column: str, name: str) -> Value:
    """The parameter's column of a shipped table keyed by group, texture or cover class."""
    table = read_shipped_table(name)
    key = str(table.frame.columns[0])
    keys = {"hydrologic_soil_group": list(parts.group), "cover_class": list(parts.cover_key),
            "texture": [s.texture for s in parts.info]}
    given = [c for c in table.frame.columns if ALIASES.get(str(c), ("",))[0] == column]
    if key not in keys or len(given) != 1:
        raise ParameterError(f"parameter table {name}", f"has no single {column} column keyed "
                             f"by one of {sorted(keys)}", "fix the shipped table")
    factor = ALIASES[str(given[0])][1]
    values = table.frame.set_index(key).loc[keys[key], given[0]].to_numpy(float) * factor
    return values, [f"{table.title} ({name}), {key} {k}" for k in keys[key]]


def rule(default: str) -> Callable[[_Parts, str], Value]:
    """The pervious rule a declared ``default`` names (a key of :data:`RULES` or ``table:``)."""
    if default.startswith("table:"):
        name = default.removeprefix("table:")
        return lambda parts, column: _from_table(parts, column, name)
    return RULES[default]


#: Rule name -> the values and sources it gives pervious parts.
RULES: dict[str, Callable[[_Parts, str], Value]] = {
    "texture_green_ampt": _texture_green_ampt,
    "moisture_deficit": _moisture_deficit,
    "cover_depression_storage": _cover_depression_storage,
    "group_horton": _group_horton,
    "group_horton_recovery": _group_horton_recovery,
    "cover_curve_number": _cover_curve_number,
    "initial_loss": _initial_loss,
    "group_min_infiltration": _group_min_infiltration,
    "run_abstraction_ratio": lambda parts, column: _run_abstraction_ratio(parts.run),
}

#: Rule name -> the value and source it gives impervious parts.
IMPERVIOUS_RULES: dict[str, Callable[[RunSettings], Value]] = {
    "impervious_depression_storage": lambda run: (
        run.impervious_depression_storage_m, "impervious depression storage (common practice)"),
    "impervious_storage_as_initial_loss": lambda run: (
        run.impervious_depression_storage_m, "impervious: depression storage only"),
    "impervious_curve_number": lambda run: (
        IMPERVIOUS_CURVE_NUMBER, "TR-55 (1986) Table 2-2a: impervious CN 98"),
    "run_abstraction_ratio": _run_abstraction_ratio,
}


def shipped_values(rows: pd.DataFrame, soils: dict[str, SoilInfo], run: RunSettings
                   ) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Values and sources of every assigned column for every part, from the declarations."""
    values = pd.DataFrame(np.nan, index=rows.index, columns=list(ASSIGNED_COLUMNS), dtype=object)
    sources = pd.DataFrame("", index=rows.index, columns=list(ASSIGNED_COLUMNS), dtype=object)
    perv = (rows["surface"] == "pervious").to_numpy()
    parts = _Parts(rows[perv], soils, run)
    for column in (*PARAMETER_COLUMNS, *SOIL_PROPERTIES):
        p = PARAMETERS[column]
        values.loc[perv, column], sources.loc[perv, column] = rule(p.default)(parts, column)
        if isinstance(p.impervious, str):
            value, source = IMPERVIOUS_RULES[p.impervious](run)
        elif math.isnan(p.impervious):
            continue  # a soil property: impervious parts have none
        else:
            value, source = p.impervious, "impervious: no infiltration"
        values.loc[~perv, column], sources.loc[~perv, column] = value, source
    return values, sources
