"""The whole run: read, overlay, parameters and every storm, chunk by chunk; write nothing.

:func:`run` reads the inputs once, resamples each storm once onto the run's
step, cuts the subcatchments into chunks sized to the memory budget
(:mod:`gisrun.workflow.chunks`), runs the chunks (in turn or on dask workers),
puts their results back in the layer's order and returns a frozen
:class:`gisrun.model.RunResult` that the writers draw from.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import os
import warnings
from collections.abc import Callable, Iterable
from pathlib import Path

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..config.project import load_project
from ..engine import LossResult
from ..errors import GisrunWarning
from ..grid.polygons import ClassPolygons
from ..io.overlay_cache import load_overlay, overlay_key, save_overlay
from ..model import CellRasters, Inputs, RunResult, StormResult
from ..present.layers import layer_name, storm_layer_name
from ..project import Project
from ..storm import Hyetograph, StepRain
from .bands import check_named_ids, combine_uncertainty
from .cells import compute_cells
from .checksums import dataset_files, file_sha256, input_checksums
from .chunks import (
    ChunkLoad,
    ChunkOutput,
    ChunkTask,
    chunk_size_for_budget,
    plan_chunks,
    sample_rows,
    split_overlay,
)
from .disconnection import runon_target
from .execution import execute
from .inputs import check_inputs_codes, read_inputs
from .rain import chunk_storms, run_rains, run_steps, whole_rains
from .steps import compact_sources, overlay_inputs

__all__ = ["KEEP_STEP_ARRAYS_BELOW", "Progress", "SeriesSink", "UnitSink", "run"]

#: ``progress(text)`` as each step starts.
Progress = Callable[[str], None]
#: ``sink(storm_index, storm_name, series)`` for one chunk's excess series (SI).
SeriesSink = Callable[[int, str, pd.DataFrame], None]
#: ``sink(parameters, [(storm_name, unit_results), ...])`` for one chunk's unit rows (SI).
UnitSink = Callable[[pd.DataFrame, list[tuple[str, pd.DataFrame]]], None]
Overlay = tuple[pd.DataFrame, pd.DataFrame, list[str]]

#: Below this many subcatchments a run keeps per-unit step arrays for plots.
KEEP_STEP_ARRAYS_BELOW = 5000


def _quiet(_: str) -> None:
    return None


def run(
    project: Project | str | Path,
    *,
    inputs: Inputs | None = None,
    progress: Progress | None = None,
    workers: int | None = None,
    scheduler: str | None = None,
    series_sink: SeriesSink | None = None,
    unit_sink: UnitSink | None = None,
    keep_loss: bool | None = True,
    cells: bool | None = None,
) -> RunResult:
    """Read the inputs, overlay, assign parameters and run every storm; write nothing.

    The subcatchments are processed in spatially compact chunks sized to the
    project's memory budget (:mod:`gisrun.workflow.chunks`); results are in the
    layer's row order whatever the chunking or the workers.

    Parameters
    ----------
    project : Project or path
        A loaded project, or a project file / folder to load.
    inputs : Inputs, optional
        The project's inputs, already read (:func:`gisrun.workflow.inputs.read_inputs`).
    progress : callable, optional
        Called with a short text as each step starts.
    workers : int, optional
        Run chunks on a local dask cluster of this many processes.
    scheduler : str, optional
        ``"synchronous"``/``"threads"`` or the address of a running dask scheduler.
    series_sink : callable, optional
        Called as ``sink(storm_index, storm_name, series)`` for each chunk's
        excess-rainfall series instead of keeping them (memory stays flat); the
        storms' ``series`` are then None.
    unit_sink : callable, optional
        Called as ``sink(parameters, [(storm_name, unit_results), ...])`` with
        each chunk's unit parameters and unit results instead of keeping them;
        the result's ``parameters`` and storms' ``units`` are then None. Used
        only when the step arrays are not kept (``keep_loss`` false): a run
        small enough for plots keeps its unit rows for them.
    keep_loss : bool or None
        Keep the per-unit step arrays (:class:`LossResult`) for plots; None keeps
        them below :data:`KEEP_STEP_ARRAYS_BELOW` subcatchments.
    cells : bool or None
        Make the cell-level values for the rasters (``RunResult.cells``); None
        makes them when the step arrays are kept.

    Raises
    ------
    GisrunError
        On any bad input, naming the file, field or value.
    """
    say = progress or _quiet
    if not isinstance(project, Project):
        project = load_project(project)
    started = _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", GisrunWarning)
        say("reading inputs")
        inputs = read_inputs(project) if inputs is None else inputs
        check_inputs_codes(project, inputs)
        check_named_ids(project, inputs)
    if keep_loss is None:
        keep_loss = len(inputs.subcatchments) < KEEP_STEP_ARRAYS_BELOW
    project, lumping_note = _lumping_for_size(project, len(inputs.subcatchments))
    cells = keep_loss if cells is None else cells
    cells, cells_note = _cells_possible(inputs, cells)
    if keep_loss:  # a run small enough to keep its step arrays keeps its unit rows too
        unit_sink = None
    rains, resampled = run_rains(project, inputs)
    datasets = dataset_files(project)
    checksums = input_checksums(project, datasets)
    with warnings.catch_warnings(record=True) as refused:
        warnings.simplefilter("always", GisrunWarning)
        cache_key, cached = _cached_overlay(project, datasets, checksums)
    tasks = _tasks(project, inputs, rains, cached, keep_loss=keep_loss, cells=cells)
    if cached is not None:
        say(f"overlay read from the cache ({project.overlay_cache.name}/overlay-{cache_key})")
    say(f"overlay, parameters and {len(inputs.storms)} storm(s) in {len(tasks)} chunk(s)")
    outputs = list(_stream(execute(tasks, workers=workers, scheduler=scheduler), inputs,
                           series_sink, unit_sink))
    warned = [str(w.message) for w in [*caught, *refused] if issubclass(w.category, GisrunWarning)]
    notes = [*inputs.notes, *lumping_note, *cells_note, *warned, *resampled]
    notes += [n for out in outputs for n in out.notes]
    cell_rasters = None
    if cells:
        say("cell values")
        cell_rasters = compute_cells(project, inputs, [
            pd.concat([o.cell_units[k] for o in outputs], ignore_index=True)
            for k in range(len(inputs.storms))])
        notes += list(cell_rasters.notes)
    result = _combine(project, inputs, whole_rains(project, inputs, rains), outputs, started,
                      notes, checksums=checksums, cells=cell_rasters)
    if cache_key is not None and cached is None:
        overlay_notes = list(dict.fromkeys(n for out in outputs for n in out.overlay_notes))
        save_overlay(project.overlay_cache, cache_key, result.units, result.coverage,
                     overlay_notes)
    return result


def _lumping_for_size(project: Project, n_subcatchments: int) -> tuple[Project, list[str]]:
    """``lumped_parameters = "auto"``: solve below KEEP_STEP_ARRAYS_BELOW subcatchments, else off.

    The equivalent and fitted sets take root searches per subcatchment and storm and a table
    kept for the whole run; a large run makes them only when the project asks (``"solve"``).
    """
    notes = [] if runon_target(project) is None or project.lumped_parameters == "off" else [
        "lumped parameters describe each subcatchment with every impervious area connected (a "
        "lumped model has no run-on): the equivalent and fitted sets fold the disconnection "
        "into the pervious parameter, the area-weighted set leaves it out"]
    if project.lumped_parameters != "auto":
        return project, notes
    if n_subcatchments < KEEP_STEP_ARRAYS_BELOW:
        return dataclasses.replace(project, lumped_parameters="solve"), notes
    return dataclasses.replace(project, lumped_parameters="off"), [
        f"lumped parameters not made for {n_subcatchments} subcatchments (automatic above "
        f"{KEEP_STEP_ARRAYS_BELOW - 1}); set [method] lumped_parameters = \"area_weighted\" or "
        "\"solve\" to make them"]


def _cells_possible(inputs: Inputs, cells: bool) -> tuple[bool, list[str]]:
    """Cell values are made on the soil raster's grid: none when soil or cover is polygons."""
    layers = [x.where for x in (inputs.soil, inputs.cover) if isinstance(x, ClassPolygons)]
    if not cells or not layers:
        return cells, []
    return False, [f"no cell rasters: {layers[0]} is a polygon layer, and the cell values are "
                   "made on the cells of soil and cover rasters (the subcatchment and unit "
                   "results are complete)"]


def _tasks(project: Project, inputs: Inputs, rains: tuple[NDArray[np.float64] | None, ...],
           cached: Overlay | None, *, keep_loss: bool, cells: bool) -> list[ChunkTask]:
    size = _chunk_size(project, inputs, run_steps(inputs.storms, project.time_step_s), cached)
    chunks = plan_chunks(inputs.subcatchments.geometry, size)
    overlays = (split_overlay(cached, inputs.subcatchments, chunks) if cached is not None
                else [None] * len(chunks))
    ids = inputs.subcatchments["subcatchment_id"].to_numpy(dtype=object)
    return [ChunkTask(i, project, inputs.subcatchments.iloc[rows], inputs.soil, inputs.cover,
                      chunk_storms(inputs.storms, ids[rows]), rains,
                      inputs.overrides, keep_loss=keep_loss, cells=cells, overlay=overlay,
                      impervious=inputs.impervious)
            for i, (rows, overlay) in enumerate(zip(chunks, overlays, strict=True))]


def _stream(outputs: Iterable[ChunkOutput], inputs: Inputs, series_sink: SeriesSink | None,
            unit_sink: UnitSink | None) -> Iterable[ChunkOutput]:
    """Hand each chunk's rows to the sinks as it finishes, keeping only what is left."""
    for out in outputs:
        if series_sink is not None:
            for k, h in enumerate(inputs.storms):
                series_sink(k, h.name, out.storm_series[k])
            out.storm_series = []
        if unit_sink is not None:
            unit_sink(out.parameters, [(h.name, out.storm_units[k])
                                       for k, h in enumerate(inputs.storms)])
            out.parameters, out.storm_units = None, []
        yield out


def _chunk_size(project: Project, inputs: Inputs, n_steps: int, cached: Overlay | None) -> int:
    """Subcatchments per chunk for the memory budget, from the load measured on samples.

    Without a cached overlay, a few compact samples of polygons are overlaid first (and
    thrown away) to learn how many units and raster cells a subcatchment brings here; a
    project that fits in one chunk even at a cautious guess is not sampled.
    """
    subs = inputs.subcatchments

    areal = sum(h.areal is not None for h in inputs.storms)

    def size(load: ChunkLoad) -> int:
        if runon_target(project) is not None:  # run-on: a second engine pass and two more
            load = dataclasses.replace(  # step arrays; counted as twice the units (not measured)
                load, units_per_subcatchment=2.0 * load.units_per_subcatchment)
        return chunk_size_for_budget(project.memory_budget_mb, n_steps, len(inputs.storms), load,
                                     areal_storms=areal)

    cells = _cells_per_subcatchment(inputs)
    if cached is not None:
        return size(ChunkLoad(len(cached[0]) / max(len(subs), 1), cells))
    if len(subs) <= size(ChunkLoad(cells_per_subcatchment=cells)):
        return len(subs)
    counts = []
    for rows in sample_rows(subs.geometry):
        sample = Inputs(subs.iloc[rows], inputs.soil, inputs.cover, (), None)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", GisrunWarning)
            units, _, _ = overlay_inputs(project, sample, check_codes=False)
        counts.append(len(units) / len(rows))
    return size(ChunkLoad(max(counts), cells))


def _cells_per_subcatchment(inputs: Inputs) -> float:
    """Mean polygon area in cells of the finer raster (in each raster's own CRS)."""
    best = 0.0
    for raster in (inputs.soil, inputs.cover, inputs.impervious):
        if raster is None or isinstance(raster, ClassPolygons):
            continue
        geoms = inputs.subcatchments.geometry
        if geoms.crs is not None and raster.crs is not None and geoms.crs != raster.crs:
            geoms = geoms.to_crs(raster.crs)
        t = raster.transform
        with warnings.catch_warnings():  # planar area in degrees for a geographic CRS, as
            warnings.simplefilter("ignore", UserWarning)  # is the cell: the ratio holds
            area = float(geoms.area.mean())
        best = max(best, area / abs(t.a * t.e))
    return best


def _cached_overlay(project: Project, datasets: dict[Path, list[Path] | None],
                    checksums: dict[str, str]) -> tuple[str | None, Overlay | None]:
    """(key, stored overlay or None) when the project asks for an overlay cache.

    The key covers every file GDAL reads for the three datasets (a shapefile's ``.dbf``, a
    VRT's sources, a GeoPackage's ``-wal``); where those files cannot be told the cache is
    not used, with a warning, rather than risk serving an overlay of other polygons.
    """
    if project.overlay_cache is None:
        return None, None
    unknown = [str(named) for named, files in datasets.items() if files is None]
    if unknown:
        warnings.warn(GisrunWarning(
            f"{unknown[0]}: the overlay cache was not used, as the files GDAL reads for this "
            "dataset cannot be listed (give a GeoPackage, shapefile, GeoJSON, FlatGeobuf or "
            "a local raster to use the cache)"), stacklevel=3)
        return None, None
    digests = []
    for files in datasets.values():
        for f in files or ():
            name = os.path.relpath(f, project.base_dir)
            digests.append(f"{name}={checksums.get(name) or file_sha256(f)}")
    key = overlay_key(project, digests)
    return key, load_overlay(project.overlay_cache, key)


def _combine(project: Project, inputs: Inputs, rains: tuple[StepRain, ...],
             outputs: list[ChunkOutput], started: str, notes: list[str], *,
             checksums: dict[str, str], cells: CellRasters | None) -> RunResult:
    """Put chunk outputs together in the subcatchment layer's row order."""
    ordered = _layer_order(inputs)
    kept_units = all(o.parameters is not None for o in outputs)
    coverage = ordered([o.coverage for o in outputs])
    counts: dict[str, int] = {}
    for o in outputs:
        for method, count in o.method_counts.items():
            counts[method] = counts.get(method, 0) + int(count)
    return RunResult(
        project=project,
        subcatchments=inputs.subcatchments,
        units=ordered([o.units for o in outputs]),
        coverage=coverage,
        parameters=(pd.concat([o.parameters for o in outputs], ignore_index=True)
                    if kept_units else None),
        parameter_sources=compact_sources(
            pd.concat([o.parameter_sources for o in outputs], ignore_index=True)),
        storms=tuple(_storm(k, h, rains[k], outputs, ordered, kept_units)
                     for k, h in enumerate(inputs.storms)),
        lumped_parameters=ordered([o.lumped_parameters for o in outputs]),
        subcatchment_methods=ordered([o.subcatchment_methods for o in outputs]),
        unit_count=sum(o.unit_count for o in outputs),
        method_counts=dict(sorted(counts.items(), key=lambda kv: -kv[1])),
        raster_crs=inputs.soil.crs,
        warnings=tuple(dict.fromkeys(notes)),
        started_utc=started,
        checksums=checksums,
        cells=cells,
        uncertainty=combine_uncertainty(project, inputs, [o.uncertainty for o in outputs],
                                        rains, ordered, coverage),
    )


def _storm(k: int, hyetograph: Hyetograph, rain: StepRain, outputs: list[ChunkOutput],
           ordered: Callable[[list[pd.DataFrame]], pd.DataFrame], kept_units: bool
           ) -> StormResult:
    kept_series = all(o.storm_series for o in outputs)
    return StormResult(
        hyetograph=hyetograph,
        step_rain=rain,
        layer_name=storm_layer_name(hyetograph.name),
        file_stem=layer_name(hyetograph.name),
        subcatchments=ordered([o.storm_subcatchments[k] for o in outputs]),
        series=ordered([o.storm_series[k] for o in outputs]) if kept_series else None,
        units=(pd.concat([o.storm_units[k] for o in outputs], ignore_index=True)
               if kept_units else None),
        loss=_concat_losses([o.storm_losses[k] for o in outputs if o.storm_losses]),
    )


def _layer_order(inputs: Inputs) -> Callable[[list[pd.DataFrame]], pd.DataFrame]:
    """A function concatenating frames and sorting their rows into the layer's order."""
    sub_ids = inputs.subcatchments["subcatchment_id"]
    position = pd.Series(np.arange(len(sub_ids)), index=sub_ids.to_numpy(dtype=object))

    def ordered(frames: list[pd.DataFrame]) -> pd.DataFrame:
        frame = pd.concat(frames, ignore_index=True)
        key = position.reindex(frame["subcatchment_id"].to_numpy(dtype=object)).to_numpy()
        return frame.iloc[np.argsort(key, kind="stable")].reset_index(drop=True)

    return ordered


def _concat_losses(losses: list[LossResult]) -> LossResult | None:
    if not losses:
        return None
    if len(losses) == 1:
        return losses[0]

    def join(name: str) -> NDArray[np.float64]:
        return np.concatenate([getattr(x, name) for x in losses], axis=-1)

    return LossResult(
        rain_m=join("rain_m"), infil_m=join("infil_m"), excess_m=join("excess_m"),
        capacity_m_per_s=join("capacity_m_per_s"), storage_m=join("storage_m"),
        time_to_ponding_s=join("time_to_ponding_s"), dt_s=losses[0].dt_s,
        methods=tuple(m for x in losses for m in x.methods),
    )
