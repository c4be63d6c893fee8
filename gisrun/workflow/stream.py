"""The command line's run: run a project and build its GeoPackage as the chunks finish.

:func:`run_and_write` is what ``gisrun run`` calls. A large run (one that does
not keep per-unit step arrays, see
:data:`gisrun.workflow.pipeline.KEEP_STEP_ARRAYS_BELOW`) appends each chunk's
excess series and unit rows to a temporary GeoPackage as it goes, so memory
stays within the budget, and ranks its units inside the file; then the other
layers are written one at a time and the file is moved into place (with the
extras folder, when the caller stages one). A small run keeps everything and
writes it the same way at the end.
"""

from __future__ import annotations

import dataclasses
import os
from collections.abc import Callable, Iterable
from contextlib import nullcontext
from pathlib import Path

import pandas as pd
import pyogrio

from ..config.project import load_project
from ..errors import OutputError
from ..io import geopackage
from ..io.commit import OutputSet, output_set
from ..io.files import new_folders_removed_on_failure, refuse_inputs_among
from ..io.geopackage import LayerCheck
from ..io.series_file import SeriesFile, series_metadata, series_path, series_store
from ..model import Inputs, RunResult
from ..present.layers import (
    REPORT_TOP,
    UNIT_LAYERS,
    layer_builders,
    series_layer,
    storm_layer_name,
)
from ..project import Project
from ..units import present_frame, si_frame
from .inputs import read_inputs
from .pipeline import KEEP_STEP_ARRAYS_BELOW, Progress, run

__all__ = ["run_and_write", "series_rows", "Extras"]

#: Share of the memory budget SQLite may use for its page cache and, as much again, its sort
#: while ranking the streamed units (the chunks' working sets are gone by then).
RANKING_SHARE = 1.0 / 12.0
#: ``extras(result, gpkg_being_built, outputs)``: stage more outputs to move in with the GeoPackage.
Extras = Callable[[RunResult, Path, OutputSet], object]


def run_and_write(
    project: Project | str | Path,
    *,
    output: str | Path | None = None,
    overwrite: bool = False,
    progress: Progress | None = None,
    workers: int | None = None,
    scheduler: str | None = None,
    into: str | Path | None = None,
    cells: bool = True,
    extras: Extras | None = None,
) -> tuple[RunResult, Path]:
    """Run a project and write its GeoPackage, streaming the rows of a large run.

    Memory stays within the project's budget however many subcatchments there
    are: a large run appends each chunk's excess-rainfall series, unit parameters
    and unit results to the output as they are computed, ranks
    ``ponding_rank_units`` inside the file and returns a result holding no unit
    rows or series (its ``unit_ranking_top`` holds the first rows of that
    ranking). The GeoPackage is built in a temporary file beside the target and
    moved into place only when complete.

    With ``into`` the layers are added to that existing GeoPackage instead
    (built in a copy beside it, then added to the file in place in one SQLite
    transaction, see :mod:`gisrun.io.gpkg_merge`); its other layers, and rows
    other programs commit meanwhile, are kept as they are, and a layer of the
    same name is replaced only with ``overwrite``. ``cells`` false skips the cell-level values (no
    rasters will be written from this result).

    ``extras(result, gpkg_being_built, outputs)`` is called once the layers are
    written and before anything is moved into place; what it stages in
    ``outputs`` (the ``<output>_files/`` folder) is moved in together with the
    GeoPackage, so the two change together or not at all. An output that is an
    input of the run is refused before any work.

    Raises
    ------
    OutputExistsError
        If the output (or, with ``into``, a layer name) exists and ``overwrite`` is false.
    OutputBusyError
        If another gisrun run is writing the same output.
    OutputError
        If the output is an input of the run, or cannot be written.
    """
    if not isinstance(project, Project):
        project = load_project(project)
    target = Path(into or output or project.output)
    if into is None:
        refuse_inputs_among([target], project.input_files())
    say = progress or (lambda _: None)
    say("reading inputs")
    inputs = read_inputs(project)
    large = len(inputs.subcatchments) >= KEEP_STEP_ARRAYS_BELOW
    parquet = series_store(project.series, series_rows(project, inputs)) == "parquet"
    names = [*([] if parquet else ["excess_series"]), "run_info", *UNIT_LAYERS,
             *(storm_layer_name(h.name) for h in inputs.storms)]
    with new_folders_removed_on_failure(target.parent), \
            output_set() as outputs:  # the GeoPackage and the extras are moved in together
        opened = geopackage.open_output(target, into_existing=into is not None,
                                        overwrite=overwrite, outputs=outputs)
        with opened as (tmp, check):
            if into is not None:
                check = _keeping_the_subcatchments(project, Path(into), check)
            check(names)  # refuse a taken layer name before the work, not after it
            series = _series_file(project, target, outputs, overwrite) if parquet else None
            result = _run_into(project, inputs, tmp, check, large=large, series=series,
                               progress=progress, workers=workers, scheduler=scheduler,
                               cells=cells)
        if extras is not None:
            extras(result, tmp, outputs)
        say("moving outputs into place")
    return result, target


def series_rows(project: Project, inputs: Inputs) -> int:
    """Rows of the run's excess series: subcatchments x steps, summed over the storms."""
    steps = sum(len(h.resample(project.time_step_s)) for h in inputs.storms)
    return len(inputs.subcatchments) * steps


def _series_file(project: Project, target: Path, outputs: OutputSet,
                 overwrite: bool) -> tuple[Path, SeriesFile]:
    """The Parquet series file beside ``target``, staged in ``outputs`` (not yet opened)."""
    final = series_path(target)
    refuse_inputs_among([final], project.input_files())
    tmp = outputs.file(final, overwrite=overwrite)
    return final, SeriesFile(tmp, series_metadata(project, target))


def _run_into(project: Project, inputs: Inputs, tmp: Path, check: LayerCheck, *, large: bool,
              series: tuple[Path, SeriesFile] | None, progress: Progress | None,
              workers: int | None, scheduler: str | None, cells: bool) -> RunResult:
    """Run and write every layer into the GeoPackage being built at ``tmp``.

    With ``series`` (the Parquet file's final path and its writer) the excess series go
    into that file chunk by chunk, whatever the run's size.
    """
    sinks = _Sinks(tmp, project, series[1] if series else None) if large or series else None
    with series[1] if series else nullcontext():
        result = run(project, inputs=inputs, progress=progress, workers=workers,
                     scheduler=scheduler, series_sink=sinks and sinks.series,
                     unit_sink=sinks and sinks.units, keep_loss=not large, cells=cells)
    if series is not None:
        result = dataclasses.replace(result, series_file=series[0].name)
    if progress is not None:
        progress("writing outputs")
    if result.parameters is None:  # unit rows streamed: rank them inside the file
        result = dataclasses.replace(result, unit_ranking_top=_rank_units_in_file(tmp, result))
    builders = layer_builders(result, skip=("excess_series",) if large else ())
    check(list(builders))
    for name, make in builders.items():  # one large layer in memory at a time
        geopackage.write_layers_into(tmp, {name: make()})
    return result


def _keeping_the_subcatchments(project: Project, into: Path, check: LayerCheck) -> LayerCheck:
    """Writing into the subcatchment GeoPackage is fine unless a layer would replace theirs."""
    source = project.subcatchments
    try:
        same = os.path.samefile(into, source.path)
    except OSError:
        same = False
    theirs = (source.layer or "").lower() if same else None

    def guarded(names: Iterable[str]) -> None:
        names = list(names)
        if theirs is not None and theirs in {n.lower() for n in names}:
            raise OutputError(f"{into}:{source.layer}", "is the subcatchment layer of this run "
                              "and gisrun writes a layer of that name", "choose another "
                              "GeoPackage, or rename the subcatchment layer")
        check(names)
    return guarded


class _Sinks:
    """Append a large run's rows to the GeoPackage being built (or the series file), by chunk."""

    def __init__(self, path: Path, project: Project, series: SeriesFile | None) -> None:
        self.path, self.system, self.file = path, project.units, series
        self.started: set[str] = set()

    def _append(self, layer: str, frame: pd.DataFrame) -> None:
        geopackage.append_table(self.path, layer, frame, replace=layer not in self.started)
        self.started.add(layer)

    def series(self, _: int, name: str, series: pd.DataFrame) -> None:
        frame = series_layer(series, name, self.system)
        if self.file is not None:
            self.file.write(frame)
        else:
            self._append("excess_series", frame)

    def units(self, params: pd.DataFrame, units: list[tuple[str, pd.DataFrame]]) -> None:
        self._append("unit_parameters", present_frame(params, self.system))
        frames = [series_layer(frame, name, self.system) for name, frame in units]
        if frames:  # every storm's rows in one write: a write has a fixed cost (opening the
            self._append("unit_results",  # file, the layer), about 30 ms a chunk here
                         frames[0] if len(frames) == 1 else pd.concat(frames, ignore_index=True))


def _rank_units_in_file(path: Path, result: RunResult) -> pd.DataFrame:
    """Write ``ponding_rank_units`` from the streamed ``unit_results``; return its top rows (SI).

    The top :data:`~gisrun.present.layers.REPORT_TOP` rows of each storm are what the report
    shows; the result carries them so the writers need not read the file.
    """
    system = result.project.units

    def name(si: str) -> str:
        return present_frame(pd.DataFrame({si: [0.0]}), system).columns[0]

    keys = ["subcatchment_id", "soil_class", "cover_class"]
    value = name("time_to_ponding_s")
    columns = [*keys, value, name("runoff_depth_m"), "runoff_coefficient", name("area_m2")]
    geopackage.write_ranked_table(
        path, source="unit_results", target="ponding_rank_units", group="storm",
        group_order=[s.name for s in result.storms], value=value, keys=keys, columns=columns,
        rank="ponding_rank", exclude=("surface", "impervious"),
        cache_mb=result.project.memory_budget_mb * RANKING_SHARE)
    frames = []
    for storm in result.storms:
        quoted = storm.name.replace("'", "''")
        frames.append(pyogrio.read_dataframe(path, layer="ponding_rank_units",
                                             where=f"storm = '{quoted}'", max_features=REPORT_TOP,
                                             read_geometry=False))
    return si_frame(pd.concat(frames, ignore_index=True), system)
