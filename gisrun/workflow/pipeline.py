"""The run, step by step: the only module that calls both the readers and the computation.

A notebook user can call each step and look at what it returns::

    project = load_project("demo_catchment")
    inputs = read_inputs(project)
    units, coverage, notes = overlay_inputs(project, inputs)
    params, sources, notes = prepare_parameters(project, inputs, units)
    storm = run_storm(params, inputs.storms[0], project.time_step_s, sub_ids=...)

or all of it with :func:`run`, then :func:`write_outputs`.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import os
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

from ..aggregate import (
    area_weights,
    soil_shares,
    subcatchment_series,
    summarize_subcatchments,
    summarize_units,
)
from ..config.project import Project, load_project
from ..config.storms import storms_from_config
from ..engine import LossResult, method_name, run_losses
from ..errors import GisrunWarning, ParameterError, RasterError, VectorError
from ..grid.overlay import compute_unit_areas
from ..io.raster import ClassRaster, read_class_raster
from ..io.tables import read_parameter_overrides
from ..io.vector import read_subcatchments
from ..parameters import assign_parameters, composite_parameters
from ..present.model_inputs import join_model_inputs
from ..storm import Hyetograph

__all__ = [
    "CAUTION",
    "Inputs",
    "StormResult",
    "RunResult",
    "read_inputs",
    "overlay_inputs",
    "prepare_parameters",
    "run_storm",
    "run",
    "load_project",
    "read_subcatchment_layer",
    "read_soil",
    "read_cover",
    "read_storms",
    "read_overrides",
    "check_raster_codes",
    "input_checksums",
    "subcatchment_table",
]

#: Printed by the CLI, written into the run table and the report.
CAUTION = (
    "Planning-level estimates only. Runoff figures depend on published typical parameters and "
    "simplified loss methods; before sizing drains or judging flood risk, check them against "
    "local codes and agency methods and have them reviewed by a licensed engineer."
)

Progress = Callable[[str], None]

#: Below this many subcatchments a CLI run keeps per-unit step arrays for plots.
KEEP_STEP_ARRAYS_BELOW = 5000


@dataclass
class Inputs:
    """Everything read from disk for a run, checked and in SI."""

    subcatchments: gpd.GeoDataFrame
    soil: ClassRaster
    cover: ClassRaster | None
    storms: list[Hyetograph]
    overrides: pd.DataFrame | None = None


@dataclass
class StormResult:
    """Results of one storm: per unit, per subcatchment, and the step series."""

    hyetograph: Hyetograph
    rain_per_step_m: np.ndarray
    loss: LossResult | None  # None when the run was asked not to keep step arrays
    units: pd.DataFrame | None  # None when the unit rows went to a unit sink
    subcatchments: pd.DataFrame
    series: pd.DataFrame

    @property
    def name(self) -> str:
        """The storm's name."""
        return self.hyetograph.name


@dataclass
class RunResult:
    """A whole run: inputs' overlay, parameters, and one :class:`StormResult` per storm.

    ``parameters`` and each storm's ``units`` are None when the run streamed its
    unit rows to a unit sink (see :func:`run`); ``unit_count``, ``method_counts``
    and ``model_inputs`` are kept either way.
    """

    project: Project
    subcatchments: gpd.GeoDataFrame
    units: pd.DataFrame
    coverage: pd.DataFrame
    parameters: pd.DataFrame | None
    parameter_sources: pd.DataFrame
    storms: list[StormResult]
    warnings: list[str] = field(default_factory=list)
    started_utc: str = ""
    checksums: dict[str, str] = field(default_factory=dict)
    #: Number of units (soil x cover x surface parts) that were run.
    unit_count: int = 0
    #: Units per loss method, most used first.
    method_counts: dict[str, int] = field(default_factory=dict)
    #: Per-subcatchment parameters for a drainage model, SI
    #: (see :mod:`gisrun.present.model_inputs`).
    model_inputs: pd.DataFrame | None = None


def _quiet(_: str) -> None:
    return None


def read_subcatchment_layer(project: Project) -> gpd.GeoDataFrame:
    """Read the subcatchment polygons with the fields the run needs."""
    src = project.subcatchments
    keep = tuple(dict.fromkeys(
        f for f in (src.method_field, project.rain_scale_field, *src.parameter_fields) if f))
    return read_subcatchments(src.path, id_field=src.id_field, layer=src.layer, crs=src.crs,
                              keep_fields=keep)


def read_soil(project: Project) -> ClassRaster:
    """Open the soil raster and check it against the project's code table."""
    return read_class_raster(project.soil.path, codes=project.soil.codes,
                             where=f"{project.soil.path} ({project.where('soil', 'path')})",
                             crs=project.soil.crs)


def read_cover(project: Project) -> ClassRaster | None:
    """Open the land-cover raster, if the project names one."""
    if project.cover is None:
        return None
    return read_class_raster(project.cover.path, codes=project.cover.codes,
                             where=f"{project.cover.path} ({project.where('cover', 'path')})",
                             crs=project.cover.crs)


def read_storms(project: Project) -> list[Hyetograph]:
    """Build every storm of the project (design storms and hyetograph files)."""
    return storms_from_config(list(project.storms), base_dir=project.base_dir,
                              units=project.units, where=f"{project.path.name}:[[storms]]")


def read_overrides(project: Project) -> pd.DataFrame | None:
    """Read the user's parameter override table, if any."""
    return read_parameter_overrides(project.overrides) if project.overrides else None


def read_inputs(project: Project) -> Inputs:
    """Read and check every input file named by the project.

    Raises
    ------
    GisrunError
        The first problem found, naming the file, field or value.
    """
    return Inputs(
        subcatchments=read_subcatchment_layer(project),
        soil=read_soil(project),
        cover=read_cover(project),
        storms=read_storms(project),
        overrides=read_overrides(project),
    )


def check_raster_codes(raster: ClassRaster, subs: gpd.GeoDataFrame | None,
                       codes: dict[int, str], where: str) -> bool:
    """Raise if the raster holds, under the subcatchments, codes missing from ``codes``.

    With ``subs`` None the whole raster is scanned.

    Raises
    ------
    RasterError
        Listing the unknown codes and the project file table to add them to.
    """
    bounds = None if subs is None else _bounds_in(subs, raster.crs)
    unknown = raster.unknown_codes(codes, bounds)
    if len(unknown):
        listed = ", ".join(str(int(c)) for c in sorted(unknown)[:10])
        raise RasterError(
            Path(raster.path).name, f"holds codes {listed} that {where}.codes does not list",
            "add each code and its class to that table in the project file",
        )
    return True


def _bounds_in(subs: gpd.GeoDataFrame, crs: object) -> tuple[float, float, float, float]:
    """The polygons' bounds in another CRS (densified edges, so the box still covers them)."""
    from pyproj import CRS, Transformer

    bounds = tuple(float(v) for v in subs.total_bounds)
    if CRS.from_user_input(subs.crs) == CRS.from_user_input(crs):
        return bounds
    transformer = Transformer.from_crs(subs.crs, crs, always_xy=True)
    return tuple(transformer.transform_bounds(*bounds, densify_pts=21))


def overlay_inputs(project: Project, inputs: Inputs, *, check_codes: bool = True
                   ) -> tuple[pd.DataFrame, pd.DataFrame, list]:
    """Areas of every (subcatchment, soil class, cover class) unit, and nodata per subcatchment.

    Raises
    ------
    RasterError
        If a raster holds codes its code table does not list, or nodata exceeds the limit.
    """
    if check_codes:
        check_inputs_codes(project, inputs)
    return compute_unit_areas(
        inputs.subcatchments, inputs.soil, inputs.cover,
        soil_codes=project.soil.codes,
        cover_codes=project.cover.codes if project.cover else None,
        nodata_rule=project.nodata_rule,
        max_nodata_fraction=project.max_nodata_fraction,
    )


def check_inputs_codes(project: Project, inputs: Inputs) -> None:
    """Check both rasters' codes under the subcatchments (see :func:`check_raster_codes`)."""
    check_raster_codes(inputs.soil, inputs.subcatchments, project.soil.codes,
                       project.where("soil"))
    if inputs.cover is not None and project.cover is not None:
        check_raster_codes(inputs.cover, inputs.subcatchments, project.cover.codes,
                           project.where("cover"))


def prepare_parameters(
    project: Project, inputs: Inputs, units: pd.DataFrame
) -> tuple[pd.DataFrame, pd.DataFrame, list]:
    """Unit parameters (SI) from the published tables and the user's overrides."""
    attributes = _subcatchment_attributes(project, inputs.subcatchments)
    params, sources, notes = assign_parameters(
        units,
        classification=project.soil.classification,
        dual_group_condition=project.soil.dual_group_condition,
        initial_saturation=project.soil.initial_saturation,
        method=project.method,
        overrides=inputs.overrides,
        subcatchment_attributes=attributes,
        initial_abstraction_ratio=project.initial_abstraction_ratio,
        antecedent_condition=project.antecedent_condition,
        initial_water_content=project.soil.initial_water_content,
        compact_provenance=True,
    )
    if project.combine == "composite":
        params = composite_parameters(params)
    return params.reset_index(drop=True), compact_sources(pd.DataFrame(sources)), list(notes)


_SOURCE_KEYS = ["parameter", "source", "soil_class", "cover_class", "surface"]


def compact_sources(sources: pd.DataFrame) -> pd.DataFrame:
    """One row per parameter, source and soil x cover x surface, with the count of unit parts.

    A source specific to one subcatchment names it in its text (``...id=S12``),
    so nothing is lost by not repeating every subcatchment's rows.
    """
    if sources.empty or not set(_SOURCE_KEYS) <= set(sources.columns):
        return sources
    counts = sources["unit_parts"] if "unit_parts" in sources.columns else pd.Series(
        1, index=sources.index)
    frame = sources[_SOURCE_KEYS].assign(unit_parts=counts.to_numpy())
    return (frame.groupby(_SOURCE_KEYS, dropna=False, sort=True)["unit_parts"].sum()
            .reset_index())


def _subcatchment_attributes(project: Project, subs: gpd.GeoDataFrame) -> pd.DataFrame | None:
    """Per-subcatchment method choice and parameter values from the layer's fields."""
    attrs = pd.DataFrame({"subcatchment_id": subs["subcatchment_id"]})
    field_name = project.subcatchments.method_field
    if field_name:
        methods = subs[field_name].astype(object).where(subs[field_name].notna(), None)
        where = f"{project.subcatchments.path.name}:{field_name}"
        attrs["loss_method"] = [
            method_name(v, where=f"{where}:id={sid}", error=VectorError)
            if isinstance(v, str) and v.strip() else None
            for sid, v in zip(attrs["subcatchment_id"], methods, strict=True)]
    for name in project.subcatchments.parameter_fields:
        attrs[name] = subs[name].to_numpy()
    values = attrs.drop(columns="subcatchment_id")
    attrs = attrs[values.notna().any(axis=1).to_numpy()] if values.shape[1] else attrs.iloc[:0]
    return attrs if len(attrs) else None


def run_storm(
    params: pd.DataFrame,
    hyetograph: Hyetograph,
    dt_s: float,
    *,
    sub_ids: np.ndarray,
    rain_scale: np.ndarray | None = None,
) -> StormResult:
    """Run every unit through one storm and aggregate to subcatchments (all SI)."""
    rain = hyetograph.resample(dt_s)
    rain_units = rain if rain_scale is None else rain[:, None] * rain_scale[None, :]
    loss = run_losses(params, rain_units, dt_s)
    units = summarize_units(loss, params, dt_s)
    weights = area_weights(params["subcatchment_id"], params["area_m2"].to_numpy(), sub_ids)
    series = subcatchment_series(loss, params, sub_ids, dt_s, weights=weights)
    excess = series["excess_m"].to_numpy().reshape(len(sub_ids), rain.shape[0])  # sub-major
    subs = summarize_subcatchments(loss, params, sub_ids, dt_s, weights=weights,
                                   excess_by_subcatchment=excess)
    for name in ("rain", "infiltration", "excess"):
        series[f"{name}_intensity_m_per_s"] = series[f"{name}_m"] / dt_s
    return StormResult(hyetograph, rain, loss, units, subs, series)


def add_composite_comparison(project: Project, inputs: Inputs, params: pd.DataFrame,
                             results: list[StormResult], sub_ids: np.ndarray) -> None:
    """Run area-weighted composite parameters too, and add their figures beside each result.

    Adds ``composite_runoff_depth_m``, ``composite_time_to_ponding_s`` and
    ``aggregation_difference_m`` (composite minus per-unit runoff depth) to each
    storm's subcatchment table, so the bias of lumping a subcatchment's soils
    into one parameter set is visible.
    """
    composite = composite_parameters(params).reset_index(drop=True)
    scale = rain_scale_for_units(project, inputs, composite)
    for result in results:
        lumped = run_storm(composite, result.hyetograph, project.time_step_s, sub_ids=sub_ids,
                           rain_scale=scale).subcatchments
        subs = result.subcatchments
        subs["composite_runoff_depth_m"] = lumped["runoff_depth_m"].to_numpy()
        subs["composite_time_to_ponding_s"] = lumped["time_to_ponding_s"].to_numpy()
        subs["aggregation_difference_m"] = (subs["composite_runoff_depth_m"]
                                            - subs["runoff_depth_m"])


def rain_scale_for_units(project: Project, inputs: Inputs, params: pd.DataFrame
                         ) -> np.ndarray | None:
    """Per-unit factor on storm depth from the subcatchment attribute, if the project names one."""
    field_name = project.rain_scale_field
    if not field_name:
        return None
    subs = inputs.subcatchments
    factor = pd.to_numeric(subs[field_name], errors="coerce")
    bad = subs.loc[~np.isfinite(factor) | (factor < 0), "subcatchment_id"]
    if len(bad):
        raise ParameterError(
            f"{project.subcatchments.path.name}:{field_name}:id={bad.iloc[0]}",
            "is not a non-negative number", "give every subcatchment a rain depth factor",
        )
    by_id = pd.Series(factor.to_numpy(), index=subs["subcatchment_id"])
    return by_id.reindex(params["subcatchment_id"]).to_numpy(dtype=np.float64)


SeriesSink = Callable[[int, str, pd.DataFrame], None]
#: ``sink(parameters, [(storm_name, unit_results), ...])`` for one chunk's unit rows (SI).
UnitSink = Callable[[pd.DataFrame, list[tuple[str, pd.DataFrame]]], None]


def run(
    project: Project | str | Path,
    *,
    progress: Progress | None = None,
    workers: int | None = None,
    scheduler: str | None = None,
    series_sink: SeriesSink | None = None,
    unit_sink: UnitSink | None = None,
    keep_loss: bool | None = True,
) -> RunResult:
    """Read the inputs, overlay, assign parameters and run every storm; write nothing.

    The subcatchments are processed in spatially compact chunks sized to the
    project's memory budget (:mod:`gisrun.workflow.chunks`); results are in the
    layer's row order whatever the chunking or the workers.

    Parameters
    ----------
    project : Project or path
        A loaded project, or a project file / folder to load.
    progress : callable, optional
        Called with a short text as each step starts.
    workers : int, optional
        Run chunks on a local dask cluster of this many processes.
    scheduler : str, optional
        ``"synchronous"``/``"threads"`` or the address of a running dask scheduler.
    series_sink : callable, optional
        Called as ``sink(storm_index, storm_name, series)`` for each chunk's
        excess-rainfall series instead of keeping them (memory stays flat).
    unit_sink : callable, optional
        Called as ``sink(parameters, [(storm_name, unit_results), ...])`` with
        each chunk's unit parameters and unit results instead of keeping them;
        the result's ``parameters`` and storms' ``units`` are then None. Used
        only when the step arrays are not kept (``keep_loss`` false): a run
        small enough for plots keeps its unit rows for them.
    keep_loss : bool or None
        Keep the per-unit step arrays (:class:`LossResult`) for plots; None keeps
        them below :data:`KEEP_STEP_ARRAYS_BELOW` subcatchments.

    Returns
    -------
    RunResult

    Raises
    ------
    GisrunError
        On any bad input, naming the file, field or value.
    """
    from .chunks import ChunkTask, execute, plan_chunks, split_overlay

    say = progress or _quiet
    if not isinstance(project, Project):
        project = load_project(project)
    started = _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", GisrunWarning)
        say("reading inputs")
        inputs = read_inputs(project)
        check_inputs_codes(project, inputs)
    if keep_loss is None:
        keep_loss = len(inputs.subcatchments) < KEEP_STEP_ARRAYS_BELOW
    if keep_loss:  # a run small enough to keep its step arrays keeps its unit rows too
        unit_sink = None
    checksums = input_checksums(project)
    cache_key, cached = _cached_overlay(project, checksums)
    size = _chunk_size(project, inputs, cached)
    chunks = plan_chunks(inputs.subcatchments.geometry, size)
    overlays = (split_overlay(cached, inputs.subcatchments, chunks) if cached is not None
                else [None] * len(chunks))
    tasks = [ChunkTask(i, project, inputs.subcatchments.iloc[rows], inputs.soil, inputs.cover,
                       inputs.storms, inputs.overrides, keep_loss=keep_loss, overlay=overlay)
             for i, (rows, overlay) in enumerate(zip(chunks, overlays, strict=True))]
    if cached is not None:
        say(f"overlay read from the cache ({project.overlay_cache.name}/overlay-{cache_key})")
    say(f"overlay, parameters and {len(inputs.storms)} storm(s) in {len(tasks)} chunk(s)")
    outputs = []
    for out in execute(tasks, workers=workers, scheduler=scheduler):
        if series_sink is not None:
            for k, h in enumerate(inputs.storms):
                series_sink(k, h.name, out.storm_series[k])
            out.storm_series = []
        if unit_sink is not None:
            unit_sink(out.parameters, [(h.name, out.storm_units[k])
                                       for k, h in enumerate(inputs.storms)])
            out.parameters, out.storm_units = None, []
        outputs.append(out)
    notes = [str(w.message) for w in caught if issubclass(w.category, GisrunWarning)]
    notes += [n for out in outputs for n in out.notes]
    result = _combine(project, inputs, outputs, started, notes, keep_series=series_sink is None,
                      checksums=checksums)
    if cache_key is not None and cached is None:
        from ..io.overlay_cache import save_overlay

        overlay_notes = list(dict.fromkeys(n for out in outputs for n in out.overlay_notes))
        save_overlay(project.overlay_cache, cache_key, result.units, result.coverage,
                     overlay_notes)
    return result


def _chunk_size(project: Project, inputs: Inputs,
                cached: tuple[pd.DataFrame, pd.DataFrame, list[str]] | None) -> int:
    """Subcatchments per chunk for the memory budget, from the load measured on samples.

    Without a cached overlay, a few compact samples of polygons are overlaid first (and
    thrown away) to learn how many units and raster cells a subcatchment brings here; a
    project that fits in one chunk even at a cautious guess is not sampled.
    """
    from .chunks import ChunkLoad, chunk_size_for_budget, sample_rows

    n_steps = max(len(h.resample(project.time_step_s)) for h in inputs.storms)
    subs = inputs.subcatchments

    def size(load: ChunkLoad) -> int:
        return chunk_size_for_budget(project.memory_budget_mb, n_steps, len(inputs.storms), load)

    cells = _cells_per_subcatchment(inputs)
    if cached is not None:
        return size(ChunkLoad(len(cached[0]) / max(len(subs), 1), cells))
    if len(subs) <= size(ChunkLoad(cells_per_subcatchment=cells)):
        return len(subs)
    counts = []
    for rows in sample_rows(subs.geometry):
        sample = Inputs(subs.iloc[rows], inputs.soil, inputs.cover, [], None)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", GisrunWarning)
            units, _, _ = overlay_inputs(project, sample, check_codes=False)
        counts.append(len(units) / len(rows))
    return size(ChunkLoad(max(counts), cells))


def _cells_per_subcatchment(inputs: Inputs) -> float:
    """Mean polygon area in cells of the finer raster (in each raster's own CRS)."""
    best = 0.0
    for raster in (inputs.soil, inputs.cover):
        if raster is None:
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


def _cached_overlay(project: Project, checksums: dict[str, str]
                    ) -> tuple[str | None, tuple[pd.DataFrame, pd.DataFrame, list[str]] | None]:
    """(key, stored overlay or None) when the project asks for an overlay cache."""
    if project.overlay_cache is None:
        return None, None
    from ..io.overlay_cache import load_overlay, overlay_key

    files = [project.subcatchments.path, project.soil.path]
    if project.cover:
        files.append(project.cover.path)
    digests = [checksums.get(os.path.relpath(f, project.base_dir)) or _sha256(Path(f))
               for f in files]
    key = overlay_key(project, digests)
    return key, load_overlay(project.overlay_cache, key)


def _combine(project: Project, inputs: Inputs, outputs: list, started: str, notes: list[str],
             *, keep_series: bool, checksums: dict[str, str]) -> RunResult:
    """Put chunk outputs together in the subcatchment layer's row order."""
    sub_ids = inputs.subcatchments["subcatchment_id"]
    position = pd.Series(np.arange(len(sub_ids)), index=sub_ids.to_numpy(dtype=object))

    def ordered(frames: list[pd.DataFrame]) -> pd.DataFrame:
        frame = pd.concat(frames, ignore_index=True)
        key = position.reindex(frame["subcatchment_id"].to_numpy(dtype=object)).to_numpy()
        return frame.iloc[np.argsort(key, kind="stable")].reset_index(drop=True)

    units = ordered([o.units for o in outputs])
    kept_units = all(o.parameters is not None for o in outputs)
    params = pd.concat([o.parameters for o in outputs], ignore_index=True) if kept_units else None
    counts: dict[str, int] = {}
    for o in outputs:
        for method, count in o.method_counts.items():
            counts[method] = counts.get(method, 0) + int(count)
    storms = []
    for k, hyetograph in enumerate(inputs.storms):
        loss = _concat_losses([o.storm_losses[k] for o in outputs if o.storm_losses])
        storms.append(StormResult(
            hyetograph=hyetograph,
            rain_per_step_m=hyetograph.resample(project.time_step_s),
            loss=loss,
            units=(pd.concat([o.storm_units[k] for o in outputs], ignore_index=True)
                   if kept_units else None),
            subcatchments=ordered([o.storm_subcatchments[k] for o in outputs]),
            series=(ordered([o.storm_series[k] for o in outputs]) if keep_series
                    else pd.DataFrame()),
        ))
    return RunResult(
        project=project,
        subcatchments=inputs.subcatchments,
        units=units,
        coverage=ordered([o.coverage for o in outputs]),
        parameters=params,
        parameter_sources=compact_sources(
            pd.concat([o.parameter_sources for o in outputs], ignore_index=True)),
        storms=storms,
        warnings=list(dict.fromkeys(notes)),
        started_utc=started,
        checksums=checksums,
        unit_count=sum(o.unit_count for o in outputs),
        method_counts=dict(sorted(counts.items(), key=lambda kv: -kv[1])),
        model_inputs=(ordered([join_model_inputs([o.model_inputs for o in outputs])])
                      if outputs else None),
    )


def _concat_losses(losses: list[LossResult]) -> LossResult | None:
    if not losses:
        return None
    if len(losses) == 1:
        return losses[0]
    def join(name: str) -> np.ndarray:
        return np.concatenate([getattr(x, name) for x in losses], axis=-1)

    return LossResult(
        rain_m=join("rain_m"), infil_m=join("infil_m"), excess_m=join("excess_m"),
        capacity_m_per_s=join("capacity_m_per_s"), storage_m=join("storage_m"),
        time_to_ponding_s=join("time_to_ponding_s"), dt_s=losses[0].dt_s,
        methods=tuple(m for x in losses for m in x.methods),
    )


def input_checksums(project: Project) -> dict[str, str]:
    """SHA-256 of every input file, so a result can be traced to its inputs."""
    paths = [project.path, project.subcatchments.path, project.soil.path]
    if project.cover:
        paths.append(project.cover.path)
    if project.overrides:
        paths.append(project.overrides)
    for spec in project.storms:
        for key in ("path", "idf_table"):
            if isinstance(spec.get(key), str):
                paths.append((project.base_dir / spec[key]).resolve())
    out = {}
    for path in paths:
        if Path(path).is_file():
            out[os.path.relpath(path, project.base_dir)] = _sha256(path)
    return out


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def subcatchment_table(result: RunResult, storm: StormResult) -> pd.DataFrame:
    """Subcatchment results of one storm with polygon area and soil shares (SI columns)."""
    subs = storm.subcatchments.merge(
        result.coverage, on="subcatchment_id", how="left", suffixes=("", "_coverage")
    )
    shares = soil_shares(result.units, subs["subcatchment_id"])
    return subs.merge(shares, on="subcatchment_id", how="left")
