"""The uncertainty runs inside the chunked run: per chunk, once for the run, per chunk again.

Each chunk, after its storms, reduces its unit parameters (as assigned: the overlay
and the parameter work are the run's own) to distinct parts with their ranges and
keeps the run's unit totals (:func:`chunk_uncertainty`,
:func:`gisrun.uncertainty.prepare_parts`). After the last chunk,
:func:`combine_uncertainty` runs every sample once over the sampled parts of the
whole run (per distinct part and rain column for a storm of areal rain) and makes each
chunk's bands (:func:`gisrun.uncertainty.chunk_bands`), puts them in the layer's order,
merges each sample's first-to-pond lists over the chunks and picks the subcatchments
drawn as tornado figures.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import geopandas as gpd
import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..errors import InputError
from ..model import Inputs, StormResult, UncertaintyResult
from ..project import Project
from ..storm import StepRain
from ..uncertainty import (
    BandStorms,
    ChunkInputs,
    ChunkParts,
    ChunkUncertainty,
    RangeSettings,
    chunk_bands,
    first_k_share,
    merge_first_k,
    parameter_ranges,
    prepare_parts,
)
from .steps import rain_scale_for_units, subcatchment_attributes

__all__ = ["chunk_uncertainty", "combine_uncertainty", "TORNADO_COUNT", "check_named_ids",
           "check_uncertainty_ranges"]

#: Tornado figures drawn when the project names no subcatchment: the largest this many.
TORNADO_COUNT = 3


def chunk_uncertainty(project: Project, inputs: Inputs, params: pd.DataFrame,
                      results: Sequence[StormResult], sub_ids: NDArray[np.object_]
                      ) -> ChunkParts | None:
    """One chunk's distinct parts, ranges and unit totals (None without ``[uncertainty]``)."""
    if project.uncertainty is None:
        return None
    chunk = _chunk_inputs(project, inputs, params, [r.rain_per_step_m for r in results],
                          sub_ids)
    return prepare_parts(params, chunk, [r.units for r in results])


def check_uncertainty_ranges(project: Project, inputs: Inputs, params: pd.DataFrame) -> None:
    """Check the ranges an uncertainty run would use (``gisrun check``), running nothing.

    Raises
    ------
    ParameterError
        An override range that does not contain the value used, or a range for a
        parameter that is not sampled.
    """
    if project.uncertainty is None:
        return
    chunk = _chunk_inputs(project, inputs, params, (), np.empty(0, dtype=object))
    parameter_ranges(params, chunk.ranges, overrides=chunk.overrides, attributes=chunk.attributes)


def _chunk_inputs(project: Project, inputs: Inputs, params: pd.DataFrame,
                  rains: Sequence[NDArray[np.float64]], sub_ids: NDArray[np.object_]
                  ) -> ChunkInputs:
    soil = project.soil
    return ChunkInputs(
        sub_ids=sub_ids, storm_names=tuple(h.name for h in inputs.storms),
        rains=tuple(rains), dt_s=project.time_step_s,
        ranges=RangeSettings(soil.classification, soil.dual_group_condition,
                             soil.initial_saturation, soil.initial_water_content,
                             project.antecedent_condition),
        overrides=inputs.overrides,
        attributes=subcatchment_attributes(project, inputs.subcatchments),
        rain_scale=rain_scale_for_units(project, inputs, params))


def check_named_ids(project: Project, inputs: Inputs) -> None:
    """Stop before any work on a tornado subcatchment id the layer does not have.

    Raises
    ------
    InputError
        Naming ``[uncertainty] sensitivity_subcatchments`` and the first unknown id.
    """
    if project.uncertainty is None:
        return
    known = set(inputs.subcatchments["subcatchment_id"].astype(str))
    for name in project.uncertainty.sensitivity_subcatchments:
        if name not in known:
            raise InputError(project.where("uncertainty", "sensitivity_subcatchments"),
                             f"names subcatchment {name!r}, which the layer does not have",
                             f"use ids from the {project.subcatchments.id_field!r} field")


def combine_uncertainty(project: Project, inputs: Inputs, chunk_parts: list[ChunkParts | None],
                        step_rains: Sequence[StepRain],
                        ordered: Callable[[list[pd.DataFrame]], pd.DataFrame],
                        coverage: pd.DataFrame) -> UncertaintyResult | None:
    """The run's uncertainty result: the run-wide sample runs, then each chunk's bands.

    ``coverage`` is the run's coverage table (its ``area_m2`` picks the largest
    subcatchments for the tornado figures when the project names none). A storm of areal
    rain is made whole here (``(steps, subcatchments)``), and only for a run with
    ``[uncertainty]``.
    """
    settings = project.uncertainty
    if settings is None or not chunk_parts or any(p is None for p in chunk_parts):
        return None
    rains = [r.whole() for r in step_rains]
    ids = inputs.subcatchments["subcatchment_id"].to_numpy(dtype=object)
    position = pd.Series(np.arange(len(ids)), index=ids)
    storms = BandStorms(tuple(h.name for h in inputs.storms), tuple(rains),
                        project.time_step_s, project.soil.initial_saturation,
                        columns=tuple(position.reindex(p.sub_ids).to_numpy(dtype=np.intp)
                                      for p in chunk_parts),
                        place=_places(inputs) if any(r.ndim == 2 for r in rains) else None)
    parts = chunk_bands(chunk_parts, settings, storms)
    bands = []
    for k, storm in enumerate(inputs.storms):
        frame = ordered([p.bands[k] for p in parts])
        share = _first_share(parts, position, k, settings.top_k, len(ids))
        frame = frame.assign(first_to_pond_share=share[
            position.reindex(frame["subcatchment_id"].to_numpy(dtype=object)).to_numpy()])
        bands.append(frame.assign(storm=storm.name))
    table = pd.concat(bands, ignore_index=True)
    table = table[["storm", *[c for c in table.columns if c != "storm"]]]
    sensitivity = pd.concat([p.sensitivity for p in parts], ignore_index=True)
    draws = pd.concat([p.draws for p in parts], ignore_index=True).drop_duplicates(
        ["draw", "range_source"]).sort_values("draw", kind="stable").reset_index(drop=True)
    return UncertaintyResult(settings, table, sensitivity, draws,
                             _tornado_ids(settings.sensitivity_subcatchments, coverage))


def _places(inputs: Inputs) -> NDArray[np.float64]:
    """Each subcatchment's place along a Hilbert curve through the centroids (as chunks go)."""
    geoms = inputs.subcatchments.geometry
    centroids = gpd.GeoSeries(geoms.centroid.values, crs=None)
    return np.asarray(centroids.hilbert_distance(total_bounds=geoms.total_bounds),
                      dtype=np.float64)


def _first_share(parts: list[ChunkUncertainty], position: pd.Series, storm: int, k: int,
                 n: int) -> NDArray[np.float64]:
    """Each subcatchment's share of samples in which it is among the first ``k`` to pond."""
    merged = []
    for part in parts:
        times, local = part.first[storm]
        glob = position.reindex(part.sub_ids).to_numpy()
        merged.append((times, np.where(local >= 0, glob[np.maximum(local, 0)], -1)))
    _, first = merge_first_k(merged, k)
    return first_k_share(first, n)


def _tornado_ids(named: tuple[str, ...], coverage: pd.DataFrame) -> tuple[str, ...]:
    if named:
        return named
    largest = coverage.sort_values("area_m2", ascending=False, kind="stable")
    return tuple(str(i) for i in largest["subcatchment_id"].head(TORNADO_COUNT))
