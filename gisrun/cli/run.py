"""``gisrun run PROJECT``: run a project, write its GeoPackage and the files beside it.

Thin over :func:`gisrun.workflow.stream.run_and_write` and
:func:`gisrun.write.extras.write_extras`; what it prints is :mod:`gisrun.cli.summary`.
"""

from __future__ import annotations

import dataclasses
import json
import warnings
from pathlib import Path

import click

from ..config.project import load_project
from ..errors import GisrunWarning, OutputExistsError
from ..io.commit import OutputSet
from ..io.files import refuse_inputs_among
from ..model import CAUTION, RunResult
from ..options import check_geopackage_name
from ..workflow.dask_need import require_dask
from ..workflow.inputs import read_subcatchment_layer
from ..workflow.stream import run_and_write
from ..write.extras import Deliverables, ExtrasOptions, check_plot_ids, extras_folder, write_extras
from . import summary
from .options import overwrite_option, project_argument
from .progress import progress_display

__all__ = ["run"]


@click.command(short_help="Run PROJECT; write its GeoPackage, maps and report.")
@project_argument
@click.option("--output", "-o", type=click.Path(path_type=Path),
              help="GeoPackage to write (default: the project's [project] output).")
@click.option("--into", type=click.Path(path_type=Path),
              help="Add the results as layers to this existing GeoPackage; its other layers "
                   "are kept as they are.")
@overwrite_option("output")
@click.option("--quiet", "-q", is_flag=True, help="Print only errors.")
@click.option("--json", "as_json", is_flag=True, help="Print a machine-readable summary.")
@click.option("--workers", type=click.IntRange(1, 512),
              help="Run chunks of subcatchments on a local dask cluster of N processes.")
@click.option("--scheduler", metavar="ADDRESS",
              help="Run on an existing dask scheduler (tcp://host:8786), or 'synchronous'.")
@click.option("--no-rasters", is_flag=True, help="Skip the cell-level GeoTIFFs.")
@click.option("--no-maps", is_flag=True,
              help="Skip the PNG map files (the report still embeds them).")
@click.option("--no-report", is_flag=True, help="Skip the HTML report.")
@click.option("--no-extras", is_flag=True,
              help="Write only the GeoPackage (no <output>_files folder).")
@click.option("--plot", "plot_ids", multiple=True, metavar="ID",
              help="Also plot infiltration through each storm for subcatchment ID (repeatable).")
def run(project: Path, output: Path | None, into: Path | None, overwrite: bool, quiet: bool,
        as_json: bool, workers: int | None, scheduler: str | None, no_rasters: bool,
        no_maps: bool, no_report: bool, no_extras: bool, plot_ids: tuple[str, ...]) -> None:
    """Run PROJECT (a project file, or a folder holding gisrun.toml) and write its results.

    Beside the GeoPackage, a folder <output stem>_files/ gets cell-level rasters, maps,
    an HTML report and model-input tables.
    """
    loaded = load_project(project)
    if into is not None and output is not None:
        raise click.UsageError("give either --output or --into, not both")
    target = Path(into or output or loaded.output)
    check_geopackage_name(target, "--into" if into else "--output" if output else "output")
    require_dask(workers, scheduler)
    _refuse_existing(target, into=into, extras=not no_extras, overwrite=overwrite)
    refuse_inputs_among(([] if into else [target]) + ([] if no_extras else
                                                      [extras_folder(target)]),
                        loaded.input_files())
    if plot_ids and not no_extras:  # a wrong id fails before the work, not after it
        check_plot_ids(read_subcatchment_layer(loaded), plot_ids)
    options = ExtrasOptions(rasters=not no_rasters, maps=not no_maps, report=not no_report,
                            plot_subcatchments=plot_ids)
    made: list[Deliverables] = []
    with progress_display(enabled=not (quiet or as_json)) as show:
        def stage_extras(result: RunResult, gpkg: Path, outputs: OutputSet) -> None:
            made.append(write_extras(result, gpkg, overwrite=overwrite, options=options,
                                     progress=show.advance, outputs=outputs,
                                     final_gpkg=target))

        with warnings.catch_warnings(record=True) as caught:  # shown in the summary, once
            warnings.simplefilter("always", GisrunWarning)
            result, written = run_and_write(loaded, output=None if into else target,
                                            into=into, overwrite=overwrite,
                                            progress=show.step, workers=workers,
                                            scheduler=scheduler,
                                            cells=not (no_rasters or no_extras),
                                            extras=None if no_extras else stage_extras)
    extras = made[0] if made else None
    result = _with_notes(result, extras, _passed_on(caught))
    if as_json:
        _echo_json(result, written, extras)
    elif not quiet:
        _echo_summary(result, written, extras)


def _refuse_existing(target: Path, *, into: Path | None, extras: bool, overwrite: bool) -> None:
    """Stop before the work, not after it, when an output exists and may not be replaced."""
    checked = (() if into is not None else (target,)) + ((extras_folder(target),) if extras else ())
    for path in checked:
        if path.exists() and not overwrite:
            raise OutputExistsError(str(path), "already exists",
                                    "pass --overwrite or choose another output path")


def _passed_on(caught: list[warnings.WarningMessage]) -> list[str]:
    """The text of the run's own warnings; other warnings go on to Python's display.

    The run's own (``GisrunWarning``, such as the input readers pass on) are printed by the
    summary, one line each, not by Python with a source file and line of gisrun.
    """
    for w in caught:
        if not issubclass(w.category, GisrunWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return [str(w.message) for w in caught if issubclass(w.category, GisrunWarning)]


def _with_notes(result: RunResult, extras: Deliverables | None,
                raised: list[str] | None = None) -> RunResult:
    """The result with the extras' notes and the run's raised warnings added (once each)."""
    notes = list(result.warnings)
    for note in [*(extras.notes if extras is not None else ()), *(raised or ())]:
        if note not in notes:
            notes.append(note)
    return dataclasses.replace(result, warnings=tuple(notes))


def _echo_json(result: RunResult, written: Path, extras: Deliverables | None) -> None:
    doc = summary.as_dict(result, written)
    doc["extras"] = extras.as_dict() if extras is not None else None
    click.echo(json.dumps(doc, indent=2))


def _echo_summary(result: RunResult, written: Path, extras: Deliverables | None) -> None:
    summary.print_summary(result, written)
    if extras is not None:
        click.echo(f"Maps, rasters, report and model inputs in {extras.folder}")
        if extras.report:
            click.echo(f"Report: {extras.report}")
    click.echo(f"\nCaution: {CAUTION}")
