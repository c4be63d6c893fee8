"""Run a project in spatially compact chunks of subcatchments, serially or on dask.

Subcatchments are ordered along a Hilbert curve through their centroids and
cut into chunks of neighbours, so each chunk reads only a small window of the
rasters. A chunk is processed end to end (overlay, parameters, every storm,
aggregation) by :func:`process_chunk`, which takes only picklable inputs: the
checked project, the chunk's polygons, the rasters as paths (a
:class:`~gisrun.io.raster.ClassRaster` opens its file itself) and the storms.
The same chunks run the same way whether one process runs them in turn or
dask workers run them in parallel, so the results are equal to the last bit
and are put back in the layer's row order.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field

import geopandas as gpd
import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..engine import LossResult
from ..errors import GisrunWarning
from ..grid.classes import ClassGrid
from ..grid.polygons import ClassPolygons
from ..model import Inputs, StormResult
from ..project import Project
from ..storm import Hyetograph
from ..uncertainty import ChunkParts
from .bands import chunk_uncertainty
from .cells import slim_unit_results
from .disconnection import add_connected_comparison, runon_target
from .rain import chunk_rains
from .steps import (
    add_composite_comparison,
    lumped_parameter_table,
    overlay_inputs,
    prepare_parameters,
    rain_scale_for_units,
    run_storm,
)

__all__ = [
    "DEFAULT_MEMORY_BUDGET_MB",
    "ChunkTask",
    "ChunkOutput",
    "plan_chunks",
    "ChunkLoad",
    "chunk_size_for_budget",
    "sample_rows",
    "process_chunk",
    "split_overlay",
]

#: Default memory budget of a run, MB (``[project] memory_budget_mb``).
DEFAULT_MEMORY_BUDGET_MB = 1500.0

#: Share of the memory budget one chunk's working set may take; the rest is for the inputs,
#: the results kept for the whole run and the copies made while writing a chunk's rows.
_CHUNK_SHARE = 1.0 / 3.0
#: Working-set bytes per unit and step of one storm in the engine and aggregation (measured
#: about 60 on the benchmark inputs: the step arrays of the engine and their sums).
_BYTES_PER_UNIT_STEP = 64
#: Bytes per subcatchment, step and storm of the excess series kept until the chunk is written.
_BYTES_PER_SERIES_ROW = 160
#: Bytes per unit and storm of the unit tables kept until the chunk is written.
_BYTES_PER_UNIT_ROW = 400
#: Bytes per raster cell in a chunk's overlay window (measured about 15).
_BYTES_PER_CELL = 16
#: Bytes per subcatchment besides (polygon geometry and per-polygon tables; measured ~27 kB).
_BYTES_PER_SUBCATCHMENT = 32_000
#: Areal rain: bytes per subcatchment, step and storm (the chunk's columns) and per unit and step
#: of the storm being run (its rain per unit, the engine's copy, the deduplication's frame).
_BYTES_PER_AREAL_VALUE, _BYTES_PER_AREAL_UNIT_STEP = 8, 24


@dataclass(frozen=True)
class ChunkLoad:
    """What one subcatchment weighs when sizing chunks, estimated before the run.

    ``units_per_subcatchment`` (soil x cover x surface parts) and ``cells_per_subcatchment``
    (cells of the finer raster inside the polygon) come from an overlay of a few compact
    samples (:func:`sample_rows`); the defaults are a cautious guess for when none was made.
    """

    units_per_subcatchment: float = 24.0
    cells_per_subcatchment: float = 0.0


def plan_chunks(geoms: gpd.GeoSeries, max_per_chunk: int) -> list[np.ndarray]:
    """Split polygons into chunks of neighbours along a Hilbert curve.

    Parameters
    ----------
    geoms : GeoSeries
        The subcatchment polygons.
    max_per_chunk : int
        Most polygons in one chunk.

    Returns
    -------
    list of ndarray
        Row positions of each chunk; together they are every row once.

    Examples
    --------
    A 4 x 4 grid of squares (row by row) falls into its four 2 x 2 quarters:

    >>> from shapely.geometry import box
    >>> g = gpd.GeoSeries([box(x, y, x + 1, y + 1) for y in range(4) for x in range(4)])
    >>> [c.tolist() for c in plan_chunks(g, 4)]
    [[0, 1, 4, 5], [8, 9, 12, 13], [10, 11, 14, 15], [2, 3, 6, 7]]
    """
    n = len(geoms)
    if n == 0:
        return []
    if n <= max_per_chunk:
        return [np.arange(n)]
    order = _hilbert_order(geoms)
    return [np.sort(order[i:i + max_per_chunk]) for i in range(0, n, max_per_chunk)]


def chunk_size_for_budget(budget_mb: float, n_steps: int, n_storms: int,
                          load: ChunkLoad = ChunkLoad(), *, areal_storms: int = 0) -> int:
    """Subcatchments per chunk whose working set stays within a third of the budget.

    A chunk's working set is its overlay window, one storm's engine arrays at a time and
    every storm's results until the chunk is written; with the load measured on the inputs
    the peak memory is set by the budget rather than by the raster or catchment size.
    ``areal_storms`` storms of areal rain add their columns and, while one runs, rain per unit.

    Examples
    --------
    >>> chunk_size_for_budget(1500, 288, 3)
    779
    >>> chunk_size_for_budget(1500, 288, 3, ChunkLoad(units_per_subcatchment=4.0,
    ...                                               cells_per_subcatchment=640))
    1930
    """
    steps, storms = max(n_steps, 1), max(n_storms, 1)
    units = load.units_per_subcatchment
    per_sub = (units * steps * _BYTES_PER_UNIT_STEP
               + storms * (steps * _BYTES_PER_SERIES_ROW + units * _BYTES_PER_UNIT_ROW)
               + load.cells_per_subcatchment * _BYTES_PER_CELL + _BYTES_PER_SUBCATCHMENT)
    if areal_storms:
        per_sub += steps * (areal_storms * _BYTES_PER_AREAL_VALUE
                            + units * _BYTES_PER_AREAL_UNIT_STEP)
    return int(np.clip(budget_mb * 1e6 * _CHUNK_SHARE // per_sub, 16, 50_000))


def sample_rows(geoms: gpd.GeoSeries, n_per_sample: int = 100, n_samples: int = 3
                ) -> list[np.ndarray]:
    """Compact samples of polygons for estimating a :class:`ChunkLoad`.

    Runs of ``n_per_sample`` neighbours along the Hilbert curve, spread evenly over it, so
    each sample's overlay reads one small raster window. All rows in one sample when there
    are not many more polygons than the samples hold.
    """
    n = len(geoms)
    if n <= n_per_sample * n_samples:
        return [np.arange(n)] if n else []
    order = _hilbert_order(geoms)
    starts = [int((k + 0.5) * n / n_samples) - n_per_sample // 2 for k in range(n_samples)]
    return [np.sort(order[s:s + n_per_sample]) for s in starts]


def _hilbert_order(geoms: gpd.GeoSeries) -> np.ndarray:
    centroids = gpd.GeoSeries(geoms.centroid.values, crs=None)
    return np.argsort(np.asarray(centroids.hilbert_distance(total_bounds=geoms.total_bounds)),
                      kind="stable")


@dataclass(frozen=True)
class ChunkTask:
    """Everything one chunk needs; picklable so a dask worker can run it."""

    index: int
    project: Project
    subcatchments: gpd.GeoDataFrame
    soil: ClassGrid | ClassPolygons
    cover: ClassGrid | ClassPolygons | None
    #: The storms as this chunk needs them (:func:`gisrun.workflow.rain.chunk_storms`: areal
    #: rain of this chunk's subcatchments only).
    storms: tuple[Hyetograph, ...]
    #: Each plain storm's rain per run step (resampled once for the run), m, ``(steps,)``; None
    #: for areal rain, whose columns the chunk makes when it runs.
    rains: tuple[NDArray[np.float64] | None, ...]
    overrides: pd.DataFrame | None = None
    keep_loss: bool = True
    #: Also give the unit-level results the cell rasters are made from.
    cells: bool = False
    #: (units, coverage, notes) of this chunk from the overlay cache; None to overlay.
    overlay: tuple[pd.DataFrame, pd.DataFrame, list[str]] | None = None
    impervious: ClassGrid | None = None  # the impervious-share grid, if the project names one


@dataclass
class ChunkOutput:
    """The results of one chunk, all SI.

    A run that streams rows into its output clears ``storm_series``,
    ``parameters`` and ``storm_units`` once they are written.
    """

    index: int
    units: pd.DataFrame
    coverage: pd.DataFrame
    parameters: pd.DataFrame | None
    parameter_sources: pd.DataFrame
    notes: list[str]
    storm_subcatchments: list[pd.DataFrame]
    storm_units: list[pd.DataFrame]
    storm_series: list[pd.DataFrame]
    #: Lumped parameters per subcatchment, storm, method and basis (SI, long form).
    lumped_parameters: pd.DataFrame
    #: Units run, and units per loss method (kept when the unit rows are streamed away).
    unit_count: int
    method_counts: dict[str, int]
    #: The loss method of each subcatchment of the chunk.
    subcatchment_methods: pd.DataFrame
    storm_losses: list[LossResult] = field(default_factory=list)
    #: Per storm, the unit-level results the cell rasters are made from (when asked for).
    cell_units: list[pd.DataFrame] = field(default_factory=list)
    #: The overlay's own notes (also in ``notes``), for the overlay cache.
    overlay_notes: list[str] = field(default_factory=list)
    #: Distinct parts, ranges and unit totals for the uncertainty runs (``[uncertainty]``).
    uncertainty: ChunkParts | None = None


def process_chunk(task: ChunkTask) -> ChunkOutput:
    """Overlay, parameters and every storm for one chunk of subcatchments."""
    project = task.project
    inputs = Inputs(task.subcatchments, task.soil, task.cover, task.storms, task.overrides,
                    impervious=task.impervious)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", GisrunWarning)
        if task.overlay is not None:
            units, coverage, notes_overlay = task.overlay
        else:
            units, coverage, notes_overlay = overlay_inputs(project, inputs, check_codes=False)
        params, sources, notes_params = prepare_parameters(project, inputs, units)
        sub_ids = task.subcatchments["subcatchment_id"].to_numpy(dtype=object)
        rains = chunk_rains(task.storms, task.rains, project.time_step_s, sub_ids)
        results = _run_storms(project, inputs, params, rains, sub_ids,
                              keep_loss=task.keep_loss)
        if project.compare_composite and project.combine == "units":
            results = add_composite_comparison(project, inputs, params, results, sub_ids)
        results = add_connected_comparison(project, inputs, units, results, sub_ids)
        lumped = lumped_parameter_table(project, inputs, params, results, sub_ids)
        cell_units = (_cell_units(task, inputs, units, results, sub_ids, rains) if task.cells
                      else [])
        bands = chunk_uncertainty(project, inputs, params, results, sub_ids)
    notes = [str(n) for n in (*notes_overlay, *notes_params)]
    notes += [str(w.message) for w in caught if issubclass(w.category, GisrunWarning)]
    return ChunkOutput(
        index=task.index, units=units, coverage=coverage, parameters=params,
        parameter_sources=sources, notes=notes,
        storm_subcatchments=[r.subcatchments for r in results],
        storm_units=[r.units for r in results],
        storm_series=[r.series for r in results],
        storm_losses=[r.loss for r in results] if task.keep_loss else [],
        cell_units=cell_units,
        lumped_parameters=lumped,
        overlay_notes=[str(n) for n in notes_overlay],
        unit_count=len(params),
        method_counts=params["loss_method"].value_counts(sort=False).to_dict(),
        subcatchment_methods=_subcatchment_methods(params, sub_ids, project.method),
        uncertainty=bands,
    )


def _subcatchment_methods(params: pd.DataFrame, sub_ids: NDArray[np.object_], default: str
                          ) -> pd.DataFrame:
    """Each subcatchment's loss method (its units share one; the run's for one with none)."""
    first = params.groupby("subcatchment_id", sort=False)["loss_method"].first()
    methods = first.reindex(sub_ids).fillna(default).astype(str)
    return pd.DataFrame({"subcatchment_id": sub_ids, "loss_method": methods.to_numpy()})


def _run_storms(project: Project, inputs: Inputs, params: pd.DataFrame,
                rains: Sequence[NDArray[np.float64]], sub_ids: NDArray[np.object_], *,
                keep_loss: bool) -> list[StormResult]:
    """Every storm through the chunk's units, one after the other.

    Without ``keep_loss`` each storm's step arrays (its ``LossResult``: four or six
    ``(steps, units)`` arrays) are let go as soon as its tables are made, so the chunk holds one
    storm's at a time, as :func:`chunk_size_for_budget` counts them, not every storm's until
    the chunk ends.
    """
    scale = rain_scale_for_units(project, inputs, params)
    results = []
    for h, rain in zip(inputs.storms, rains, strict=True):
        result = run_storm(params, h, project.time_step_s, sub_ids=sub_ids, rain_scale=scale,
                           rain_per_step_m=rain, runon_to=runon_target(project))
        if not keep_loss:  # (rebinds ``result`` too: it must not hold them through the next)
            result = dataclasses.replace(result, loss=None)
        results.append(result)
    return results


def _cell_units(task: ChunkTask, inputs: Inputs, units: pd.DataFrame,
                results: list[StormResult], sub_ids: NDArray[np.object_],
                rains: Sequence[NDArray[np.float64]]) -> list[pd.DataFrame]:
    """Unit-level results for the cell rasters.

    The run's own, or, when the run combines parameters per subcatchment, the units
    run here (composite parameters would hide the hot spots the rasters are for).
    """
    if task.project.combine == "units":
        return [slim_unit_results(r.units) for r in results]
    by_unit = dataclasses.replace(task.project, combine="units")
    params, _, _ = prepare_parameters(by_unit, inputs, units)
    return [slim_unit_results(r.units)
            for r in _run_storms(by_unit, inputs, params, rains, sub_ids, keep_loss=False)]


def split_overlay(cached: tuple[pd.DataFrame, pd.DataFrame, list[str]],
                  subs: gpd.GeoDataFrame, chunks: list[np.ndarray]
                  ) -> list[tuple[pd.DataFrame, pd.DataFrame, list[str]]]:
    """Split a stored overlay (units, coverage, notes) into the chunks' rows, in layer order.

    The overlay's notes go with the first chunk.
    """
    units, coverage, notes = cached
    ids = subs["subcatchment_id"].to_numpy(dtype=object)
    unit_rows = units.groupby("subcatchment_id", sort=False).indices
    cover_rows = coverage.groupby("subcatchment_id", sort=False).indices
    empty = np.empty(0, dtype=np.intp)
    out = []
    for k, rows in enumerate(chunks):
        u = np.concatenate([unit_rows.get(i, empty) for i in ids[rows]])
        c = np.concatenate([cover_rows.get(i, empty) for i in ids[rows]])
        out.append((units.iloc[u].reset_index(drop=True), coverage.iloc[c].reset_index(drop=True),
                    notes if k == 0 else []))
    return out
