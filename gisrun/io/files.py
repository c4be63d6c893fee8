"""The one way gisrun writes a file or a folder: in full beside the target, then moved in.

Every output is first written to a temporary file (or folder) beside its target
(same folder, so the final move is a rename on one file system) and moved into
place only once it is complete. A run that fails or is interrupted leaves the
previous output untouched and no temporary file behind. An existing output is
replaced only when ``overwrite`` is true; without it, a target that appears
while the output is being built is not replaced either (exclusive create).
While an output is built its target is locked against other gisrun runs, and
temporaries that killed runs left beside it are removed
(:mod:`gisrun.io.locks`). Several outputs that must change together are built
in one :class:`gisrun.io.commit.OutputSet`; these two functions are sets of one.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path

from ..errors import OutputError
from .commit import OutputSet, output_set

__all__ = ["atomic_target", "new_folders_removed_on_failure", "refuse_inputs_among", "same_path",
           "staged_folder"]


@contextmanager
def atomic_target(target: str | Path, *, overwrite: bool,
                  outputs: OutputSet | None = None) -> Iterator[Path]:
    """Yield a temporary path beside ``target``; move it onto ``target`` on success.

    Parameters
    ----------
    target : path
        The final output path.
    overwrite : bool
        Whether an existing ``target`` may be replaced.
    outputs : OutputSet, optional
        Stage the file in this set instead: it is moved in by the set's commit.

    Raises
    ------
    OutputExistsError
        If ``target`` exists (or appears meanwhile) and ``overwrite`` is false.
    OutputBusyError
        If another gisrun run is writing ``target``.
    OutputError
        If the folder cannot be created or written.
    """
    target = Path(target)
    with _one_output(outputs) as staged:
        tmp = staged.file(target, overwrite=overwrite)
        try:
            yield tmp
        except OSError as err:
            if isinstance(err, OutputError):
                raise
            raise OutputError(str(target), f"could not be written ({err.strerror or err})",
                              "check free disk space and permissions, then run again") from None


@contextmanager
def staged_folder(target: Path, *, overwrite: bool,
                  outputs: OutputSet | None = None) -> Iterator[Path]:
    """Yield an empty temporary folder beside ``target``; move it onto ``target`` on success.

    With ``outputs`` the folder is staged in that set and moved in by its commit.

    Raises
    ------
    OutputExistsError
        If ``target`` exists and ``overwrite`` is false.
    OutputError
        If the folder cannot be created or moved.
    """
    with _one_output(outputs) as staged:
        yield staged.folder(Path(target), overwrite=overwrite)


@contextmanager
def _one_output(outputs: OutputSet | None) -> Iterator[OutputSet]:
    if outputs is not None:
        yield outputs
        return
    with output_set() as own:
        yield own


def refuse_inputs_among(outputs: Iterable[Path], inputs: Mapping[str, Path]) -> None:
    """Stop when an output is an input, or is a folder that holds one (before any work).

    A file output must not be the same file as an input (hard links and symbolic
    links included); a folder output must not contain an input, since replacing
    the folder would delete it.

    Raises
    ------
    OutputError
        Naming the output and the input.
    """
    for output in outputs:
        output = Path(output)
        for what, path in inputs.items():
            if _same_or_inside(Path(path), output):
                raise OutputError(str(output), f"would replace an input of this run ({what} "
                                  f"{path})", "choose another output path")


def same_path(a: Path, b: Path) -> bool:
    """Whether two paths name one file (links followed; either may not exist yet)."""
    try:
        if os.path.samefile(a, b):
            return True
    except OSError:
        pass
    return Path(os.path.realpath(a)) == Path(os.path.realpath(b))


def _same_or_inside(path: Path, output: Path) -> bool:
    return same_path(path, output) or Path(os.path.realpath(output)) in Path(
        os.path.realpath(path)).parents


@contextmanager
def new_folders_removed_on_failure(folder: Path) -> Iterator[None]:
    """Remove the (empty) folders made for an output that was never written."""
    new = [p for p in (folder, *folder.parents) if not p.exists()]
    try:
        yield
    except BaseException:
        for path in new:  # deepest first; a folder something else put a file in stays
            try:
                path.rmdir()
            except OSError:
                break
        raise
