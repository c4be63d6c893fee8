"""A design storm's ``areal_reduction`` table: read it, take the factors, reduce the storm.

::

    [[storms]]
    kind = "alternating_block"
    ...
    areal_reduction = { relation = "arr2019_short_duration",
                        annual_exceedance_probability = 0.01, over = "subcatchment" }

``relation`` is one of :data:`gisrun.storm.RELATIONS` and brings its own keys
(``annual_exceedance_probability``, ``table`` (a factor table CSV, :mod:`gisrun.io.factor_table`)
or ``factor``); ``over`` says whose area a factor is taken at: each subcatchment's own
(``"subcatchment"``) or the whole subcatchment layer's (``"basin"``); ``duration_min`` is the
duration the factor is for (default: the storm's duration). Areas are ground areas
(:func:`gisrun.crs.ground_areas`). Areal reduction applies to point design depths only, so only
the design storm kinds (:data:`gisrun.storm.KINDS`) take it.

Areal reduction gives planning-level estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import geopandas as gpd
import numpy as np
from numpy.typing import NDArray

from ..crs import ground_areas
from ..errors import StormError
from ..io.factor_table import read_factor_table_csv
from ..options import REDUCTION_SCOPES, did_you_mean
from ..storm import RELATIONS, AppliedReduction, Hyetograph, ReductionInputs, reduced_storm
from ..storm.areal_reduction import ReductionRangeError
from .reader import StormTableError, TableReader

__all__ = ["REDUCTION_KEY", "ReductionSpec", "read_reduction", "apply_reduction",
           "reduction_keys"]

#: The ``[[storms]]`` key of the table.
REDUCTION_KEY = "areal_reduction"


@dataclass(frozen=True)
class ReductionSpec:
    """A storm's ``areal_reduction`` table as read (SI)."""

    relation: str
    inputs: ReductionInputs
    over: str
    duration_s: float | None
    where: str


def reduction_keys() -> list[str]:
    """Every key an ``areal_reduction`` table may hold, from the registry as it is now."""
    return ["relation", "over", "duration_min",
            *dict.fromkeys(k for r in RELATIONS.values() for k in r.keys)]


def read_reduction(table: TableReader) -> ReductionSpec:
    """Read a storm's ``areal_reduction`` table (``table`` is its reader).

    Raises
    ------
    StormTableError
        An unknown relation or key, a missing key, a bad value or factor table.
    """
    name = table.string("relation")
    if name not in RELATIONS:
        table.fail("relation", f"unknown areal reduction relation {name!r}",
                   did_you_mean(name, RELATIONS))
    relation = RELATIONS[name]
    own = ("relation", "duration_min", *(("over",) if relation.by_area else ()), *relation.keys)
    table.check_keys(own, elsewhere=reduction_keys(),
                     elsewhere_problem=f"does not apply to relation {name!r}",
                     elsewhere_fix=f"remove it; relation {name!r} takes {sorted(own)}")
    for key in own[2:]:
        if key not in table.data:
            table.fail(key, f"relation {name!r} needs it", f"add {key} = ...")
    over = table.choice("over", REDUCTION_SCOPES) if relation.by_area else "basin"
    values = {}
    if "annual_exceedance_probability" in relation.keys:
        values["annual_exceedance_probability"] = table.number(
            "annual_exceedance_probability", low=0.0, high=1.0, low_open=True)
    if "factor" in relation.keys:
        values["factor"] = table.number("factor", low=0.0, high=1.0, low_open=True)
    if "table" in relation.keys:
        try:
            values["table"] = read_factor_table_csv(table.path("table"))
        except StormError as err:
            raise table.error(table.where("table"), f"{err.where}: {err.problem}",
                              err.fix) from None
    duration = (table.number("duration_min", low=0.0, low_open=True) * 60.0
                if "duration_min" in table.data else None)
    return ReductionSpec(name, ReductionInputs(**values), over, duration, table.at)


def apply_reduction(h: Hyetograph, spec: ReductionSpec, subcatchments: gpd.GeoDataFrame,
                    step_s: float) -> Hyetograph:
    """The storm ``h`` reduced as ``spec`` says, for the subcatchments of the layer as read.

    ``step_s`` is the run's step (factors that differ between subcatchments make areal rain on
    it when the storm's own steps are not all one length, :func:`gisrun.storm.reduced_storm`).

    Raises
    ------
    StormTableError
        A subcatchment's (or the basin's) area or the duration outside the relation, naming the
        storm, the area and the duration and what to do.
    """
    ids = subcatchments["subcatchment_id"].astype(str).to_numpy(dtype=object)
    own = np.asarray(ground_areas(subcatchments.geometry).area_m2, dtype=np.float64)
    area = own if spec.over == "subcatchment" else np.full(len(own), own.sum())
    duration = h.duration_s if spec.duration_s is None else spec.duration_s
    relation = RELATIONS[spec.relation]
    try:
        factor = relation.factors(area if spec.over == "subcatchment" else area[:1], duration,
                                  spec.inputs)
    except ReductionRangeError as err:
        raise StormTableError(spec.where, f"{_context(h, spec, err.index, ids, area, duration)}: "
                              f"{spec.relation}: "
                              f"{f'{err.where}: ' if err.where else ''}{err.problem}",
                              err.fix) from None
    factor = np.broadcast_to(factor, area.shape)
    applied = AppliedReduction(spec.relation, relation.source(spec.inputs), spec.over, duration,
                               spec.inputs.annual_exceedance_probability, tuple(ids), area,
                               factor)
    return reduced_storm(h, applied, step_s, own)


def _context(h: Hyetograph, spec: ReductionSpec, index: int | None, ids: Any,
             area: NDArray[np.float64], duration_s: float) -> str:
    """Which storm, area and duration a range error is about (no area when none is at fault)."""
    if index is None:  # e.g. the AEP: no one area is at fault
        return f"storm {h.name!r} ({duration_s / 60:g} min)"
    whose = "the basin" if spec.over == "basin" else f"subcatchment {ids[index]!r}"
    return f"storm {h.name!r}, {whose} ({area[index] / 1e6:,.6g} km2, {duration_s / 60:g} min)"
