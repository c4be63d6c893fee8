"""Override rows and subcatchment attributes: their precedence and how they are applied.

Precedence (highest first; see :mod:`gisrun.parameters.assign`): subcatchment
attributes (rank 40), override rows keyed by ``subcatchment_id`` (30-33, more keys
rank higher), by soil and cover (20), a keyed raster's soil (15) and cover (14)
attribute tables (:mod:`gisrun.parameters.keyed`), override rows by soil (12), by
cover (11), the shipped tables (0).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..errors import GisrunWarning, ParameterError
from .defaults import ASSIGNED_COLUMNS
from .overrides import normalize_overrides
from .soils import check_cover_labels, check_soil_labels

__all__ = ["ATTRIBUTE_RANK", "attribute_table", "named_subcatchments", "override_layers",
           "check_override_labels", "apply_layer", "apply_attributes"]

_ALL = ASSIGNED_COLUMNS
#: Rank of per-subcatchment attributes, above every override row.
ATTRIBUTE_RANK = 40


def attribute_table(attributes: pd.DataFrame | None) -> pd.DataFrame | None:
    """Per-subcatchment values normalized like an override table (ids stripped); None if none."""
    if attributes is None or not len(attributes):
        return None
    if "subcatchment_id" not in attributes.columns:
        raise ParameterError("subcatchment attributes", "have no subcatchment_id column",
                             "pass one row per subcatchment with its id")
    names = [f"id={v}" for v in attributes["subcatchment_id"]]
    return normalize_overrides(attributes, where="subcatchment attributes", row_names=names)


def named_subcatchments(layers: list[tuple[int, dict[str, Any]]],
                         attributes: pd.DataFrame | None) -> set[str]:
    """Subcatchment ids that an override row or a (normalized) attribute table names."""
    named = {str(layer["subcatchment_id"]) for _, layer in layers
             if layer.get("subcatchment_id") is not None}
    if attributes is not None:
        named.update(str(v) for v in attributes["subcatchment_id"] if v is not None)
    return named


def override_layers(overrides: pd.DataFrame | None,
            classification: str) -> list[tuple[int, dict[str, Any]]]:
    """Override rows with their precedence rank, lowest first (applied in that order)."""
    if overrides is None or not len(overrides):
        return []
    table = normalize_overrides(overrides)
    check_override_labels(table, classification)
    return sorted(((_rank(row), row) for row in table.to_dict("records")),
                  key=lambda item: item[0])


def _rank(row: dict[str, Any]) -> int:
    soil, cover = row["soil_class"] is not None, row["cover_class"] is not None
    if row["subcatchment_id"] is not None:
        return 30 + 2 * soil + cover
    return 20 if (soil and cover) else (12 if soil else 11)


def check_override_labels(table: pd.DataFrame, classification: str) -> None:
    """Raise :class:`ParameterError` for an override soil or cover label that does not exist."""
    for row in table.to_dict("records"):
        where = row["override_source"]
        if row["soil_class"] is not None:
            check_soil_labels([row["soil_class"]], classification, f"{where}:soil_class")
        if row["cover_class"] is not None:
            check_cover_labels([row["cover_class"]], f"{where}:cover_class")


def apply_layer(rows: pd.DataFrame, values: pd.DataFrame, sources: pd.DataFrame,
                ranks: pd.DataFrame, rank: int, layer: dict[str, Any],
                warnings: list[GisrunWarning]) -> None:
    """Apply one override row to the parts it matches (its surface; a method to both)."""
    match = np.ones(len(rows), dtype=bool)
    for key in ("subcatchment_id", "soil_class", "cover_class"):
        if layer.get(key) is not None:
            same = rows[key] == layer[key]
            if key == "soil_class" and "soil_base_class" in rows.columns:
                same |= rows["soil_base_class"] == layer[key]  # a keyed class's variants
            match &= same.to_numpy()
    if not match.any():
        keys = ", ".join(f"{k}={layer[k]}" for k in ("subcatchment_id", "soil_class", "cover_class")
                         if layer.get(k) is not None)
        warnings.append(GisrunWarning(
            f"{layer['override_source']} ({keys}): matches no unit; it was not used"))
        return
    surface = layer.get("surface") or "pervious"
    on_surface = match & (rows["surface"] == surface).to_numpy()
    label = layer["override_source"]
    if rank >= ATTRIBUTE_RANK:
        label += " (subcatchment attribute)"
    for col in _ALL:
        value = layer.get(col)
        if value is None or (isinstance(value, float) and np.isnan(value)):
            continue
        target = match if col == "loss_method" else on_surface
        values.loc[target, col] = value
        sources.loc[target, col] = label
        ranks.loc[target, col] = rank


def apply_attributes(rows: pd.DataFrame, values: pd.DataFrame, sources: pd.DataFrame,
                      ranks: pd.DataFrame, attributes: pd.DataFrame) -> None:
    """Apply per-subcatchment values (the highest rank) by a join on the id, not row by row.

    ``attributes`` is the normalized table of :func:`attribute_table`.
    """
    table = attributes.drop_duplicates("subcatchment_id", keep="last").set_index(
        "subcatchment_id")
    ids = rows["subcatchment_id"].to_numpy(dtype=object)
    position = table.index.get_indexer(ids)
    known = position >= 0
    pervious = (rows["surface"] == "pervious").to_numpy()
    label = (table["override_source"].astype(str).to_numpy(dtype=object)
             + " (subcatchment attribute)")
    for col in _ALL:
        if col not in table.columns:
            continue
        column = table[col].to_numpy(dtype=object)
        value = np.where(known, column[np.where(known, position, 0)], None)
        given = known & pd.notna(pd.Series(value)).to_numpy()
        target = given if col == "loss_method" else given & pervious
        if not target.any():
            continue
        values.loc[target, col] = value[target]
        sources.loc[target, col] = label[position[target]]
        ranks.loc[target, col] = ATTRIBUTE_RANK


