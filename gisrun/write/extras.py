"""Write what the engineer looks at and hands on, beside the GeoPackage.

``<output stem>_files/`` holds:

``rasters/``
    Per storm, cell-level ``runoff_depth_<unit>_<storm>.tif`` and
    ``time_to_ponding_min_<storm>.tif`` on the soil raster's grid.
``maps/``
    PNG maps and per-subcatchment infiltration plots.
``report.html``
    One self-contained HTML report (images embedded; opens offline).
``lumped_<method>.csv``, ``excess_series.csv``
    Per loss method, the lumped parameters in wide form (one row per
    subcatchment, basis and storm; :func:`gisrun.present.model_inputs.lumped_wide`
    of the ``lumped_parameters`` layer), and the excess-rainfall series.

Everything is drawn from the :class:`~gisrun.model.RunResult`: no input is
opened and no loss is computed here. The folder is built in a temporary folder
beside the target and moved into place at the end, so a failed run leaves either
the old folder or none, never half a folder. A large run that streamed its
excess series into the GeoPackage has its series copied from there in batches
(the one thing read back, from the run's own output). A run that wrote its series
to a Parquet file beside the GeoPackage (``RunResult.series_file``) gets no CSV copy:
the file is the series, and one ``pandas.read_parquet`` call reads it.
"""

from __future__ import annotations

import csv
import shutil
import sqlite3
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import pandas as pd

from ..errors import OutputError, VectorError
from ..io.commit import OutputSet
from ..io.files import atomic_target, refuse_inputs_among, staged_folder
from ..io.geopackage import write_csv
from ..model import RunResult
from ..present.layers import layer_name, lumped_parameters_layer, series_layer
from ..present.model_inputs import lumped_wide
from .figures import write_figures, write_report
from .rasters import write_cell_rasters

__all__ = ["Deliverables", "ExtrasOptions", "extras_folder", "check_plot_ids",
           "write_deliverables", "write_extras"]

Progress = Callable[[str, int, int], None]


@dataclass
class Deliverables:
    """Paths of everything written beside the GeoPackage (relative parts inside ``folder``)."""

    folder: Path
    rasters: dict[str, dict[str, Path]] = field(default_factory=dict)
    maps: dict[str, Path] = field(default_factory=dict)
    report: Path | None = None
    #: ``lumped_<method>.csv`` by loss method.
    lumped_parameters: dict[str, Path] = field(default_factory=dict)
    excess_series: Path | None = None
    notes: list[str] = field(default_factory=list)

    def as_dict(self) -> dict[str, object]:
        """JSON-ready paths."""
        return {
            "folder": str(self.folder),
            "rasters": {s: {k: str(p) for k, p in d.items()} for s, d in self.rasters.items()},
            "maps": {k: str(p) for k, p in self.maps.items()},
            "report": str(self.report) if self.report else None,
            "lumped_parameters": {m: str(p) for m, p in self.lumped_parameters.items()},
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
            report=rebase(self.report),
            lumped_parameters={m: rebase(p) for m, p in self.lumped_parameters.items()},
            excess_series=rebase(self.excess_series), notes=list(self.notes))


@dataclass(frozen=True)
class ExtrasOptions:
    """Which extras to make."""

    rasters: bool = True
    maps: bool = True
    report: bool = True
    model_inputs: bool = True
    plot_subcatchments: tuple[str, ...] = ()


def extras_folder(gpkg: str | Path) -> Path:
    """``<output stem>_files`` beside the GeoPackage."""
    gpkg = Path(gpkg)
    return gpkg.with_name(f"{gpkg.stem}_files")


def check_plot_ids(subcatchments: gpd.GeoDataFrame, named: Sequence[str]) -> list[str]:
    """Check the named subcatchment ids against the layer and return them.

    Raises
    ------
    VectorError
        Naming the first id that is not in the layer, or two ids whose plots
        would get the same file name (``S-1`` and ``s_1``).
    """
    known = set(subcatchments["subcatchment_id"].astype(str))
    files: dict[str, str] = {}
    for sid in named:
        if str(sid) not in known:
            near = sorted(known)[:3]
            raise VectorError(f"subcatchment {sid!r}", "is not in the subcatchment layer",
                              f"name an existing id (e.g. {', '.join(near)})")
        stem = layer_name(str(sid))
        if files.get(stem, str(sid)) != str(sid):
            raise VectorError(f"--plot {sid}", f"would be written to the same file as --plot "
                              f"{files[stem]} (infiltration_..._{stem}.png)",
                              "plot one of the two in another run")
        files[stem] = str(sid)
    return list(dict.fromkeys(str(s) for s in named))


def write_deliverables(result: RunResult, folder: Path, *,
                       options: ExtrasOptions = ExtrasOptions(), gpkg: Path | None = None,
                       progress: Progress | None = None) -> Deliverables:
    """Write the extras into an existing, empty ``folder`` (no atomic move).

    See :func:`write_extras` for the atomic version. ``gpkg`` is the run's
    GeoPackage, read only for the excess series of a run that streamed them there.

    Raises
    ------
    VectorError
        A subcatchment named for plotting does not exist.
    ValueError
        The series were streamed and no ``gpkg`` is given, or rasters are asked for
        and the run made no cell values.
    """
    say = progress or (lambda *_: None)
    out = Deliverables(folder=folder)
    plots = check_plot_ids(result.subcatchments, options.plot_subcatchments)
    if options.rasters and result.cells is not None:
        out.rasters = write_cell_rasters(result, folder / "rasters", progress=say)
        out.notes += list(result.cells.notes)
    elif options.rasters:
        out.notes.append("cell rasters skipped: the run made no cell values")
    if options.model_inputs:
        say("model inputs", 0, 1)
        out.lumped_parameters = _write_lumped_csvs(result, folder)
        if result.series_file is None:  # a Parquet series file is not copied to CSV
            out.excess_series = _write_series_csv(result, folder / "excess_series.csv", gpkg)
        say("model inputs", 1, 1)
    if options.maps or options.report:
        figures = write_figures(result, folder / "maps", plot_ids=plots,
                                cell_maps=options.rasters, progress=say)
        out.maps = figures.maps if options.maps else {}
        if not options.maps:
            shutil.rmtree(folder / "maps", ignore_errors=True)
        if options.report:
            out.report = write_report(result, folder, figures.report)
    return out


def _write_lumped_csvs(result: RunResult, folder: Path) -> dict[str, Path]:
    """``lumped_<method>.csv`` per loss method, from the ``lumped_parameters`` layer."""
    if result.lumped_parameters.empty:
        return {}
    layer = lumped_parameters_layer(result)
    return {method: write_csv(folder / f"lumped_{method}.csv", lumped_wide(layer, method))
            for method in dict.fromkeys(layer["loss_method"])}


def _write_series_csv(result: RunResult, target: Path, gpkg: Path | None) -> Path:
    if all(s.series is not None for s in result.storms):
        system = result.project.units
        frames = [series_layer(s.series, s.name, system) for s in result.storms]
        return write_csv(target, pd.concat(frames, ignore_index=True))
    if gpkg is None:
        raise ValueError("the run streamed its series into its GeoPackage: pass gpkg")
    return _copy_table_to_csv(gpkg, "excess_series", target)


def _copy_table_to_csv(gpkg: Path, table: str, target: Path, batch_rows: int = 500_000) -> Path:
    """Copy a GeoPackage table to CSV in batches, so memory does not grow with its size."""
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


def write_extras(result: RunResult, gpkg: str | Path, *, overwrite: bool = False,
                 options: ExtrasOptions = ExtrasOptions(),
                 progress: Progress | None = None, outputs: OutputSet | None = None,
                 final_gpkg: str | Path | None = None) -> Deliverables:
    """Write ``<gpkg stem>_files/`` beside the GeoPackage, atomically.

    The folder is built in a temporary folder beside it and moved into place
    only when complete; an old folder is replaced only with ``overwrite``. With
    ``outputs`` (see :func:`gisrun.run_and_write`'s ``extras``) the folder is
    staged in that set and moved in together with the GeoPackage; ``gpkg`` is
    then the GeoPackage being built and ``final_gpkg`` where it goes. A folder
    that holds an input of the run is refused before anything is written.

    Raises
    ------
    OutputExistsError
        If the folder exists and ``overwrite`` is false.
    OutputError
        If the folder holds an input of the run, or cannot be written (a full disk).
    """
    gpkg = Path(gpkg)
    folder = extras_folder(final_gpkg if final_gpkg is not None else gpkg)
    refuse_inputs_among([folder], result.project.input_files())
    try:
        with staged_folder(folder, overwrite=overwrite, outputs=outputs) as tmp:
            made = write_deliverables(result, tmp, options=options, gpkg=gpkg,
                                      progress=progress)
    except OSError as err:
        if isinstance(err, OutputError):
            raise
        raise OutputError(str(folder), f"could not be written ({err.strerror or err})",
                          "free disk space or choose another output folder, then run again"
                          ) from None
    if any(s.loss is None for s in result.storms):
        made.notes.append("infiltration plots skipped: the run did not keep per-unit step arrays")
    return made.moved_to(folder)
