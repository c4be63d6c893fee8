"""The ``gisrun`` command group and its ``run``, ``check`` and ``tables`` commands."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import click

from .._version import __version__
from ..errors import GisrunError
from . import summary

__all__ = ["cli"]

project_argument = click.argument(
    "project", type=click.Path(path_type=Path), metavar="PROJECT",
)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="gisrun")
@click.option("--debug", is_flag=True, help="Show tracebacks for errors.")
def cli(debug: bool) -> None:
    """Infiltration and runoff for every subcatchment, from soil and land-cover rasters.

    Planning-level estimates: check results against local codes and agency
    methods, and have them reviewed by a licensed engineer.
    """


@cli.command()
@project_argument
@click.option("--output", "-o", type=click.Path(path_type=Path),
              help="GeoPackage to write (default: the project's [project] output).")
@click.option("--into", type=click.Path(path_type=Path),
              help="Add the results as layers to this existing GeoPackage; its other layers "
                   "are kept as they are.")
@click.option("--overwrite", is_flag=True, help="Replace an existing output.")
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
        as_json: bool,
        workers: int | None, scheduler: str | None, no_rasters: bool, no_maps: bool,
        no_report: bool, no_extras: bool, plot_ids: tuple[str, ...]) -> None:
    """Run PROJECT (a project file, or a folder holding gisrun.toml) and write its results.

    Beside the GeoPackage, a folder <output stem>_files/ gets cell-level rasters, maps,
    an HTML report and model-input tables.
    """
    from ..config.project import load_project
    from ..errors import OutputExistsError
    from ..model import CAUTION
    from ..workflow.stream import run_and_write
    from ..write.extras import ExtrasOptions, extras_folder, write_extras
    from .progress import progress_display

    loaded = load_project(project)
    if into is not None and output is not None:
        raise click.UsageError("give either --output or --into, not both")
    target = Path(into or output or loaded.output)
    folder = extras_folder(target)
    checked = (() if into is not None else (target,)) + (() if no_extras else (folder,))
    for path in checked:
        if path.exists() and not overwrite:  # fail before the work, not after it
            raise OutputExistsError(str(path), "already exists",
                                    "pass --overwrite or choose another output path")
    if plot_ids and not no_extras:  # a wrong id fails before the work, not after it
        from ..workflow.inputs import read_subcatchment_layer
        from ..write.extras import check_plot_ids

        check_plot_ids(read_subcatchment_layer(loaded), plot_ids)
    options = ExtrasOptions(rasters=not no_rasters, maps=not no_maps, report=not no_report,
                            plot_subcatchments=plot_ids)
    with progress_display(enabled=not (quiet or as_json)) as show:
        result, written = run_and_write(loaded, output=None if into else target,
                                        into=into, overwrite=overwrite,
                                        progress=show.step, workers=workers,
                                        scheduler=scheduler)
        extras = None if no_extras else write_extras(result, written, overwrite=overwrite,
                                                     options=options, progress=show.advance)
    if extras is not None:
        result = dataclasses.replace(result, warnings=tuple(dict.fromkeys(
            [*result.warnings, *extras.notes])))
    if as_json:
        doc = summary.as_dict(result, written)
        doc["extras"] = extras.as_dict() if extras is not None else None
        click.echo(json.dumps(doc, indent=2))
    elif not quiet:
        summary.print_summary(result, written)
        if extras is not None:
            click.echo(f"Maps, rasters, report and model inputs in {extras.folder}")
            if extras.report:
                click.echo(f"Report: {extras.report}")
        click.echo(f"\nCaution: {CAUTION}")


@cli.command()
@project_argument
def check(project: Path) -> None:
    """Check every input of PROJECT without running it; report each problem on one line."""
    from ..workflow.check import check_project

    problems, notes = check_project(project)
    for note in notes:
        click.echo(f"gisrun: warning: {note}", err=True)
    for problem in problems:
        click.echo(f"gisrun: error: {problem}", err=True)
    if problems:
        click.echo(f"{len(problems)} problem(s) found.", err=True)
        raise click.exceptions.Exit(2)
    click.echo("No problems found.")


@cli.command()
@click.argument("name", required=False)
def tables(name: str | None) -> None:
    """List the shipped parameter tables and their sources (or print table NAME)."""
    from ..parameters import list_tables

    found = list_tables()
    if name is None:
        for table in found:
            click.echo(f"{table[0]}: {table[1]}")
            for line in table[2]:
                click.echo(f"    {line}")
        return
    for table in found:
        if table[0] == name:
            click.echo(f"{table[0]}: {table[1]}")
            for line in table[2]:
                click.echo(f"# {line}")
            click.echo(table[3].to_string(index=False))
            return
    names = [t[0] for t in found]
    raise GisrunError(f"table {name!r}", "is not a shipped table", f"use one of {names}")


def _register_storm() -> None:
    try:
        from .storm import storm
    except ImportError:  # pragma: no cover - storm commands are optional at import time
        return
    cli.add_command(storm)


_register_storm()
