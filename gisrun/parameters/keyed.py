"""Use what a keyed raster's attribute table gives: soil info per class and per-key values.

See :mod:`gisrun.parameters.class_keys` for the table. Here its classes become
:class:`~gisrun.parameters.soils.SoilInfo` (a class's texture or group from
the table replaces the shipped one) and its parameter values join the
precedence at :data:`SOIL_TABLE_RANK` and :data:`COVER_TABLE_RANK`: above the
shipped tables and the override rows keyed by soil or by cover alone (a
map unit's measured value is more specific than a class-wide one), below rows
keyed by soil and cover, by subcatchment, and the subcatchment attributes.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import replace

import numpy as np
import pandas as pd

from ..errors import GisrunWarning
from .class_keys import KeyedClasses
from .soils import SoilInfo, resolve_soils
from .tables import UNSPECIFIED_COVER, cover_table

__all__ = ["SOIL_TABLE_RANK", "COVER_TABLE_RANK", "resolve_keyed_soils", "mark_base_classes",
           "apply_keyed_values", "table_impervious_shares"]

#: Rank of a soil attribute table's per-key values (see :mod:`gisrun.parameters.precedence`).
SOIL_TABLE_RANK = 15
#: Rank of a cover attribute table's per-key values.
COVER_TABLE_RANK = 14
_RAWLS = "Rawls et al. (1983) / Chow et al. (1988) Table 4.3.1"


def resolve_keyed_soils(labels: Iterable[str], keyed: KeyedClasses | None, classification: str,
                        dual_condition: str, warnings: list[GisrunWarning]
                        ) -> dict[str, SoilInfo]:
    """:func:`~gisrun.parameters.soils.resolve_soils`, with the classes of a keyed soil raster.

    A class resolves as the class it is a variant of, then takes the texture
    (for Green-Ampt) or the group its table row gives.
    """
    labels = list(labels)
    if keyed is None:
        return resolve_soils(labels, classification, dual_condition, warnings)
    classes = keyed.by_label()
    bases = {classes[lab].base_class if lab in classes else lab for lab in labels}
    base_info = resolve_soils(sorted(bases), classification, dual_condition, warnings)
    out: dict[str, SoilInfo] = {}
    for label in labels:
        if label not in classes:
            out[label] = base_info[label]
            continue
        found = classes[label]
        info = base_info[found.base_class]
        if info.infiltrates and found.group is None:
            info = replace(info, group_source=f"{info.group_source} from {keyed.where}")
        out[label] = _with_table(info, found.group, found.texture, found.group_source,
                                 dual_condition, warnings)
    return out


def _with_table(info: SoilInfo, group: str | None, texture: str | None, source: str,
                dual_condition: str, warnings: list[GisrunWarning]) -> SoilInfo:
    if not info.infiltrates:
        return info
    if texture is not None:
        used = "silt loam" if texture == "silt" else texture
        if used != texture:
            warnings.append(GisrunWarning(
                f"{source}: texture silt has no Green-Ampt values in Rawls et al. (1983); "
                "silt loam values are used"))
        info = replace(info, texture=used,
                       green_ampt_source=f"{_RAWLS}, {used} (texture from {source})")
    if group is not None:
        resolved = group
        if "/" in group:
            resolved = group[0] if dual_condition == "drained" else "D"
        info = replace(info, group=resolved, group_source=f"group {group} from {source}"
                       + (f", {dual_condition} -> {resolved}" if resolved != group else ""))
    return info


def mark_base_classes(rows: pd.DataFrame, soil_keys: KeyedClasses | None) -> None:
    """Add ``soil_base_class``, the class a keyed class is a variant of.

    So an override row keyed by a soil class also matches its variants
    (:func:`.precedence.apply_layer`).
    """
    if soil_keys is not None:
        bases = soil_keys.base_classes()
        rows["soil_base_class"] = rows["soil_class"].map(lambda s: bases.get(s, s))


def apply_keyed_values(rows: pd.DataFrame, values: pd.DataFrame, sources: pd.DataFrame,
                       ranks: pd.DataFrame, cover_keys: KeyedClasses | None,
                       soil_keys: KeyedClasses | None) -> None:
    """The cover table's values (:data:`COVER_TABLE_RANK`), then the soil table's."""
    _apply(rows, values, sources, ranks, cover_keys, "cover_class", COVER_TABLE_RANK)
    _apply(rows, values, sources, ranks, soil_keys, "soil_class", SOIL_TABLE_RANK)


def _apply(rows: pd.DataFrame, values: pd.DataFrame, sources: pd.DataFrame,
           ranks: pd.DataFrame, keyed: KeyedClasses | None, column: str, rank: int) -> None:
    """Set the per-class values of a keyed table on the pervious parts of its classes.

    A value replaces only what ranks below ``rank`` (so the override rows keyed
    by soil and cover, by subcatchment, and the subcatchment attributes still win).
    """
    if keyed is None:
        return
    table = keyed.values_frame()
    params = [c for c in table.columns if c != "source" and c in values.columns]
    if not params:
        return
    position = table.index.get_indexer(rows[column].to_numpy(dtype=object))
    known = (position >= 0) & (rows["surface"] == "pervious").to_numpy()
    label = table["source"].to_numpy(dtype=object)
    kind = "soil" if column == "soil_class" else "cover"
    for col in params:
        column_values = table[col].to_numpy(dtype=np.float64)
        value = np.where(known, column_values[np.where(known, position, 0)], np.nan)
        target = known & ~np.isnan(value) & (ranks[col].to_numpy() < rank)
        if not target.any():
            continue
        values.loc[target, col] = value[target]
        sources.loc[target, col] = [f"{s} ({kind} attribute table)"
                                    for s in label[position[target]]]
        ranks.loc[target, col] = rank


def table_impervious_shares(units: pd.DataFrame, cover_keys: KeyedClasses | None
                            ) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    """The unit table with ``impervious_fraction`` from a cover attribute table, and its sources.

    Only when the table gives a share for some class and the units carry none yet (a share
    measured on an impervious grid wins); other classes keep the cover table's share.

    Returns
    -------
    units : DataFrame
        With ``impervious_fraction`` when the table gave one.
    sources : DataFrame or None
        Provenance rows (``parameter_sources`` shape) of the shares the table gave.
    """
    given = {} if cover_keys is None else {c.label: c for c in cover_keys.classes
                                           if c.impervious_fraction is not None}
    if not given or "impervious_fraction" in units.columns:
        return units, None
    shipped = {**cover_table()["impervious_fraction"].to_dict(), UNSPECIFIED_COVER: 0.0}
    shares = {**shipped, **{label: c.impervious_fraction for label, c in given.items()}}
    out = units.assign(impervious_fraction=units["cover_class"].map(shares).astype(float))
    mine = units[units["cover_class"].isin(list(given))]
    counts = mine.groupby(["soil_class", "cover_class"], sort=True).size()
    covers = counts.index.get_level_values(1)
    sources = pd.DataFrame({
        "parameter": "impervious_fraction",
        "source": [f"{cover_keys.where}:{given[c].source} (cover attribute table)"
                   for c in covers],
        "soil_class": counts.index.get_level_values(0), "cover_class": covers,
        "surface": "impervious", "unit_parts": counts.to_numpy()})
    return out, sources
