"""Assign loss-method parameters to every soil x cover unit.

Each unit of the unit table is split into a pervious and an impervious part by
its cover's impervious fraction (TR-55 1986, Tables 2-2a-c), or by the unit's own
``impervious_fraction`` column when the unit table has one (measured on an
impervious-share grid, :mod:`gisrun.grid.impervious`; the cover class still sets
the pervious part's parameters); parts with zero area are dropped. Cover ``"unspecified"``
(no cover raster) is fully pervious, with the curve numbers of open space in good condition.
Soil labels ``"water"`` and ``"rock"`` take no water: their whole area is impervious.

Pervious part
    Green-Ampt from Rawls, Brakensiek and Miller (1983) for the texture (with
    ``classification="texture"``) or for the group's representative texture;
    the hydrologic soil group from the label, or from the texture (TR-55 1986,
    App. A). Dual groups A/D, B/D, C/D: drained -> the first group, undrained ->
    D (NRCS NEH 630 Ch. 7, 2009). Horton by group; curve number of the cover's
    pervious part for the group; moisture deficit = effective porosity x
    (1 - initial_saturation); constant-loss rate and phi-index = midpoint of the
    group's minimum infiltration range (TR-55 1986, App. A); initial loss =
    depression storage + the group's initial soil loss (common practice).
Impervious part
    No infiltration: conductivity, Horton rates and loss rates 0, curve number
    98 (TR-55 1986), depression storage ``impervious_depression_storage_m``
    (1.5 mm by default, common practice), initial loss = that storage.

Precedence (highest first); for every parameter of every unit the highest
source that gives a value wins, and the provenance table records which:

1. ``subcatchment_attributes`` (per-subcatchment values from the layer);
2. override rows keyed by ``subcatchment_id`` (more keys rank higher: with soil
   and cover, then with soil, then with cover, then the id alone);
3. override rows keyed by ``soil_class`` and ``cover_class``;
4. the soil, then the cover attribute table of a keyed raster (per-key values);
5. override rows keyed by ``soil_class`` alone, then by ``cover_class`` alone;
6. the shipped tables.

Override rows apply to the pervious part unless their ``surface`` is
``impervious``; a ``loss_method`` applies to both parts. A derived value
(moisture deficit, initial loss) is recomputed when its input was set by a
higher source than the value itself.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
import pandas as pd

from ..engine import PARAMETERS, method_name
from ..errors import GisrunWarning, ParameterError
from ..options import DUAL_GROUP_CONDITIONS, choose
from .class_keys import KeyedClasses
from .defaults import ASSIGNED_COLUMNS, RunSettings, bare_cover_warnings, shipped_values
from .keyed import apply_keyed_values, mark_base_classes, resolve_keyed_soils
from .overrides import PARAMETER_COLUMNS
from .precedence import (
    apply_attributes,
    apply_layer,
    attribute_table,
    named_subcatchments,
    override_layers,
)
from .soils import (
    CLASSIFICATIONS,
    SoilInfo,
    check_cover_labels,
)
from .tables import (
    DEFAULT_ANTECEDENT_CONDITION,
    DEFAULT_IMPERVIOUS_DEPRESSION_STORAGE_M,
    DEFAULT_INITIAL_ABSTRACTION_RATIO,
    UNSPECIFIED_COVER,
    cover_table,
    group_defaults,
)

__all__ = ["AssignedParameters", "assign_parameters"]

_UNIT_COLUMNS = ("subcatchment_id", "soil_class", "cover_class", "area_m2")
_ALL = ASSIGNED_COLUMNS


class AssignedParameters(NamedTuple):
    """What :func:`assign_parameters` returns (unpack as a 3-tuple)."""

    params: pd.DataFrame
    provenance: pd.DataFrame
    warnings: list[GisrunWarning]


def assign_parameters(
    units: pd.DataFrame,
    *,
    classification: str,
    dual_group_condition: str = DUAL_GROUP_CONDITIONS.default,
    initial_saturation: float,
    method: str,
    overrides: pd.DataFrame | None = None,
    subcatchment_attributes: pd.DataFrame | None = None,
    impervious_depression_storage_m: float = DEFAULT_IMPERVIOUS_DEPRESSION_STORAGE_M,
    initial_abstraction_ratio: float = DEFAULT_INITIAL_ABSTRACTION_RATIO,
    antecedent_condition: int = DEFAULT_ANTECEDENT_CONDITION,
    initial_water_content: float | None = None,
    compact_provenance: bool = False,
    soil_keys: KeyedClasses | None = None,
    cover_keys: KeyedClasses | None = None,
) -> AssignedParameters:
    """Give every unit SI parameters for every loss method.

    Parameters
    ----------
    units : DataFrame
        Unit table: ``subcatchment_id``, ``soil_class``, ``cover_class``,
        ``area_m2`` (m2).
    classification : str
        What the soil labels are: a name of :data:`gisrun.parameters.soils.CLASSIFICATIONS`.
    dual_group_condition : str
        How A/D, B/D, C/D are read (NEH 630 Ch. 7, 2009): one of
        :data:`gisrun.options.DUAL_GROUP_CONDITIONS`.
    initial_saturation : float
        Initial effective saturation, 0-1 (-).
    method : str
        Default loss method: a name of :data:`gisrun.engine.ENGINES`, spelled any
        way :func:`gisrun.engine.method_name` reads.
    overrides : DataFrame, optional
        Override table (see :mod:`gisrun.parameters.overrides`), raw or as
        returned by :func:`gisrun.io.tables.read_parameter_overrides`.
    subcatchment_attributes : DataFrame, optional
        ``subcatchment_id`` and parameter columns (units in names) and/or
        ``loss_method``, one row per subcatchment; blank cells set nothing.
    impervious_depression_storage_m : float
        Depression storage of impervious parts (m); 1.5 mm by default.
    initial_abstraction_ratio : float
        Curve-number Ia/S for every unit (0.2, or 0.05 with the published S
        conversion); an override column wins.
    antecedent_condition : int
        Curve-number antecedent moisture condition (1, 2 or 3) for every unit.
    initial_water_content : float, optional
        Initial volumetric water content; when given, the Green-Ampt moisture
        deficit is total porosity minus it (Chow et al. 1988, sec. 4.3:
        ``(1 - Se) theta_e = eta - theta_i``) instead of coming from
        ``initial_saturation``.
    compact_provenance : bool
        Return the provenance as one row per parameter, source and
        soil x cover x surface with a ``unit_parts`` count (what the output
        stores; cheap for millions of units) instead of one row per unit part.
    soil_keys, cover_keys : KeyedClasses, optional
        Classes of keyed rasters and what their tables give (:mod:`~gisrun.parameters.keyed`).

    Returns
    -------
    AssignedParameters
        ``params``: the unit parameter frame of DEVELOPERS.md plus
        ``hydrologic_soil_group`` and ``antecedent_condition``;
        ``provenance``: one row per unit part and parameter with the
        ``source`` that won (or compact, see ``compact_provenance``);
        ``warnings``: :class:`GisrunWarning` list.

    Raises
    ------
    ParameterError
        Unknown soil or cover class, option or loss method; initial saturation
        outside 0-1; an override out of range or naming an unknown class; a
        moisture deficit outside 0..porosity.
    """
    classification, dual_group_condition = _check_options(
        classification, dual_group_condition, initial_saturation, impervious_depression_storage_m)
    method = method_name(method, where="[method] name")
    units = _checked_units(units)
    warnings: list[GisrunWarning] = []
    soils = resolve_keyed_soils(units["soil_class"].unique(), soil_keys, classification,
                                dual_group_condition, warnings)
    check_cover_labels(units["cover_class"].unique(), "unit table: cover_class")
    all_rows = _expand(units, soils)
    warnings += bare_cover_warnings(all_rows)
    mark_base_classes(all_rows, soil_keys)
    layers = override_layers(overrides, classification)
    attributes = attribute_table(subcatchment_attributes)
    # Parameters depend on soil, cover and surface, and on the subcatchment only where a layer
    # names it: work on one row per distinct combination and spread the result back.
    rows, inverse = _distinct_parts(all_rows, named_subcatchments(layers, attributes))
    values, sources = shipped_values(rows, soils, RunSettings(
        initial_saturation, impervious_depression_storage_m, initial_abstraction_ratio))
    values["loss_method"], sources["loss_method"] = method, "run default ([method] name)"
    ranks = pd.DataFrame(0, index=rows.index, columns=list(_ALL))
    for rank, layer in layers:
        apply_layer(rows, values, sources, ranks, rank, layer, warnings)
    if attributes is not None:
        apply_attributes(rows, values, sources, ranks, attributes)
    apply_keyed_values(rows, values, sources, ranks, cover_keys, soil_keys)
    _rederive(rows, values, sources, ranks, initial_saturation)
    if initial_water_content is not None:
        _deficit_from_water_content(rows, values, sources, ranks, initial_water_content, warnings)
    _check_result(rows, values, sources)
    params = _params(all_rows, values, inverse)
    params["antecedent_condition"] = _checked_condition(antecedent_condition)
    if compact_provenance:
        provenance = _compact_provenance(rows, sources, np.bincount(inverse, minlength=len(rows)))
    else:
        provenance = _provenance(all_rows, sources, inverse)
    return AssignedParameters(params, provenance, warnings)


def _distinct_parts(rows: pd.DataFrame, named: set[str]) -> tuple[pd.DataFrame, np.ndarray]:
    """One row per distinct soil x cover x surface (x subcatchment, where ``named``).

    Returns the distinct rows in order of first appearance (so the first bad
    distinct row is the first bad row) and, for every row, its distinct row.
    """
    ids = rows["subcatchment_id"].to_numpy(dtype=object)
    own = np.isin(ids, list(named)) if named else np.zeros(len(rows), dtype=bool)
    codes = [pd.factorize(rows[col])[0] for col in ("soil_class", "cover_class", "surface")]
    codes.append(np.where(own, pd.factorize(ids)[0], -1))
    key = np.zeros(len(rows), dtype=np.int64)
    for code in codes:  # mixed-radix number of the four codes
        key = key * (int(code.max(initial=0)) + 2) + (code + 1)
    _, first, inverse = np.unique(key, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    position = np.empty_like(order)
    position[order] = np.arange(len(order))
    distinct = rows.iloc[first[order]].reset_index(drop=True)
    return distinct, position[inverse.ravel()]


def _checked_condition(condition: int) -> int:
    if condition not in PARAMETERS["antecedent_condition"].allowed:
        raise ParameterError("[method] antecedent_condition", f"value {condition!r}",
                             "use 1 (dry), 2 (average) or 3 (wet)")
    return int(condition)


def _deficit_from_water_content(rows: pd.DataFrame, values: pd.DataFrame, sources: pd.DataFrame,
                                ranks: pd.DataFrame, theta: float,
                                warnings: list[GisrunWarning]) -> None:
    """Moisture deficit = total porosity - initial water content, where no override set it."""
    if not (np.isfinite(theta) and 0.0 <= theta < 1.0):
        raise ParameterError("[soil] initial_water_content", f"value {theta!r} is outside 0-1",
                             "give the initial volumetric water content as a fraction")
    redo = ((rows["surface"] == "pervious") & (ranks["moisture_deficit"] == 0)).to_numpy()
    if not redo.any():
        return
    porosity = values.loc[redo, "total_porosity"].astype(float)
    deficit = porosity - theta
    if (deficit < 0).any():
        soils = sorted(set(rows.loc[redo, "soil_class"][(deficit < 0).to_numpy()]))
        warnings.append(GisrunWarning(
            f"[soil] initial_water_content {theta:g} exceeds the total porosity of {soils}; "
            "their moisture deficit is set to 0 (saturated from the start)"))
    values.loc[redo, "moisture_deficit"] = deficit.clip(lower=0.0)
    sources.loc[redo, "moisture_deficit"] = (
        "total porosity from " + sources.loc[redo, "total_porosity"]
        + f" - initial_water_content {theta:g} (Chow et al. 1988 sec. 4.3)")


def _check_options(classification: str, dual: str, saturation: float, ds_m: float
                   ) -> tuple[str, str]:
    """The classification and dual-group condition as named in their registries; checks."""
    classification = choose(classification, CLASSIFICATIONS, where="[soil] classification",
                            what="soil classification", error=ParameterError)
    dual = DUAL_GROUP_CONDITIONS.pick(dual, where="[soil] dual_group_condition",
                                      error=ParameterError)
    if not (np.isfinite(saturation) and 0.0 <= saturation <= 1.0):
        raise ParameterError("[soil] initial_saturation", f"value {saturation!r} is outside 0-1",
                             "give the initial effective saturation as a fraction from 0 to 1")
    if not (np.isfinite(ds_m) and ds_m >= 0.0):
        raise ParameterError("impervious depression storage", f"value {ds_m!r} m is negative",
                             "give a depth of 0 or more")
    return classification, dual


def _checked_units(units: pd.DataFrame) -> pd.DataFrame:
    missing = [c for c in _UNIT_COLUMNS if c not in units.columns]
    if missing:
        raise ParameterError("unit table", f"has no column(s) {missing}",
                             "pass the overlay's unit table unchanged")
    extra = ["impervious_fraction"] if "impervious_fraction" in units.columns else []
    out = units.loc[:, [*_UNIT_COLUMNS, *extra]].reset_index(drop=True)
    if extra:
        share = pd.to_numeric(out["impervious_fraction"], errors="coerce").to_numpy(float)
        if not np.all((share >= 0) & (share <= 1)):
            i = int(np.flatnonzero(~((share >= 0) & (share <= 1)))[0])
            raise ParameterError(f"unit table:row {i + 1}:impervious_fraction",
                                 f"value {units['impervious_fraction'].iloc[i]!r} is outside 0-1",
                                 "give each unit's impervious share as a fraction 0-1")
        out["impervious_fraction"] = share
    area = pd.to_numeric(out["area_m2"], errors="coerce").to_numpy(float)
    bad = ~np.isfinite(area) | (area < 0)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise ParameterError(f"unit table:row {i + 1}:area_m2",
                             f"value {units['area_m2'].iloc[i]!r}"
                             " is not an area", "areas must be finite and not negative")
    out["area_m2"] = area
    for col in ("subcatchment_id", "soil_class", "cover_class"):
        out[col] = out[col].astype(str)
    return out


def _expand(units: pd.DataFrame, soils: dict[str, SoilInfo]) -> pd.DataFrame:
    if "impervious_fraction" in units.columns:  # measured per unit (an impervious grid)
        frac = units["impervious_fraction"]
        units = units.drop(columns="impervious_fraction")
    else:
        cover = cover_table()
        fractions = {**cover["impervious_fraction"].to_dict(), UNSPECIFIED_COVER: 0.0}
        frac = units["cover_class"].map(fractions)
    infiltrates = units["soil_class"].map({k: v.infiltrates for k, v in soils.items()})
    frac = frac.where(infiltrates, 1.0).to_numpy(float)
    perv = units.assign(surface="pervious", area_m2=units["area_m2"] * (1.0 - frac))
    imp = units.assign(surface="impervious", area_m2=units["area_m2"] * frac)
    rows = pd.concat([perv, imp]).sort_index(kind="stable")
    rows = rows[rows["area_m2"] > 0.0].reset_index(drop=True)
    group = rows["soil_class"].map({k: v.group for k, v in soils.items()}).astype(object)
    rows["hydrologic_soil_group"] = group.where(rows["surface"] == "pervious", None)
    return rows


def _rederive(rows: pd.DataFrame, values: pd.DataFrame, sources: pd.DataFrame,
              ranks: pd.DataFrame, saturation: float) -> None:
    redo = (ranks["effective_porosity"] > ranks["moisture_deficit"]).to_numpy()
    if redo.any():
        values.loc[redo, "moisture_deficit"] = (
            values.loc[redo, "effective_porosity"].astype(float) * (1.0 - saturation))
        sources.loc[redo, "moisture_deficit"] = (
            "effective porosity from " + sources.loc[redo, "effective_porosity"]
            + f" x (1 - initial_saturation {saturation:g})")
    redo = ((ranks["depression_storage_m"] > ranks["initial_loss_m"])
            & (rows["surface"] == "pervious")).to_numpy()
    if redo.any():
        soil_loss = rows.loc[redo, "hydrologic_soil_group"].map(
            group_defaults()["initial_soil_loss_m"])
        values.loc[redo, "initial_loss_m"] = (
            values.loc[redo, "depression_storage_m"].astype(float) + soil_loss)
        sources.loc[redo, "initial_loss_m"] = (
            "depression storage from " + sources.loc[redo, "depression_storage_m"]
            + " + initial soil loss of the group (common practice)")


def _check_result(rows: pd.DataFrame, values: pd.DataFrame, sources: pd.DataFrame) -> None:
    perv = (rows["surface"] == "pervious").to_numpy()
    deficit = values["moisture_deficit"].astype(float).to_numpy()
    porosity = values["total_porosity"].astype(float).to_numpy()
    eff = values["effective_porosity"].astype(float).to_numpy()
    checks = [
        ("moisture_deficit", perv & ((deficit < 0) | (deficit > porosity)),
         "moisture deficit {v:g} is outside 0..total porosity",
         "give a deficit between 0 and the soil's porosity"),
        ("effective_porosity", perv & (eff > porosity),
         "effective porosity {v:g} exceeds the total porosity",
         "give an effective porosity no larger than the total porosity"),
    ]
    f0 = values["horton_f0_m_per_s"].astype(float).to_numpy()
    fc = values["horton_fc_m_per_s"].astype(float).to_numpy()
    checks.append(("horton_fc_m_per_s", fc > f0, "Horton final rate {v:g} m/s exceeds f0",
                   "give a final capacity no larger than the initial capacity"))
    for col, bad, problem, fix in checks:
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            r = rows.loc[i]
            where = (f"subcatchment {r['subcatchment_id']}, soil {r['soil_class']}, "
                     f"cover {r['cover_class']}: {col} (from {sources.at[i, col]})")
            raise ParameterError(where, problem.format(v=float(values.at[i, col])), fix)


def _params(rows: pd.DataFrame, values: pd.DataFrame, inverse: np.ndarray) -> pd.DataFrame:
    """Unit parameter frame: ``rows`` with the values of their distinct rows."""
    out = rows.loc[:, ["subcatchment_id", "soil_class", "cover_class", "surface", "area_m2",
                       "hydrologic_soil_group"]].copy()
    for col in PARAMETER_COLUMNS:
        out[col] = values[col].to_numpy(dtype=np.float64)[inverse]
    out["loss_method"] = pd.Series(
        values["loss_method"].astype(str).to_numpy(dtype=object)[inverse], index=out.index,
        dtype=str)
    out["antecedent_condition"] = DEFAULT_ANTECEDENT_CONDITION
    return out


_SOURCE_COLUMNS = [*PARAMETER_COLUMNS, "loss_method"]


def _provenance(rows: pd.DataFrame, sources: pd.DataFrame, inverse: np.ndarray) -> pd.DataFrame:
    """One row per unit part and parameter with its source."""
    keys = rows.loc[:, ["subcatchment_id", "soil_class", "cover_class", "surface"]]
    spread = sources[_SOURCE_COLUMNS].iloc[inverse].set_axis(keys.index)
    long = keys.join(spread).melt(id_vars=list(keys.columns), value_vars=_SOURCE_COLUMNS,
                                  var_name="parameter", value_name="source")
    return long.reset_index(drop=True)


def _compact_provenance(rows: pd.DataFrame, sources: pd.DataFrame,
                        counts: np.ndarray) -> pd.DataFrame:
    """One row per parameter, source and soil x cover x surface, with the count of unit parts."""
    keys = rows.loc[:, ["soil_class", "cover_class", "surface"]].assign(unit_parts=counts)
    long = keys.join(sources[_SOURCE_COLUMNS]).melt(
        id_vars=list(keys.columns), value_vars=_SOURCE_COLUMNS, var_name="parameter",
        value_name="source")
    by = ["parameter", "source", "soil_class", "cover_class", "surface"]
    return long.groupby(by, dropna=False, sort=True)["unit_parts"].sum().reset_index()

