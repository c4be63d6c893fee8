"""The PNG maps and plots of a run and its HTML report, drawn from the result alone.

Figures are built by :mod:`gisrun.present.maps` and the report by
:mod:`gisrun.present.report`; this module names the files and writes the bytes.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from ..model import CAUTION, RunResult, StormResult
from ..present import band_figures, maps, plots
from ..present.bands import band_width_label
from ..present.canvas import figure_png
from ..present.classes import Classes, RunClasses, run_classes
from ..present.display import method_name
from ..present.layers import layer_name, ponding_ranking
from ..present.report import REPORT_TOP, ReportFigures, SubcatchmentPlot, build_report
from ..units import UnitSystem, from_si
from .rasters import cell_preview

__all__ = ["Figures", "write_figures", "write_report"]

Progress = Callable[[str, int, int], None]


@dataclass
class Figures:
    """The PNG files written (key -> path) and the images the report embeds."""

    maps: dict[str, Path] = field(default_factory=dict)
    report: ReportFigures = field(default_factory=ReportFigures)

    def save(self, png: bytes, path: Path, key: str) -> bytes:
        """Write one PNG and remember it under ``key``."""
        path.write_bytes(png)
        self.maps[key] = path
        return png


def write_figures(result: RunResult, folder: Path, *, plot_ids: list[str], cell_maps: bool,
                  progress: Progress) -> Figures:
    """Write every map and plot of the run into ``folder`` (created).

    The class breaks of each mapped quantity are computed once from every storm
    (:func:`gisrun.present.classes.run_classes`) and shared by all its maps.
    """
    system = result.project.units
    folder.mkdir(parents=True, exist_ok=True)
    out = Figures()
    hyeto = plots.hyetograph_plot(
        [(plots.hyetograph_title(s.hyetograph), s.hyetograph.time_s / 60.0,
          from_si(s.hyetograph.intensity_m_per_s, system.rate)) for s in result.storms],
        rate_unit=rate_label(system), title="Rain intensity of each storm (hyetograph)")
    out.report.hyetograph = out.save(figure_png(hyeto), folder / "hyetographs.png",
                                     "hyetographs")
    classes = run_classes(result)
    total = len(result.storms)
    for k, storm in enumerate(result.storms):
        progress("maps and plots", k, total)
        images = _subcatchment_maps(result, storm, classes, folder, out)
        if storm.hyetograph.areal is not None and classes.rain_depth is not None:
            images.insert(0, _rain_map(result, storm, classes.rain_depth, folder, out))
        if cell_maps and result.cells is not None:
            images.append(_cell_map(result, k, classes, folder, out))
        out.report.per_storm[storm.name] = images
        out.report.plots += _infiltration_plots(result, storm, plot_ids, folder, out)
    if result.uncertainty is not None:
        out.report.uncertainty = _band_figures(result, folder, out)
    progress("maps and plots", total, total)
    return out


def _band_figures(result: RunResult, folder: Path, out: Figures) -> list[tuple[str, bytes]]:
    """The band-width map of every storm and the tornado figures."""
    system, unc = result.project.units, result.uncertainty
    bands = unc.bands.assign(width=from_si(unc.bands["runoff_depth_band_m"].to_numpy(float),
                                           system.depth))
    classes = band_figures.band_classes([bands["width"].to_numpy()])
    label = band_width_label(result)
    made = []
    for storm in result.storms:
        gdf = result.subcatchments[["subcatchment_id", "geometry"]].merge(
            bands[bands["storm"] == storm.name], on="subcatchment_id", how="left")
        fig = band_figures.band_width_map(gdf, "width", storm=storm.name, label=label,
                                          samples=unc.settings.samples,
                                          crs=result.subcatchments.crs, classes=classes,
                                          distance_unit=distance_unit(system))
        key = f"runoff_band_width_{storm.file_stem}"
        made.append((f"Width of the runoff depth band ({label}), {storm.name}: parameter "
                     "spread only, not model or rain error",
                     out.save(figure_png(fig), folder / f"{key}.png", key)))
        made += _tornados(result, storm, folder, out)
    return made


def _tornados(result: RunResult, storm: StormResult, folder: Path, out: Figures
              ) -> list[tuple[str, bytes]]:
    system, table = result.project.units, result.uncertainty.sensitivity
    made = []
    for sid in result.uncertainty.tornado_subcatchments:
        rows = table[(table["storm"] == storm.name) & (table["subcatchment_id"] == sid)]
        shown = pd.DataFrame({"parameter": rows["parameter"].to_numpy()})
        for col in ("runoff_depth", "runoff_depth_at_low", "runoff_depth_at_high"):
            shown[col] = from_si(rows[f"{col}_m"].to_numpy(float), system.depth)
        fig = band_figures.tornado_figure(
            shown, title=f"{sid}, {storm.name}: each parameter alone at the ends of its range",
            depth_unit=system.depth)
        key = f"tornado_{storm.file_stem}_{layer_name(sid)}"
        made.append((f"{sid}, {storm.name}: which parameter moves the runoff most "
                     "(one at a time, the others at the run's values)",
                     out.save(figure_png(fig), folder / f"{key}.png", key)))
    return made


def rate_label(system: UnitSystem) -> str:
    """The run's rate unit as written (``mm/h``, ``in/h``)."""
    return system.rate.replace("_per_", "/")


def _subcatchment_maps(result: RunResult, storm: StormResult, classes: RunClasses,
                       folder: Path, out: Figures) -> list[tuple[str, bytes]]:
    system, crs, stem = result.project.units, result.subcatchments.crs, storm.file_stem
    gdf = result.subcatchments[["subcatchment_id", "geometry"]].merge(
        storm.subcatchments, on="subcatchment_id", how="left").merge(
        result.subcatchment_methods, on="subcatchment_id",
        how="left")
    gdf["runoff"] = from_si(gdf["runoff_depth_m"].to_numpy(float), system.depth)
    gdf["ponding"] = gdf["time_to_ponding_s"] / 60.0
    common = {"crs": crs, "id_column": "subcatchment_id", "method_column": "loss_method",
              "distance_unit": distance_unit(system)}
    fig = maps.subcatchment_map(gdf, "runoff", title=f"Runoff depth per subcatchment, "
                                f"{storm.name}", label=f"runoff depth ({system.depth})",
                                classes=classes.runoff_depth, **common)
    runoff = (f"Runoff depth per subcatchment ({system.depth}), {storm.name}; the same classes "
              "on every storm's map",
              out.save(figure_png(fig), folder / f"runoff_depth_{stem}.png",
                       f"runoff_depth_{stem}"))
    fig = maps.subcatchment_map(gdf, "ponding", title=f"Time to ponding, {storm.name}",
                                label="time to ponding (min)", classes=classes.time_to_ponding,
                                missing_label="does not pond", **common)
    ponding = (f"Time to ponding (min, earliest pervious part; curve number: runoff start), "
               f"{storm.name}",
               out.save(figure_png(fig), folder / f"time_to_ponding_{stem}.png",
                        f"time_to_ponding_{stem}"))
    return [runoff, ponding]


def _rain_map(result: RunResult, storm: StormResult, classes: Classes, folder: Path,
              out: Figures) -> tuple[str, bytes]:
    """Rain depth per subcatchment of a storm whose rain differs between subcatchments."""
    system, stem = result.project.units, storm.file_stem
    gdf = result.subcatchments[["subcatchment_id", "geometry"]].merge(
        storm.subcatchments[["subcatchment_id", "rain_depth_m"]], on="subcatchment_id",
        how="left")
    gdf["rain"] = from_si(gdf["rain_depth_m"].to_numpy(float), system.depth)
    areal = storm.hyetograph.areal
    points = areal.points if areal is not None else None
    fig = maps.subcatchment_map(gdf, "rain", title=plots.rain_map_title(storm.hyetograph),
                                label=f"rain depth ({system.depth})", classes=classes,
                                crs=result.subcatchments.crs, id_column="subcatchment_id",
                                distance_unit=distance_unit(system), points=points)
    source = areal.source if areal is not None else ""
    drawn = "; the gauges are drawn as triangles" if points is not None and len(points) else ""
    return (f"Rain depth per subcatchment ({system.depth}), {storm.name}: {source}{drawn}; the "
            "weights are in the rain_weights layer",
            out.save(figure_png(fig), folder / f"rain_depth_{stem}.png", f"rain_depth_{stem}"))


def distance_unit(system: UnitSystem) -> str:
    """Scale bars in feet and miles for US-unit runs, metres and kilometres otherwise."""
    return "ft" if system.name == "us" else "m"


def _cell_map(result: RunResult, k: int, classes: RunClasses, folder: Path, out: Figures
              ) -> tuple[str, bytes]:
    storm, cells, system = result.storms[k], result.cells, result.project.units
    values, extent = cell_preview(cells, from_si(cells.runoff_depth_m[k], system.depth))
    fig = maps.raster_map(values, extent, title=f"Cell-level runoff depth, {storm.name}",
                          label=f"runoff depth ({system.depth})", crs=result.raster_crs,
                          outlines=result.subcatchments.to_crs(result.raster_crs),
                          classes=classes.cell_runoff_depth,
                          distance_unit=distance_unit(system))
    key = f"cell_runoff_depth_{storm.file_stem}"
    return (f"Cell-level runoff depth ({system.depth}) on the soil grid, {storm.name}",
            out.save(figure_png(fig), folder / f"{key}.png", key))


def _infiltration_plots(result: RunResult, storm: StormResult, named: list[str], folder: Path,
                        out: Figures) -> list[SubcatchmentPlot]:
    if storm.loss is None or result.parameters is None:
        return []
    system, dt_s = result.project.units, result.project.time_step_s
    plotted = _earliest(storm, 1)
    plotted += [s for s in named if s not in plotted]
    made = []
    for sid in plotted:
        series = plots.pervious_series(storm.loss, result.parameters, sid, dt_s)
        fig = plots.infiltration_plot(
            series, title=f"{sid}, {storm.name}", rate_unit=rate_label(system),
            to_rate=lambda v: from_si(np.asarray(v, float), system.rate))
        key = f"infiltration_{storm.file_stem}_{layer_name(sid)}"
        runon = series.runon_m_per_s is not None and bool((series.runon_m_per_s > 0).any())
        supply = ("the rain and the run-on from disconnected impervious area" if runon
                  else "the rain")
        caption = (f"{sid}, {storm.name} ({method_name(series.method)}): what becomes of the "
                   f"rain on the pervious area (infiltration, storage filling and excess add up "
                   f"to {supply}), the infiltration capacity and the ponding instant")
        made.append(SubcatchmentPlot(sid, storm.name, caption,
                                     out.save(figure_png(fig), folder / f"{key}.png", key)))
    return made


def _earliest(storm: StormResult, n: int) -> list[str]:
    s = storm.subcatchments.dropna(subset=["time_to_ponding_s"])
    s = s.sort_values(["time_to_ponding_s", "subcatchment_id"], kind="stable")
    return s["subcatchment_id"].astype(str).head(n).tolist()


def write_report(result: RunResult, folder: Path, figures: ReportFigures) -> Path:
    """Write ``report.html`` into ``folder``, listing the files already there."""
    files = sorted(str(p.relative_to(folder)) for p in folder.rglob("*") if p.is_file())
    subs, units = ponding_ranking(result)
    if units.empty and result.unit_ranking_top is not None:
        units = result.unit_ranking_top
    text = build_report(result, figures, ranking=(subs, units), caution=CAUTION, files=files,
                        top=REPORT_TOP)
    path = folder / "report.html"
    path.write_text(text, encoding="utf-8")
    return path
