"""Write what the engineer looks at and hands on, beside the GeoPackage.

``<output stem>_files/`` holds:

``rasters/``
    Per storm, cell-level ``runoff_depth_<unit>_<storm>.tif`` and
    ``time_to_ponding_min_<storm>.tif`` on the soil raster's grid.
``maps/``
    PNG maps and per-subcatchment infiltration plots.
``report.html``
    One self-contained HTML report (images embedded; opens offline).
``model_inputs.csv``, ``excess_series.csv``
    Per-subcatchment loss parameters and the excess-rainfall series.

Everything is built in a temporary folder beside the target and moved into
place at the end, so a failed run leaves either the old folder or none, never
half a folder. This is the only module of these outputs that opens files;
:mod:`gisrun.grid.cells`, :mod:`gisrun.present.maps`, :mod:`gisrun.present.report` and
:mod:`gisrun.present.model_inputs` compute.
"""

from __future__ import annotations

import dataclasses
import shutil
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from pyproj import CRS

from ..errors import OutputExistsError
from ..grid import cells as cellgrid
from ..grid.classes import read_padded
from ..io.files import staged_folder
from ..io.geotiff import grid_of, write_float_rasters
from ..present.layers import layer_name
from ..units import from_si

__all__ = ["Deliverables", "ExtrasOptions", "extras_folder",
           "check_plot_ids", "cell_unit_results", "write_cell_rasters", "write_deliverables",
           "write_extras",
           "write_all"]

Progress = Callable[[str, int, int], None]


@dataclass
class Deliverables:
    """Paths of everything written beside the GeoPackage (relative parts inside ``folder``)."""

    folder: Path
    rasters: dict[str, dict[str, Path]] = field(default_factory=dict)
    maps: dict[str, Path] = field(default_factory=dict)
    report: Path | None = None
    model_inputs: Path | None = None
    excess_series: Path | None = None
    notes: list[str] = field(default_factory=list)

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready paths."""
        return {
            "folder": str(self.folder),
            "rasters": {s: {k: str(p) for k, p in d.items()} for s, d in self.rasters.items()},
            "maps": {k: str(p) for k, p in self.maps.items()},
            "report": str(self.report) if self.report else None,
            "model_inputs": str(self.model_inputs) if self.model_inputs else None,
            "excess_series": str(self.excess_series) if self.excess_series else None,
        }

    def moved_to(self, folder: Path) -> Deliverables:
        """Return the same set with every path rebased from this folder to ``folder``."""
        def rebase(p: Path | None) -> Path | None:
            return None if p is None else folder / Path(p).relative_to(self.folder)
        return Deliverables(
            folder=folder,
            rasters={s: {k: rebase(p) for k, p in d.items()} for s, d in self.rasters.items()},
            maps={k: rebase(p) for k, p in self.maps.items()},
            report=rebase(self.report), model_inputs=rebase(self.model_inputs),
            excess_series=rebase(self.excess_series), notes=list(self.notes))


def extras_folder(gpkg: str | Path) -> Path:
    """``<output stem>_files`` beside the GeoPackage."""
    gpkg = Path(gpkg)
    return gpkg.with_name(f"{gpkg.stem}_files")


def cell_unit_results(result: Any, gpkg: Path | None = None) -> list[pd.DataFrame]:
    """Per-unit results of every storm for the cell rasters (soil x cover x surface units).

    With ``combine = "units"`` these are the run's own unit results (read back
    from the run's GeoPackage ``gpkg`` when the run streamed them there). With
    ``"composite"`` the units are assigned and run here (per-subcatchment
    parameters would hide the hot spots the rasters are for).
    """
    project = result.project
    if project.combine == "units":
        if any(storm.units is None for storm in result.storms):
            if gpkg is None:
                raise ValueError("the run streamed its unit results: pass its GeoPackage")
            return [_stored_unit_results(gpkg, storm.name, project.units)
                    for storm in result.storms]
        return [storm.units for storm in result.storms]
    from ..aggregate import summarize_units
    from ..engine import run_losses
    from ..workflow.pipeline import Inputs, prepare_parameters, read_overrides

    units_project = dataclasses.replace(project, combine="units")
    inputs = Inputs(subcatchments=result.subcatchments, soil=None, cover=None, storms=[],
                    overrides=read_overrides(project))
    params, _, _ = prepare_parameters(units_project, inputs, result.units)
    scale = _rain_scale(result, params)
    out = []
    for storm in result.storms:
        rain = storm.rain_per_step_m
        rain_units = rain if scale is None else rain[:, None] * scale[None, :]
        loss = run_losses(params, rain_units, project.time_step_s)
        out.append(summarize_units(loss, params, project.time_step_s))
    return out


def _stored_unit_results(gpkg: Path, storm: str, system: Any) -> pd.DataFrame:
    """One storm's rows of the GeoPackage's ``unit_results`` table, back in SI columns."""
    import pyogrio

    from ..units import present_frame, si_frame

    si = ["area_m2", "runoff_depth_m", "time_to_ponding_s"]
    shown = present_frame(pd.DataFrame({c: [0.0] for c in si}), system).columns
    keys = ["subcatchment_id", "soil_class", "cover_class", "surface"]
    quoted = storm.replace("'", "''")
    frame = pyogrio.read_dataframe(gpkg, layer="unit_results", columns=[*keys, *shown],
                                   where=f"storm = '{quoted}'", read_geometry=False)
    return si_frame(frame, system)


def _stored_ranking_top(gpkg: Path, storms: list[str], top: int, system: Any) -> pd.DataFrame:
    """The first ``top`` rows of each storm in the GeoPackage's ``ponding_rank_units`` (SI)."""
    import pyogrio

    from ..units import si_frame

    frames = []
    for storm in storms:
        quoted = storm.replace("'", "''")
        frames.append(pyogrio.read_dataframe(gpkg, layer="ponding_rank_units",
                                             where=f"storm = '{quoted}'", max_features=top,
                                             read_geometry=False))
    return si_frame(pd.concat(frames, ignore_index=True), system)


def _rain_scale(result: Any, params: pd.DataFrame) -> np.ndarray | None:
    name = result.project.rain_scale_field
    if not name:
        return None
    subs = result.subcatchments
    by_id = pd.Series(pd.to_numeric(subs[name], errors="coerce").to_numpy(),
                      index=subs["subcatchment_id"])
    return by_id.reindex(params["subcatchment_id"]).to_numpy(dtype=np.float64)


def write_cell_rasters(result: Any, folder: Path, *, overwrite: bool = False,
                       progress: Progress | None = None, gpkg: Path | None = None
                       ) -> tuple[dict[str, dict[str, Path]], list[str]]:
    """Write cell-level runoff and time-to-ponding GeoTIFFs of every storm, on the soil grid.

    ``gpkg`` is the run's GeoPackage, read for the unit results when the run
    streamed them there.

    Returns
    -------
    paths : dict
        storm name -> {"runoff": path, "time_to_ponding": path}.
    notes : list of str
        What a user should know (cover sampled at nearest cell).
    """
    from ..workflow.pipeline import read_cover, read_soil

    project = result.project
    soil, cover = read_soil(project), read_cover(project)
    soil_labels = sorted(set(project.soil.codes.values()))
    cover_labels = (sorted(set(project.cover.codes.values())) if project.cover
                    else ["unspecified"])
    sub_ids = result.subcatchments["subcatchment_id"].astype(str).tolist()
    lookup = cellgrid.unit_lookup(cell_unit_results(result, gpkg), sub_ids, soil_labels=soil_labels,
                                  cover_labels=cover_labels,
                                  fill_dominant=project.nodata_rule == "dominant")
    plan = cellgrid.plan_cells(
        _grid_coordinates(result.subcatchments, soil), soil_grid=soil, cover_grid=cover,
        soil_codes=project.soil.codes, cover_codes=project.cover.codes if project.cover else None,
        soil_labels=soil_labels, cover_labels=cover_labels)
    depth_unit = project.units.depth
    targets, paths = {}, {}
    for k, storm in enumerate(result.storms):
        stem = layer_name(storm.name)
        runoff = folder / f"runoff_depth_{depth_unit}_{stem}.tif"
        ponding = folder / f"time_to_ponding_min_{stem}.tif"
        targets[(k, "runoff")], targets[(k, "ponding")] = runoff, ponding
        paths[storm.name] = {"runoff": runoff, "time_to_ponding": ponding}
    folder.mkdir(parents=True, exist_ok=True)
    bands = _bands(plan, lookup, soil, cover, depth_unit, progress)
    write_float_rasters(targets, grid_of(soil), bands, overwrite=overwrite)
    return paths, [plan.note] if plan.note else []


def _bands(plan: cellgrid.CellPlan, lookup: cellgrid.UnitLookup, soil: Any, cover: Any,
           depth_unit: str, progress: Progress | None) -> Iterator[tuple[int, dict]]:
    step = cellgrid.rows_per_band(plan)
    for r0 in range(0, plan.height, step):
        r1 = min(r0 + step, plan.height)
        soil_block = read_padded(soil, (r0, r1), (0, plan.width))
        cover_block = None
        if cover is not None:
            rows, cols = plan.cover_window(r0, r1)
            cover_block = read_padded(cover, rows, cols)
        runoff, ponding = cellgrid.band_values(plan, lookup, r0, soil_block, cover_block)
        arrays = {}
        for k in range(runoff.shape[0]):
            arrays[(k, "runoff")] = from_si(runoff[k], depth_unit)
            arrays[(k, "ponding")] = ponding[k] / 60.0
        if progress:
            progress("cell rasters", r1, plan.height)
        yield r0, arrays


def _grid_coordinates(subs: gpd.GeoDataFrame, soil: Any) -> np.ndarray:
    """Polygons in the soil grid's (column, row) coordinates."""
    geoms = subs.geometry
    if not CRS.from_user_input(geoms.crs).equals(CRS.from_user_input(soil.crs)):
        geoms = geoms.to_crs(soil.crs)
    t = soil.transform
    return shapely.transform(geoms.to_numpy(), lambda xy: np.column_stack(
        ((xy[:, 0] - t.c) / t.a, (xy[:, 1] - t.f) / t.e)))


@dataclass(frozen=True)
class ExtrasOptions:
    """Which extras to make."""

    rasters: bool = True
    maps: bool = True
    report: bool = True
    model_inputs: bool = True
    plot_subcatchments: tuple[str, ...] = ()


def write_deliverables(result: Any, folder: Path, *, options: ExtrasOptions = ExtrasOptions(),
                       gpkg: Path | None = None, progress: Progress | None = None
                       ) -> Deliverables:
    """Write the extras into an existing, empty ``folder`` (no atomic move).

    See :func:`write_extras` for the atomic version.

    ``gpkg`` is the run's GeoPackage, read for the excess series when the run
    streamed them there instead of keeping them in memory.

    Raises
    ------
    VectorError
        A subcatchment named for plotting does not exist.
    """
    from ..io.geopackage import write_csv

    say = progress or (lambda *_: None)
    out = Deliverables(folder=folder)
    plots = _plot_ids(result, options.plot_subcatchments)
    if options.rasters:
        out.rasters, notes = write_cell_rasters(result, folder / "rasters", progress=say,
                                                gpkg=gpkg)
        out.notes += notes
    if options.model_inputs:
        say("model inputs", 0, 1)
        inputs, series = _model_tables(result, gpkg)
        out.model_inputs = write_csv(folder / "model_inputs.csv", inputs)
        if series is None:  # streamed into the GeoPackage: copy it in batches
            out.excess_series = _copy_table_to_csv(gpkg, "excess_series",
                                                   folder / "excess_series.csv")
        else:
            out.excess_series = write_csv(folder / "excess_series.csv", series)
        say("model inputs", 1, 1)
    figures = _write_maps(result, out, plots, say) if (options.maps or options.report) else None
    if not options.maps:
        shutil.rmtree(folder / "maps", ignore_errors=True)
        out.maps = {}
    if options.report and figures is not None:
        out.report = _write_report(result, out, figures, gpkg)
    return out


def _model_tables(result: Any, gpkg: Path | None) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    from ..present.layers import model_inputs_layer
    from ..present.model_inputs import excess_series_table

    system = result.project.units
    inputs = model_inputs_layer(result)
    if all(s.series is not None and len(s.series) for s in result.storms) or gpkg is None:
        return inputs, excess_series_table(result.storms, system)
    return inputs, None  # the run streamed its series into the GeoPackage


def _copy_table_to_csv(gpkg: Path, table: str, target: Path, batch_rows: int = 500_000) -> Path:
    """Copy a GeoPackage table to CSV in batches, so memory does not grow with its size."""
    import csv
    import sqlite3

    from ..io.files import atomic_target

    with atomic_target(target, overwrite=True) as tmp, \
            sqlite3.connect(f"file:{gpkg}?mode=ro", uri=True) as con, \
            open(tmp, "w", newline="", encoding="utf-8") as handle:
        cursor = con.execute(f'SELECT * FROM "{table}" ORDER BY fid')  # noqa: S608 - our name
        names = [d[0] for d in cursor.description if d[0] != "fid"]
        keep = [i for i, d in enumerate(cursor.description) if d[0] != "fid"]
        writer = csv.writer(handle)
        writer.writerow(names)
        while rows := cursor.fetchmany(batch_rows):
            writer.writerows([row[i] for i in keep] for row in rows)
    return target


def _plot_ids(result: Any, named: Sequence[str]) -> list[str]:
    return check_plot_ids(result.subcatchments, named)


def check_plot_ids(subcatchments: gpd.GeoDataFrame, named: Sequence[str]) -> list[str]:
    """Check the named subcatchment ids against the layer and return them.

    Raises
    ------
    VectorError
        Naming the first id that is not in the layer.
    """
    from ..errors import VectorError

    known = set(subcatchments["subcatchment_id"].astype(str))
    for sid in named:
        if str(sid) not in known:
            near = sorted(known)[:3]
            raise VectorError(f"subcatchment {sid!r}", "is not in the subcatchment layer",
                              f"name an existing id (e.g. {', '.join(near)})")
    return [str(s) for s in named]


def _write_maps(result: Any, out: Deliverables, named: list[str], say: Progress) -> Any:
    from ..io.geotiff import read_preview
    from ..present import maps
    from ..present.report import ReportFigures

    project = result.project
    system = project.units
    folder = out.folder / "maps"
    folder.mkdir(parents=True, exist_ok=True)
    rate = system.rate.replace("_per_", "/")
    hyeto = maps.hyetograph_plot(
        [(s.name, s.hyetograph.time_s / 60.0, from_si(s.hyetograph.intensity_m_per_s,
                                                      system.rate)) for s in result.storms],
        rate_unit=rate)
    figures = ReportFigures(hyetograph=_save(maps.figure_png(hyeto), folder / "hyetographs.png",
                                             out, "hyetographs"))
    crs = result.subcatchments.crs
    total = len(result.storms)
    for k, storm in enumerate(result.storms):
        say("maps and plots", k, total)
        stem = layer_name(storm.name)
        gdf = result.subcatchments[["subcatchment_id", "geometry"]].merge(
            storm.subcatchments, on="subcatchment_id", how="left")
        gdf["runoff"] = from_si(gdf["runoff_depth_m"].to_numpy(float), system.depth)
        gdf["ponding"] = gdf["time_to_ponding_s"] / 60.0
        images = []
        fig = maps.subcatchment_map(gdf, "runoff", title=f"Runoff depth per subcatchment, "
                                    f"{storm.name}", label=f"runoff depth ({system.depth})",
                                    crs=crs)
        images.append((f"Runoff depth per subcatchment ({system.depth}), {storm.name}",
                       _save(maps.figure_png(fig), folder / f"runoff_depth_{stem}.png", out,
                             f"runoff_depth_{stem}")))
        fig = maps.subcatchment_map(gdf, "ponding", title=f"Time to ponding, {storm.name}",
                                    label="time to ponding (min)", crs=crs, cmap="viridis",
                                    missing_label="does not pond")
        images.append((f"Time to ponding (min, earliest pervious part), {storm.name}",
                       _save(maps.figure_png(fig), folder / f"time_to_ponding_{stem}.png", out,
                             f"time_to_ponding_{stem}")))
        if storm.name in out.rasters:
            values, extent = read_preview(out.rasters[storm.name]["runoff"])
            outlines = result.subcatchments.to_crs(_raster_crs(project))
            fig = maps.raster_map(values, extent, title=f"Cell-level runoff depth, {storm.name}",
                                  label=f"runoff depth ({system.depth})",
                                  crs=_raster_crs(project), outlines=outlines)
            images.append((f"Cell-level runoff depth ({system.depth}) on the soil grid, "
                           f"{storm.name}", _save(maps.figure_png(fig), folder /
                                                  f"cell_runoff_depth_{stem}.png", out,
                                                  f"cell_runoff_depth_{stem}")))
        plotted = [] if storm.loss is None else _earliest(storm, 1)
        plotted += [s for s in named if s not in plotted and storm.loss is not None]
        for sid in plotted:
            series = maps.pervious_series(storm.loss, result.parameters, sid, project.time_step_s)
            fig = maps.infiltration_plot(
                series, title=f"{sid}, {storm.name}: pervious area", rate_unit=rate,
                to_rate=lambda v: from_si(np.asarray(v, float), system.rate))
            key = f"infiltration_{stem}_{layer_name(sid)}"
            images.append((f"Rain, infiltration capacity and infiltration over the pervious "
                           f"area of {sid}, {storm.name}",
                           _save(maps.figure_png(fig), folder / f"{key}.png", out, key)))
        figures.per_storm[storm.name] = images
    say("maps and plots", total, total)
    return figures


def _earliest(storm: Any, n: int) -> list[str]:
    s = storm.subcatchments.dropna(subset=["time_to_ponding_s"])
    s = s.sort_values(["time_to_ponding_s", "subcatchment_id"], kind="stable")
    return s["subcatchment_id"].astype(str).head(n).tolist()


def _raster_crs(project: Any) -> Any:
    from ..workflow.pipeline import read_soil

    return read_soil(project).crs


def _save(png: bytes, path: Path, out: Deliverables, key: str) -> bytes:
    path.write_bytes(png)
    out.maps[key] = path
    return png


def _write_report(result: Any, out: Deliverables, figures: Any, gpkg: Path | None) -> Path:
    from ..present.layers import ponding_ranking
    from ..present.report import REPORT_TOP, build_report
    from ..workflow.pipeline import CAUTION

    files = sorted(str(p.relative_to(out.folder)) for p in out.folder.rglob("*") if p.is_file())
    subs, units = ponding_ranking(result)
    if units.empty and gpkg is not None and any(s.units is None for s in result.storms):
        units = _stored_ranking_top(gpkg, [s.name for s in result.storms], REPORT_TOP,
                                    result.project.units)
    text = build_report(result, figures, ranking=(subs, units), caution=CAUTION, files=files,
                        top=REPORT_TOP)
    path = out.folder / "report.html"
    path.write_text(text, encoding="utf-8")
    return path


def write_extras(result: Any, gpkg: str | Path, *, overwrite: bool = False,
                 options: ExtrasOptions = ExtrasOptions(),
                 progress: Progress | None = None) -> Deliverables:
    """Write ``<gpkg stem>_files/`` beside an already written GeoPackage, atomically.

    The folder is built in a temporary folder beside it and moved into place
    only when complete; an old folder is replaced only with ``overwrite``.

    Raises
    ------
    OutputExistsError
        If the folder exists and ``overwrite`` is false.
    """
    gpkg = Path(gpkg)
    folder = extras_folder(gpkg)
    with staged_folder(folder, overwrite=overwrite) as tmp:
        made = write_deliverables(result, tmp, options=options, gpkg=gpkg, progress=progress)
    if any(s.loss is None for s in result.storms):
        made.notes.append("infiltration plots skipped: the run did not keep per-unit step arrays")
    return made.moved_to(folder)


def write_all(result: Any, output: str | Path | None = None, *, overwrite: bool = False,
              options: ExtrasOptions = ExtrasOptions(),
              progress: Progress | None = None) -> tuple[Path, Deliverables]:
    """Write the GeoPackage and the ``<stem>_files/`` folder beside it (for notebook use).

    Returns
    -------
    (Path, Deliverables)

    Raises
    ------
    OutputExistsError
        If the GeoPackage or the folder exists and ``overwrite`` is false
        (checked before anything is written).
    """
    from ..workflow.stream import write_outputs

    gpkg = Path(output) if output else result.project.output
    for target in (gpkg, extras_folder(gpkg)):
        if target.exists() and not overwrite:
            raise OutputExistsError(str(target), "already exists",
                                    "pass --overwrite or choose another output path")
    write_outputs(result, output=gpkg, overwrite=overwrite)
    return gpkg, write_extras(result, gpkg, overwrite=overwrite, options=options,
                              progress=progress)
