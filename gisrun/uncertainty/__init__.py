"""How sure: runoff bands from the published ranges of the loss parameters.

Every parameter gisrun assigns is a typical value for a class; the publications
give its spread. This package samples the parameters within those ranges (Latin
hypercube, :mod:`.sampler`; distributions stated in :mod:`.spread`; ranges and
their sources in :mod:`.ranges`), runs every sample through the same engine once
per distinct unit part of the whole run (:mod:`.sampling`, :mod:`.rowsets`; for a storm
whose rain differs between subcatchments, once per distinct part and rain column,
:mod:`.storm_rows`), puts
the results back on each chunk's units (:mod:`.analysis`) and summarizes: percentiles of runoff
depth, volume and time to ponding, the probability that a subcatchment ponds, how
often it is among the first ``k`` to pond (:mod:`.summary`), and which parameter
moves its runoff most (:mod:`.sensitivity`).

The bands cover the spread of the loss parameters only: not the error of the
loss methods themselves, nor of the rain, the soil and cover maps or the
subcatchment boundaries. Planning-level estimates; defer to local codes, agency
methods and a licensed engineer.

Compute only: nothing here reads or writes a file.
"""

from .analysis import (
    ChunkInputs,
    ChunkParts,
    ChunkUncertainty,
    analyse_chunk,
    chunk_bands,
    prepare_parts,
)
from .ranges import RangeSettings, parameter_ranges
from .rowsets import SampledRows, gather_rows, run_samples
from .sampler import draw_columns
from .spread import SPREADS, Spread, values_from_uniform
from .storm_rows import BandStorms, uniform_rains
from .summary import band_table, first_k_share, merge_first_k, percentile_label

__all__ = [
    "SPREADS",
    "BandStorms",
    "ChunkInputs",
    "ChunkParts",
    "ChunkUncertainty",
    "SampledRows",
    "RangeSettings",
    "Spread",
    "analyse_chunk",
    "band_table",
    "chunk_bands",
    "draw_columns",
    "first_k_share",
    "gather_rows",
    "merge_first_k",
    "parameter_ranges",
    "prepare_parts",
    "run_samples",
    "percentile_label",
    "uniform_rains",
    "values_from_uniform",
]
