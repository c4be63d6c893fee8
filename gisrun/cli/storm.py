"""``gisrun storm``: make a design storm CSV, or summarise and plot a storm CSV.

Thin over :mod:`gisrun.io.storm_csv`, :mod:`gisrun.config.storms` and
:func:`gisrun.io.files.atomic_target`; the options build the
same table a project file's ``[[storms]]`` holds. Errors are
:class:`~gisrun.errors.GisrunError` and propagate to the main command, which prints them on one
line and exits 2.
"""

from __future__ import annotations

import re
from contextlib import nullcontext
from pathlib import Path
from typing import Any

import click
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ..config.storms import storm_from_config
from ..errors import OutputError, StormError
from ..io.files import atomic_target, refuse_inputs_among, same_path
from ..io.storm_csv import read_hyetograph_csv, write_hyetograph_csv
from ..storm import KINDS, Hyetograph
from ..units import UnitSystem, from_si, unit_system
from .options import overwrite_option, plot_option, units_option

__all__ = ["storm", "STORM_CAUTION"]

STORM_CAUTION = (
    "Planning-level design rainfall: before sizing drains or judging flood risk, use the storm "
    "your local codes and agency methods require and have the work reviewed by a licensed engineer."
)


@click.group("storm")
def storm() -> None:
    """Make design storms and inspect storm files (rain per time step)."""


@storm.command("make")
@click.option("--kind", type=click.Choice(list(KINDS)),
              required=True, help="Design storm method.")
@click.option("--distribution", help="nrcs_24h: rainfall distribution type I, IA, II or III.")
@click.option("--depth", type=float, help="Total depth (nrcs_24h, uniform), in mm or in.")
@click.option("--duration-min", type=float, help="Storm duration in minutes (not nrcs_24h).")
@click.option("--step-min", type=float, help="Time step in minutes [6 for nrcs_24h, else 5].")
@click.option("--idf-a", type=float, help="IDF i = a/(t+b)^c: a, for i in mm/h or in/h.")
@click.option("--idf-b", type=float, help="IDF i = a/(t+b)^c: b in minutes.")
@click.option("--idf-c", type=float, help="IDF i = a/(t+b)^c: exponent c.")
@click.option("--idf-table", type=click.Path(dir_okay=False, path_type=Path),
              help="alternating_block: CSV of duration_min, intensity_mm_per_h (or _in_per_h).")
@click.option("--peak-position", type=float, help="Peak time as a fraction of the duration [0.5].")
@click.option("--name", help="Storm name written into the file.")
@click.option("--output", "-o", type=click.Path(dir_okay=False, path_type=Path), required=True,
              help="CSV file to write.")
@overwrite_option("CSV")
@units_option
@plot_option
def make(units_name: str, output: Path, overwrite: bool, plot_path: Path | None,
         **options: Any) -> None:
    """Make a design storm and write it as a storm CSV (time_min, depth)."""
    units = unit_system(units_name)
    if plot_path is not None and same_path(plot_path, output):
        raise OutputError(str(plot_path), "is also the --output CSV, so the plot would replace "
                          "the storm file", "give the plot its own file name (.png)")
    if options.get("idf_table") is not None:
        refuse_inputs_among([output, *([plot_path] if plot_path else [])],
                            {"--idf-table": options["idf_table"]})
    spec = _spec_from_options(options)
    _check_options(spec)
    try:
        h = storm_from_config(spec, base_dir=Path.cwd(), units=units, where=_MAKE)
    except StormError as err:
        raise _in_flag_words(err) from None
    # the plot's temporary file is made first: an unwritable --plot path stops before the CSV
    plotting = atomic_target(plot_path, overwrite=True) if plot_path else nullcontext(None)
    with plotting as plot_tmp:
        if plot_tmp is not None:
            _storm_figure(h, units).savefig(plot_tmp, format="png", dpi=110)
        write_hyetograph_csv(h, output, units=units, overwrite=overwrite)
    _echo_summary(h, units)
    click.echo(f"wrote {output}")
    if plot_path is not None:
        click.echo(f"wrote {plot_path}")
    click.echo(f"Caution: {STORM_CAUTION}")


_MAKE = "gisrun storm make"

#: The ``[[storms]]`` key each ``storm make`` option sets, as the user typed it.
_FLAGS = {"kind": "--kind", "distribution": "--distribution", "depth": "--depth",
          "duration_min": "--duration-min", "step_min": "--step-min",
          "idf": "--idf-a/--idf-b/--idf-c", "idf.a": "--idf-a", "idf.b": "--idf-b",
          "idf.c": "--idf-c", "idf_table": "--idf-table", "peak_position": "--peak-position",
          "name": "--name"}


def _check_options(spec: dict[str, Any]) -> None:
    """Missing or misplaced options of ``storm make``, said in its own flags."""
    kind = spec["kind"]
    required = [key.name for key in KINDS[kind].required]
    allowed = {"kind", "name", *(key.name for key in KINDS[kind].keys)}
    for key in spec:
        if key not in allowed:
            takes = " ".join(_FLAGS[k] for k in sorted(allowed - {"kind"}))
            raise StormError(f"{_MAKE} {_FLAGS[key]}", f"does not apply to --kind {kind}",
                             f"remove it; --kind {kind} takes {takes}")
    for key in required:
        if key not in spec:
            add = ("give --idf-a, --idf-b and --idf-c (i = a / (t + b)^c)" if key == "idf"
                   else f"add {_FLAGS[key]} VALUE")
            raise StormError(_MAKE, f"--kind {kind} needs {_FLAGS[key]}", add)
    if kind == "alternating_block" and ("idf" in spec) == ("idf_table" in spec):
        raise StormError(_MAKE, "--kind alternating_block needs either --idf-a/--idf-b/--idf-c "
                         "or --idf-table", "give the IDF formula's three coefficients or a table")
    missing = [k for k in "abc" if "idf" in spec and k not in spec["idf"]]
    if missing:
        raise StormError(_MAKE, f"the IDF formula needs {_FLAGS['idf.' + missing[0]]} too",
                         "give --idf-a, --idf-b and --idf-c (i = a / (t + b)^c)")


def _in_flag_words(err: StormError) -> StormError:
    """A project-file error (``gisrun storm make.depth: ...; set depth > 0``) in flag words."""
    where, fix = err.where, err.fix
    if where.startswith(f"{_MAKE}."):
        key = where[len(_MAKE) + 1:]
        flag = _FLAGS.get(key, key)
        where = f"{_MAKE} {flag}"
        fix = re.sub(rf"^set {re.escape(key.split('.')[-1])}\b", f"set {flag}", fix)
    return StormError(where, err.problem, fix)


def _spec_from_options(options: dict[str, Any]) -> dict[str, Any]:
    idf = {k: options.pop(f"idf_{k}") for k in ("a", "b", "c")}
    spec = {k: v for k, v in options.items() if v is not None}
    if "idf_table" in spec:
        spec["idf_table"] = str(spec["idf_table"])
    if any(v is not None for v in idf.values()):
        spec["idf"] = {k: v for k, v in idf.items() if v is not None}
    return spec


@storm.command("show")
@click.argument("path", type=click.Path(dir_okay=False, path_type=Path), metavar="STORM_CSV")
@units_option
@plot_option
def show(path: Path, units_name: str, plot_path: Path | None) -> None:
    """Print a storm file's total depth, duration, peak intensity and step."""
    units = unit_system(units_name)
    if not path.exists():
        raise StormError(str(path), "does not exist",
                         f"check the file name; a relative path is taken from {Path.cwd()}")
    if plot_path is not None:
        refuse_inputs_among([plot_path], {"STORM_CSV": path})
    h = read_hyetograph_csv(path, units=units)
    _echo_summary(h, units)
    if plot_path is not None:
        _plot(h, plot_path, units)
        click.echo(f"wrote {plot_path}")
    click.echo(f"Caution: {STORM_CAUTION}")


def _echo_summary(h: Hyetograph, units: UnitSystem) -> None:
    steps_min = h.steps_s / 60.0
    if np.allclose(steps_min, steps_min[0], rtol=1e-9):
        step = f"{steps_min[0]:g} min"
    elif np.allclose(steps_min[:-1], steps_min[0], rtol=1e-9):
        step = f"{steps_min[0]:g} min (last step {steps_min[-1]:g} min)"
    else:
        step = f"irregular, {steps_min.min():g}-{steps_min.max():g} min"
    click.echo(f"storm: {h.name}")
    click.echo(f"total depth: {from_si(h.total_depth_m, units.depth):.4g} {units.depth}")
    click.echo(f"duration: {h.duration_s / 60.0:g} min")
    peak = from_si(h.peak_intensity_m_per_s, units.rate)
    click.echo(f"peak intensity: {peak:.4g} {units.rate.replace('_per_', '/')}")
    click.echo(f"step: {step}")


def _plot(h: Hyetograph, path: Path, units: UnitSystem) -> None:
    """Write a bar chart of interval-mean intensity against time (Agg canvas, no display)."""
    fig = _storm_figure(h, units)
    with atomic_target(path, overwrite=True) as tmp:
        fig.savefig(tmp, format="png", dpi=110)


def _storm_figure(h: Hyetograph, units: UnitSystem) -> Figure:
    """Bar chart of interval-mean intensity against time, on its own Agg canvas."""
    fig = Figure(figsize=(8, 3.5), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    t_min = h.time_s / 60.0
    ax.bar(t_min[:-1], from_si(h.intensity_m_per_s, units.rate), width=np.diff(t_min),
           align="edge", color="#3b6ea8", edgecolor="none")
    rate = units.rate.replace("_per_", "/")
    ax.set(xlabel="time from storm start (min)", ylabel=f"rain intensity ({rate})",
           title=f"{h.name}: {from_si(h.total_depth_m, units.depth):.4g} {units.depth} total")
    ax.text(0.99, 0.97, "planning-level estimate", transform=ax.transAxes, ha="right",
            va="top", fontsize=7, color="0.4")
    return fig
