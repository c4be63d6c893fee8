"""A chunk's part of the uncertainty analysis, before and after the run-wide sample runs.

Three steps, so that a soil x cover part met in many chunks is simulated once per
sample (:mod:`gisrun.uncertainty.rowsets`):

1. :func:`prepare_parts` (in each chunk, after its storms): the distinct unit parts
   with their keys and ranges, and what the chunk's bands are made from (each unit's
   subcatchment and area, and the run's own per-unit runoff and ponding time);
2. the run-wide tables and their sample runs, storm by storm
   (:func:`gisrun.uncertainty.storm_rows.storm_runs`: one table of parts for the storms
   of one series, one of parts x rain columns per storm of areal rain);
3. per chunk and storm (:func:`chunk_bands` does 2 and 3): each sample's unit totals
   (the sample's where the unit's part has a range, the run's own elsewhere)
   area-weighted to the subcatchments with the run's weights, then percentiles,
   ponding probability, each sample's first ``k`` to pond and the one-at-a-time table.

With no range anywhere every unit keeps the run's own totals, so the band is the
run's result exactly, however the run was chunked. :func:`analyse_chunk` does all
three for one chunk on its own.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..aggregate import area_weights
from ..parameters.precedence import attribute_table, override_layers
from ..project import UncertaintySettings
from .ranges import Ranges, RangeSettings, parameter_ranges
from .sampling import DistinctParts, distinct_parts
from .sensitivity import ranked_swings, storm_swings
from .spread import SPREADS
from .storm_rows import BandStorms, StormRows, storm_runs
from .summary import band_table, first_k

__all__ = ["ChunkInputs", "ChunkParts", "ChunkUncertainty", "Aggregator", "analyse_chunk",
           "chunk_bands", "draw_table", "prepare_parts", "unit_figures"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class ChunkInputs:
    """What a chunk's analysis needs besides its unit parameters (all SI)."""

    sub_ids: NDArray[np.object_]
    storm_names: tuple[str, ...]
    #: Per storm, ``(steps,)`` or ``(steps, subcatchments)`` in the order of ``sub_ids``.
    rains: tuple[FloatArray, ...]
    dt_s: float
    ranges: RangeSettings
    overrides: pd.DataFrame | None = None
    attributes: pd.DataFrame | None = None
    #: Rain depth factor of each unit part (None: the storm as is).
    rain_scale: FloatArray | None = None


@dataclass
class ChunkParts:
    """A chunk's distinct parts and ranges, and what its bands are made from (SI)."""

    sub_ids: NDArray[np.object_]
    parts: DistinctParts
    ranges: Ranges
    unit_sub_ids: NDArray[np.object_]
    unit_area_m2: FloatArray
    unit_pervious: NDArray[np.bool_]
    #: Per storm, the run's own runoff depth and ponding time of every unit.
    run_runoff_m: list[FloatArray]
    run_ponding_s: list[FloatArray]


@dataclass
class ChunkUncertainty:
    """One chunk's share of the uncertainty results (SI; subcatchments in chunk order)."""

    #: Per storm, :func:`gisrun.uncertainty.summary.band_table` plus the most moving parameter.
    bands: list[pd.DataFrame]
    #: Per storm, each sample's first ``k`` to pond: (times, positions within the chunk).
    first: list[tuple[FloatArray, NDArray[np.intp]]]
    #: One-at-a-time table (:data:`gisrun.uncertainty.sensitivity.SENSITIVITY_COLUMNS`).
    sensitivity: pd.DataFrame
    #: The draws used here: name, parameter, distribution, range source.
    draws: pd.DataFrame
    #: The chunk's subcatchment ids, in the order of its rows and positions.
    sub_ids: NDArray[np.object_]


def prepare_parts(params: pd.DataFrame, chunk: ChunkInputs,
                  unit_results: Sequence[pd.DataFrame]) -> ChunkParts:
    """Step 1: distinct parts, their ranges and the run's unit totals of one chunk.

    ``unit_results`` are the run's per-unit results of each storm, in the rows of
    ``params`` (``runoff_depth_m``, ``time_to_ponding_s``).

    Raises
    ------
    ParameterError
        An override range that does not contain the value the run uses.
    """
    parts = distinct_parts(params, named=_named(chunk), rain_scale=chunk.rain_scale)
    ranges = parameter_ranges(parts.frame, chunk.ranges, overrides=chunk.overrides,
                              attributes=chunk.attributes)
    return ChunkParts(
        sub_ids=np.asarray(chunk.sub_ids, dtype=object), parts=parts, ranges=ranges,
        unit_sub_ids=params["subcatchment_id"].to_numpy(dtype=object),
        unit_area_m2=params["area_m2"].to_numpy(dtype=np.float64),
        unit_pervious=(params["surface"] != "impervious").to_numpy(),
        run_runoff_m=[u["runoff_depth_m"].to_numpy(dtype=np.float64) for u in unit_results],
        run_ponding_s=[u["time_to_ponding_s"].to_numpy(dtype=np.float64) for u in unit_results])


def _named(chunk: ChunkInputs) -> set[str]:
    """Subcatchments an override row or attribute gives a value or range (not just a method)."""
    named = {str(row["subcatchment_id"]) for _, row in
             override_layers(chunk.overrides, chunk.ranges.classification)
             if row.get("subcatchment_id") is not None}
    table = attribute_table(chunk.attributes)
    if table is not None:
        values = table.drop(columns=[c for c in ("subcatchment_id", "loss_method",
                                                 "override_source", "soil_class", "cover_class",
                                                 "surface") if c in table.columns])
        given = values.notna().any(axis=1).to_numpy() if values.shape[1] else np.zeros(
            len(table), dtype=bool)
        named |= {str(v) for v in table.loc[given, "subcatchment_id"]}
    return named


class Aggregator:
    """Area-weighting of unit totals to a chunk's subcatchments, for many sets at once.

    The weights are the run's (:func:`gisrun.aggregate.area_weights`); the time to
    ponding is the earliest among each subcatchment's pervious units (a minimum, so
    the same figure as :func:`gisrun.aggregate.earliest_ponding`), by one sort and
    :func:`numpy.minimum.reduceat`.
    """

    def __init__(self, part: ChunkParts) -> None:
        self.weights = area_weights(part.unit_sub_ids, part.unit_area_m2, part.sub_ids)
        rows = pd.Index(part.sub_ids).get_indexer(part.unit_sub_ids)
        self.area_m2 = np.bincount(rows, weights=part.unit_area_m2, minlength=len(part.sub_ids))
        keep = np.flatnonzero((part.unit_area_m2 > 0) & (self.area_m2[rows] > 0)
                              & part.unit_pervious)
        self.order = keep[np.argsort(rows[keep], kind="stable")]
        self.groups, self.starts = np.unique(rows[self.order], return_index=True)
        self.n_subs = len(part.sub_ids)

    def depth(self, runoff: FloatArray) -> FloatArray:
        """(sets x units) -> (sets x subcatchments) area-weighted depth."""
        return np.asarray(self.weights @ np.atleast_2d(runoff).T).T

    def ponding(self, ponding: FloatArray) -> FloatArray:
        """(sets x units) -> (sets x subcatchments) earliest pervious ponding (NaN: none)."""
        ponding = np.atleast_2d(ponding)
        out = np.full((ponding.shape[0], self.n_subs), np.nan)
        if not self.order.size:
            return out
        values = ponding[:, self.order]
        least = np.minimum.reduceat(np.where(np.isnan(values), np.inf, values), self.starts,
                                    axis=1)
        least[np.isinf(least)] = np.nan
        out[:, self.groups] = least
        return out


def unit_figures(part: ChunkParts, run: StormRows, storm: int, n_samples: int
                 ) -> tuple[FloatArray, FloatArray]:
    """Every sample's unit runoff and ponding time: the sample's where ranged, else the run's.

    ``run`` is the storm's :class:`~gisrun.uncertainty.storm_rows.StormRows`, ``storm`` its
    position among the chunk's storms.
    """
    ranged = run.unit_row >= 0
    runoff = np.repeat(part.run_runoff_m[storm][None, :], n_samples, axis=0)
    ponding = np.repeat(part.run_ponding_s[storm][None, :], n_samples, axis=0)
    if ranged.any() and run.rows.samples:
        figures = run.rows.samples[run.storm]
        runoff[:, ranged] = figures.runoff_depth_m[:, run.unit_row[ranged]]
        ponding[:, ranged] = figures.time_to_ponding_s[:, run.unit_row[ranged]]
    return runoff, ponding


def chunk_bands(parts: Sequence[ChunkParts], settings: UncertaintySettings,
                storms: BandStorms) -> list[ChunkUncertainty]:
    """Steps 2 and 3: the sample runs, then every chunk's bands, first-to-pond lists, sensitivity.

    Storm by storm (:func:`gisrun.uncertainty.storm_rows.storm_runs`), so a storm of areal
    rain's sample totals are held only while its bands are made.
    """
    aggs = [Aggregator(part) for part in parts]
    pieces: list[tuple[list, list, dict]] = [([], [], {}) for _ in parts]
    for k, runs in enumerate(storm_runs(parts, settings, storms)):
        for part, agg, run, (tables, first, swings) in zip(parts, aggs, runs, pieces,
                                                            strict=True):
            runoff, ponding = unit_figures(part, run, k, settings.samples)
            depth, ponds = agg.depth(runoff), agg.ponding(ponding)
            tables.append(band_table(part.sub_ids, agg.area_m2, depth, ponds,
                                     settings.percentiles))
            first.append(first_k(ponds, np.arange(len(part.sub_ids)), settings.top_k))
            for column, frame in storm_swings(part, run, agg, k, storms.names[k]).items():
                swings[column, k] = frame
    out = []
    for part, (tables, first, swings) in zip(parts, pieces, strict=True):
        sensitivity = ranked_swings(swings)
        bands = [_with_leader(t, sensitivity, name) for t, name in zip(tables, storms.names,
                                                                       strict=True)]
        out.append(ChunkUncertainty(bands, first, sensitivity, draw_table(part.ranges),
                                    part.sub_ids))
    return out


def analyse_chunk(params: pd.DataFrame, chunk: ChunkInputs, settings: UncertaintySettings,
                  unit_results: Sequence[pd.DataFrame]) -> ChunkUncertainty:
    """All three steps for one chunk on its own (a run of one chunk, or a notebook)."""
    part = prepare_parts(params, chunk, unit_results)
    storms = BandStorms(tuple(chunk.storm_names), tuple(chunk.rains), chunk.dt_s,
                        chunk.ranges.initial_saturation)
    return chunk_bands([part], settings, storms)[0]


def _with_leader(bands: pd.DataFrame, sensitivity: pd.DataFrame, storm: str) -> pd.DataFrame:
    """Add the parameter that moves each subcatchment's runoff most (empty if none has a range)."""
    lead = sensitivity[(sensitivity["storm"] == storm) & (sensitivity["sensitivity_rank"] == 1)
                       & (sensitivity["runoff_depth_swing_m"] > 0)]
    by_id = lead.set_index("subcatchment_id")["parameter"]
    leader = by_id.reindex(bands["subcatchment_id"].to_numpy(dtype=object))
    return bands.assign(most_influential_parameter=leader.to_numpy(dtype=object))


def draw_table(ranges: Ranges) -> pd.DataFrame:
    """One row per draw: its name, parameter, distribution and where its range came from."""
    rows = []
    for column, spread in SPREADS.items():
        sampled = ranges.sampled(column)
        for name, source in dict.fromkeys(zip(ranges.draw[column][sampled],
                                              ranges.source[column][sampled], strict=True)):
            rows.append({"draw": name, "parameter": column, "distribution": spread.kind,
                         "range_source": source})
    return pd.DataFrame(rows, columns=["draw", "parameter", "distribution", "range_source"])
