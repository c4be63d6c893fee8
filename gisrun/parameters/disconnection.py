"""Disconnected impervious area: which share of each impervious part drains onto pervious ground.

A roof that spills onto a lawn is impervious but not connected to the drains:
its runoff runs on to pervious ground and may soak in there. Each impervious
part of a unit whose soil takes water gets a ``disconnected_fraction`` (0-1),
from the highest source that gives one:

1. the subcatchment's field (``[impervious] disconnected_field``; blank: next);
2. its cover class (``[impervious.disconnected_by_cover]``);
3. the project-wide share (``[impervious] disconnected_fraction``);
4. otherwise 0 (connected).

Soils that take no water (``water``, ``rock``) stay connected: their area is
impervious because of the soil, not the cover. A part whose unit (or, with
``runon_to = "subcatchment"``, whose subcatchment) has no pervious ground stays
connected too, with a note. The routing itself is :mod:`gisrun.runon`.

Curve number
------------
TR-55 (1986), chapter 2 ("Unconnected impervious areas", p. 2-4, and Figure 2-4)
composites a pervious curve number ``CNp`` with a share ``Pimp`` of impervious
area of which a ratio ``R`` is unconnected::

    CNc = CNp + (Pimp / 100) (98 - CNp) (1 - 0.5 R)

and limits it to total impervious area below 30 % (at or above it TR-55 treats the
impervious area as connected, Figure 2-3). gisrun applies it per soil x cover
unit of the curve-number method under ``runon_to = "unit"`` (the unit's own
pervious part takes the run-on, as TR-55's figure assumes): both parts of such a
unit run with ``CNc`` (98 being the impervious part's curve number) and nothing
is routed. Outside its limits (30 % impervious or more, or run-on to the whole
subcatchment) the unconnected runoff runs onto the pervious ground step by step
and through its curve number like any other method's, and a note names the
subcatchments.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .tables import NON_INFILTRATING_SOILS

__all__ = ["TR55_IMPERVIOUS_LIMIT", "Disconnection", "tr55_unconnected_cn", "merge_sources",
           "assign_disconnection", "TR55_SOURCE"]

#: TR-55 (1986) Figure 2-4 applies below this total impervious share (p. 2-4).
TR55_IMPERVIOUS_LIMIT = 0.30
#: The provenance text of a curve number composited for unconnected impervious area.
TR55_SOURCE = ("TR-55 (1986) ch. 2 Figure 2-4: composite CN for unconnected impervious area, "
               "CNc = CNp + Pimp (98 - CNp) (1 - 0.5 R), from the unit's shares")


def tr55_unconnected_cn(cn_pervious: object, impervious_fraction: object, unconnected: object,
                        cn_impervious: object = 98.0) -> np.ndarray:
    """TR-55 (1986) Figure 2-4 composite curve number with unconnected impervious area.

    Parameters
    ----------
    cn_pervious : array_like
        Curve number of the pervious part, ``CNp``.
    impervious_fraction : array_like
        Total impervious share of the area, 0-1 (``Pimp / 100``).
    unconnected : array_like
        ``R``: unconnected impervious area / total impervious area, 0-1.
    cn_impervious : array_like
        Curve number of the impervious area (98 in TR-55).

    Examples
    --------
    >>> float(tr55_unconnected_cn(61.0, 0.20, 0.75))  # 61 + 0.2 x 37 x 0.625
    65.625
    """
    cnp = np.asarray(cn_pervious, dtype=np.float64)
    return cnp + (np.asarray(impervious_fraction, dtype=np.float64)
                  * (np.asarray(cn_impervious, dtype=np.float64) - cnp)
                  * (1.0 - 0.5 * np.asarray(unconnected, dtype=np.float64)))


@dataclass(frozen=True)
class Disconnection:
    """The disconnected shares a project states (see the module docstring for precedence).

    ``by_subcatchment`` maps subcatchment id -> share (NaN: blank, the next source);
    ``field_where`` names that field in provenance and notes.
    """

    by_cover: Mapping[str, float] = field(default_factory=dict)
    project_wide: float | None = None
    by_subcatchment: pd.Series | None = None
    field_where: str = ""
    runon_to: str = "unit"


def assign_disconnection(params: pd.DataFrame, spec: Disconnection
                         ) -> tuple[pd.DataFrame, pd.DataFrame, list[str]]:
    """Give every impervious part its disconnected share; apply TR-55 to curve-number units.

    Returns
    -------
    params : DataFrame
        A copy with ``disconnected_fraction`` (0 on pervious parts) and, where TR-55's
        composite applies, ``curve_number`` of both parts set to it.
    sources : DataFrame
        Provenance rows (``parameter``, ``source``, ``soil_class``, ``cover_class``,
        ``surface``, ``unit_parts``): the share of every impervious part, and the curve
        numbers TR-55 replaced (``parameter`` ``"curve_number"``).
    notes : list of str
    """
    out = params.copy()
    share, source = _stated_shares(out, spec)
    notes: list[str] = []
    share = _connect_where_nothing_receives(out, share, spec.runon_to, notes)
    out["disconnected_fraction"] = share
    impervious = (out["surface"] == "impervious").to_numpy()
    rows = [_counts(out[impervious].assign(source=source[impervious]), "disconnected_fraction")]
    tr55 = _apply_tr55(out, spec.runon_to, notes)
    if tr55.any():
        rows.append(_counts(out[tr55].assign(source=TR55_SOURCE), "curve_number"))
    return out, pd.concat(rows, ignore_index=True), notes


def _stated_shares(params: pd.DataFrame, spec: Disconnection
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Share and its source per part, by the precedence of the module docstring."""
    n = len(params)
    share = np.zeros(n)
    source = np.full(n, "connected: no disconnected share stated", dtype=object)
    takes = ((params["surface"] == "impervious")
             & ~params["soil_class"].isin(NON_INFILTRATING_SOILS)).to_numpy()
    source[~takes] = "connected: not an impervious part of a soil that takes water"
    if spec.project_wide is not None:
        share[takes] = spec.project_wide
        source[takes] = f"[impervious] disconnected_fraction {spec.project_wide:g} (project-wide)"
    cover = params["cover_class"].map(spec.by_cover).to_numpy(dtype=np.float64)
    hit = takes & np.isfinite(cover)
    share[hit] = cover[hit]
    source[hit] = ("[impervious.disconnected_by_cover] "
                   + params["cover_class"].to_numpy(dtype=object)[hit])
    if spec.by_subcatchment is not None:
        own = params["subcatchment_id"].map(spec.by_subcatchment).to_numpy(dtype=np.float64)
        hit = takes & np.isfinite(own)
        share[hit] = own[hit]
        source[hit] = f"{spec.field_where} (per subcatchment)"
    return share, source


def _connect_where_nothing_receives(params: pd.DataFrame, share: np.ndarray, runon_to: str,
                                    notes: list[str]) -> np.ndarray:
    keys = ["subcatchment_id"] if runon_to == "subcatchment" else [
        "subcatchment_id", "soil_class", "cover_class"]
    pervious = (params["surface"] == "pervious").to_numpy()
    group = params.groupby(keys, sort=False, observed=True).ngroup().to_numpy()
    receiving = np.bincount(group, weights=np.where(pervious, params["area_m2"], 0.0))
    stuck = (share > 0) & (receiving[group] <= 0)
    if stuck.any():
        first = params[stuck].iloc[0]
        where = "unit" if runon_to == "unit" else "subcatchment"
        notes.append(f"{int(stuck.sum())} impervious part(s) with a disconnected share have no "
                     f"pervious ground in their {where} to drain onto and stay connected (e.g. "
                     f"subcatchment {first['subcatchment_id']}, cover {first['cover_class']})")
        share = np.where(stuck, 0.0, share)
    return share


def _apply_tr55(params: pd.DataFrame, runon_to: str, notes: list[str]) -> np.ndarray:
    """TR-55's composite on curve-number units within its limits; notes where it does not apply.

    Returns the rows whose curve number it set.
    """
    cn = (params["loss_method"] == "curve_number").to_numpy()
    share = params["disconnected_fraction"].to_numpy(dtype=np.float64)
    donors = cn & (share > 0)
    if not donors.any():
        return np.zeros(len(params), dtype=bool)
    if runon_to != "unit":
        notes.append("TR-55's adjustment for unconnected impervious area composites one area's "
                     "own parts, so with [impervious] runon_to = 'subcatchment' the curve-number "
                     "units of subcatchments " + _names(params, donors) + " route their "
                     "unconnected runoff step by step onto the pervious ground instead")
        return np.zeros(len(params), dtype=bool)
    keys = ["subcatchment_id", "soil_class", "cover_class"]
    unit = params.groupby(keys, sort=False, observed=True).ngroup().to_numpy()
    area = params["area_m2"].to_numpy(dtype=np.float64)
    imp = (params["surface"] == "impervious").to_numpy()
    total = np.bincount(unit, weights=area)
    p_imp = np.bincount(unit, weights=np.where(imp, area, 0.0)) / total
    unconnected = np.bincount(unit, weights=np.where(donors, share, 0.0))
    perv_cn = np.bincount(unit, weights=np.where(~imp, params["curve_number"], 0.0))
    imp_cn = np.bincount(unit, weights=np.where(imp, params["curve_number"], 0.0))
    inside = np.zeros(unit.max() + 1, dtype=bool)
    inside[unit[donors]] = True
    outside = inside & (p_imp >= TR55_IMPERVIOUS_LIMIT)
    inside &= p_imp < TR55_IMPERVIOUS_LIMIT
    if outside.any():
        notes.append("TR-55 (1986) Figure 2-4 applies only below 30 % impervious area; the "
                     "curve-number units of subcatchments " + _names(params, outside[unit])
                     + " are 30 % impervious or more, so their unconnected runoff runs onto "
                     "their pervious part step by step, through its curve number, instead")
    rows = inside[unit]
    composite = tr55_unconnected_cn(perv_cn, p_imp, unconnected, imp_cn)
    params.loc[rows, "curve_number"] = composite[unit[rows]]
    params.loc[rows, "disconnected_fraction"] = 0.0
    return rows


def _names(params: pd.DataFrame, rows: np.ndarray) -> str:
    ids = list(dict.fromkeys(params.loc[rows, "subcatchment_id"].astype(str)))
    return ", ".join(ids[:10]) + (f" and {len(ids) - 10} more" if len(ids) > 10 else "")


def _counts(rows: pd.DataFrame, parameter: str) -> pd.DataFrame:
    keys = ["source", "soil_class", "cover_class", "surface"]
    counts = rows.groupby(keys, sort=True, dropna=False).size().rename("unit_parts")
    return counts.reset_index().assign(parameter=parameter)


def merge_sources(sources: pd.DataFrame, more: pd.DataFrame) -> pd.DataFrame:
    """The compact provenance with the rows of :func:`assign_disconnection` added.

    A curve number TR-55's composite replaced leaves the count of the source it
    replaced (the first rows of its soil x cover x surface), so every part keeps one
    source per parameter.
    """
    out = sources.copy()
    replaced = more[more["parameter"] == "curve_number"]
    keys = ["soil_class", "cover_class", "surface"]
    for key, count in replaced.groupby(keys)["unit_parts"].sum().items():
        mask = (out["parameter"] == "curve_number").to_numpy()
        for col, value in zip(keys, key, strict=True):
            mask = mask & (out[col] == value).to_numpy()
        for i in out.index[mask]:
            taken = min(int(count), int(out.at[i, "unit_parts"]))
            out.at[i, "unit_parts"] -= taken
            count -= taken
    out = out[out["unit_parts"] > 0]
    return pd.concat([out, more[list(out.columns)]], ignore_index=True)
