"""One chunk's uncertainty analysis: sample, run, summarize; and the sensitivity runs.

:func:`analyse_chunk` takes a chunk's unit parameters (as the run assigned them)
and its storms, and returns the bands of its subcatchments, each sample's first
``k`` to pond (merged over chunks by the workflow) and the one-at-a-time table.
Nothing here reads a file: the workflow hands in the overrides and attributes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..parameters.precedence import attribute_table, named_subcatchments, override_layers
from ..project import UncertaintySettings
from .ranges import Ranges, RangeSettings, parameter_ranges
from .sampler import draw_columns
from .sampling import (
    DistinctParts,
    SampleRunner,
    StormFigures,
    apply_values,
    distinct_parts,
    sampled_values,
)
from .sensitivity import one_at_a_time
from .spread import SPREADS
from .summary import band_table, first_k

__all__ = ["ChunkInputs", "ChunkUncertainty", "PreparedChunk", "analyse_chunk", "draw_table",
           "prepare_chunk", "sample_figures"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class ChunkInputs:
    """What a chunk's analysis needs besides its unit parameters (all SI)."""

    sub_ids: NDArray[np.object_]
    storm_names: tuple[str, ...]
    rains: tuple[FloatArray, ...]
    dt_s: float
    ranges: RangeSettings
    overrides: pd.DataFrame | None = None
    attributes: pd.DataFrame | None = None
    #: Rain depth factor of each unit part (None: the storm as is).
    rain_scale: FloatArray | None = None


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


@dataclass(frozen=True)
class PreparedChunk:
    """A chunk's distinct unit parts, their ranges and the runner over its storms."""

    parts: DistinctParts
    ranges: Ranges
    runner: SampleRunner


def prepare_chunk(params: pd.DataFrame, chunk: ChunkInputs) -> PreparedChunk:
    """Distinct parts, ranges and runner of one chunk (the work shared by every sample).

    Raises
    ------
    ParameterError
        An override range that does not contain the value the run uses.
    """
    layers = override_layers(chunk.overrides, chunk.ranges.classification)
    named = named_subcatchments(layers, attribute_table(chunk.attributes))
    parts = distinct_parts(params, named=named, rain_scale=chunk.rain_scale)
    ranges = parameter_ranges(parts.frame, chunk.ranges, overrides=chunk.overrides,
                              attributes=chunk.attributes)
    return PreparedChunk(parts, ranges,
                         SampleRunner(params, parts, chunk.sub_ids, chunk.rains, chunk.dt_s))


def analyse_chunk(params: pd.DataFrame, chunk: ChunkInputs, settings: UncertaintySettings
                  ) -> ChunkUncertainty:
    """Bands, first-to-pond lists and sensitivity of one chunk's subcatchments.

    Raises
    ------
    ParameterError
        An override range that does not contain the value the run uses.
    """
    prepared = prepare_chunk(params, chunk)
    parts, ranges, runner = prepared.parts, prepared.ranges, prepared.runner
    figures = sample_figures(prepared, settings, saturation=chunk.ranges.initial_saturation)
    depth = [f.runoff_depth_m for f in figures]
    ponding = [f.time_to_ponding_s for f in figures]
    central = runner.run(parts.frame)
    sensitivity = one_at_a_time(runner, parts, ranges, chunk.storm_names,
                                saturation=chunk.ranges.initial_saturation, central=central)
    positions = np.arange(len(chunk.sub_ids))
    bands = [_with_leader(band_table(chunk.sub_ids, runner.area_m2, depth[k], ponding[k],
                                     settings.percentiles), sensitivity, name)
             for k, name in enumerate(chunk.storm_names)]
    first = [first_k(ponding[k], positions, settings.top_k)
             for k in range(len(chunk.storm_names))]
    return ChunkUncertainty(bands, first, sensitivity, draw_table(ranges), chunk.sub_ids)


def sample_figures(prepared: PreparedChunk, settings: UncertaintySettings, *,
                   saturation: float) -> list[StormFigures]:
    """Per storm, every sample's runoff depth and time to ponding, (samples x subcatchments).

    The samples are drawn from ``settings.seed`` (:func:`gisrun.uncertainty.sampler.draw_columns`)
    and their values found by :func:`gisrun.uncertainty.sampling.sampled_values`.
    """
    ranges, parts = prepared.ranges, prepared.parts
    columns = draw_columns(ranges.draw_names(), settings.samples, settings.seed)
    values = sampled_values(ranges, columns)
    frames = [apply_values(parts.frame, {c: (rows, v[s]) for c, (rows, v) in values.items()},
                           saturation=saturation) for s in range(settings.samples)]
    return prepared.runner.run_many(frames)


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

