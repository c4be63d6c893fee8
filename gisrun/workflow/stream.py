"""Writing a run: the GeoPackage of a finished run, or a run streamed into one.

:func:`run_and_write` is what ``gisrun run`` calls: it runs a project chunk by
chunk and appends each chunk's rows to a temporary GeoPackage (the excess
series always; the unit tables too for large runs), then writes the other
layers one at a time and moves the file into place. :func:`write_outputs`
writes the GeoPackage of a :class:`~gisrun.workflow.pipeline.RunResult` kept in memory.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from ..config.project import Project
from ..units import present_frame
from .pipeline import Progress, RunResult, _quiet, load_project, read_storms, run

__all__ = ["write_outputs", "run_and_write"]


def write_outputs(
    result: RunResult, *, output: str | Path | None = None, overwrite: bool = False
) -> Path:
    """Write the run's GeoPackage (atomically); returns its path.

    Parameters
    ----------
    result : RunResult
        From :func:`run`.
    output : path, optional
        Where to write; defaults to the project's ``output``.
    overwrite : bool
        Replace an existing file.

    Raises
    ------
    OutputExistsError
        If the output exists and ``overwrite`` is false.
    OutputError
        If it cannot be written; nothing is left half-written.
    ValueError
        If the run streamed its unit rows elsewhere (``run(unit_sink=...)``): they are
        not in ``result`` to write; :func:`run_and_write` writes such runs.
    """
    from ..io.geopackage import write_geopackage
    from ..present.layers import build_layers

    if result.parameters is None:
        raise ValueError("this run streamed its unit rows to a unit sink and no longer holds "
                         "them; write large runs with run_and_write")
    target = Path(output) if output else result.project.output
    return write_geopackage(target, build_layers(result), overwrite=overwrite)


def _rank_units_in_file(path: Path, result: RunResult) -> None:
    """Write ``ponding_rank_units`` from the streamed ``unit_results`` table, on disk."""
    from ..io.geopackage import write_ranked_table

    def name(si: str) -> str:
        return present_frame(pd.DataFrame({si: [0.0]}), result.project.units).columns[0]

    keys = ["subcatchment_id", "soil_class", "cover_class"]
    value = name("time_to_ponding_s")
    columns = [*keys, value, name("runoff_depth_m"), "runoff_coefficient", name("area_m2")]
    write_ranked_table(path, source="unit_results", target="ponding_rank_units", group="storm",
                       group_order=[s.name for s in result.storms], value=value, keys=keys,
                       columns=columns, rank="ponding_rank", exclude=("surface", "impervious"))


def run_and_write(
    project: Project | str | Path,
    *,
    output: str | Path | None = None,
    overwrite: bool = False,
    progress: Progress | None = None,
    workers: int | None = None,
    scheduler: str | None = None,
    into: str | Path | None = None,
) -> tuple[RunResult, Path]:
    """Run a project and write its GeoPackage, streaming the series chunk by chunk.

    Memory stays within the project's budget however many subcatchments there
    are: each chunk's excess-rainfall series is appended to the output as it
    is computed, and so are its unit parameters and unit results when the run
    is too large to keep step arrays (then ``ponding_rank_units`` is ranked
    inside the file and the returned result holds no unit rows). The
    GeoPackage is built in a temporary file beside the target and moved into
    place only when complete.

    With ``into`` the layers are added to that existing GeoPackage instead
    (a copy is built beside it and replaces it when complete); its other
    layers are kept as they are, and a layer of the same name is replaced
    only with ``overwrite``.

    Raises
    ------
    OutputExistsError
        If the output (or, with ``into``, a layer name) exists and ``overwrite`` is false.
    """
    from ..io.geopackage import append_table, open_output, write_layers_into
    from ..present.layers import UNIT_LAYERS, layer_builders, series_layer, storm_layer_name

    if not isinstance(project, Project):
        project = load_project(project)
    target = Path(into or output or project.output)
    with open_output(target, into_existing=into is not None, overwrite=overwrite) as (tmp, check):
        if into is not None:  # refuse a taken layer name before the work, not after it
            check(["excess_series", "run_info", *UNIT_LAYERS,
                   *(storm_layer_name(h.name) for h in read_storms(project))])
        started: set[str] = set()

        def append(layer: str, frame: pd.DataFrame) -> None:
            append_table(tmp, layer, frame, replace=layer not in started)
            started.add(layer)

        def sink(_: int, name: str, series: pd.DataFrame) -> None:
            append("excess_series", series_layer(series, name, project.units))

        def unit_sink(params: pd.DataFrame, units: list[tuple[str, pd.DataFrame]]) -> None:
            append("unit_parameters", present_frame(params, project.units))
            for name, frame in units:
                append("unit_results", series_layer(frame, name, project.units))

        result = run(project, progress=progress, workers=workers, scheduler=scheduler,
                     series_sink=sink, unit_sink=unit_sink, keep_loss=None)
        (progress or _quiet)("writing outputs")
        if result.parameters is None:  # unit rows streamed: rank them inside the file
            _rank_units_in_file(tmp, result)
        builders = layer_builders(result, skip=("excess_series",))
        check(list(builders))
        for name, make in builders.items():  # one large layer in memory at a time
            write_layers_into(tmp, {name: make()})
    return result, target
