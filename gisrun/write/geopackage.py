"""Write a finished run's GeoPackage from its result (see :mod:`gisrun.present.layers`)."""

from __future__ import annotations

from pathlib import Path

from ..io.files import refuse_inputs_among
from ..io.geopackage import write_geopackage
from ..model import RunResult
from ..present.layers import build_layers

__all__ = ["write_outputs"]


def write_outputs(
    result: RunResult, *, output: str | Path | None = None, overwrite: bool = False
) -> Path:
    """Write the run's GeoPackage (atomically); returns its path.

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
    return write_geopackage(target, build_layers(result), overwrite=overwrite)
