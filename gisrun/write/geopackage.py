"""Write a finished run's GeoPackage from its result (see :mod:`gisrun.present.layers`)."""

from __future__ import annotations

import dataclasses
from pathlib import Path

from ..io.commit import output_set
from ..io.files import atomic_target, refuse_inputs_among
from ..io.geopackage import write_geopackage
from ..io.series_file import SeriesFile, series_metadata, series_path, series_store
from ..model import RunResult
from ..present.layers import build_layers, series_layer

__all__ = ["write_outputs"]


def write_outputs(
    result: RunResult, *, output: str | Path | None = None, overwrite: bool = False
) -> Path:
    """Write the run's GeoPackage (atomically); returns its path.

    When the project's ``series`` choice puts the excess series in a Parquet file
    (``"parquet"``, or ``"auto"`` for a run of
    :data:`gisrun.io.series_file.SERIES_IN_GEOPACKAGE_BELOW` rows or more), that file is
    written beside the GeoPackage (``<stem>.series.parquet``) and the two are moved in
    together.

    Parameters
    ----------
    result : RunResult
        From :func:`gisrun.run`.
    output : path, optional
        Where to write; defaults to the project's ``output``.
    overwrite : bool
        Replace an existing file.

    Raises
    ------
    OutputExistsError
        If the output exists and ``overwrite`` is false.
    OutputError
        If it cannot be written (nothing is left half-written), or it is an input of the run.
    ValueError
        If the run streamed its rows elsewhere (``run(unit_sink=..., series_sink=...)``):
        they are not in ``result`` to write; :func:`gisrun.run_and_write` writes such runs.
    """
    if result.parameters is None or any(s.series is None for s in result.storms):
        raise ValueError("this run streamed its rows into an output and no longer holds "
                         "them; write large runs with run_and_write")
    target = Path(output) if output else result.project.output
    refuse_inputs_among([target], result.project.input_files())
    rows = len(result.subcatchments) * sum(s.steps for s in result.storms)
    if series_store(result.project.series, rows) == "geopackage":
        return write_geopackage(target, build_layers(result), overwrite=overwrite)
    final = series_path(target)
    refuse_inputs_among([final], result.project.input_files())
    result = dataclasses.replace(result, series_file=final.name)
    system = result.project.units
    with output_set() as outputs:
        write_geopackage(target, build_layers(result), overwrite=overwrite, outputs=outputs)
        with atomic_target(final, overwrite=overwrite, outputs=outputs) as tmp, \
                SeriesFile(tmp, series_metadata(result.project, target)) as store:
            for storm in result.storms:
                store.write(series_layer(storm.series, storm.name, system))
    return target
