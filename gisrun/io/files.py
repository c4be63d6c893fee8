"""The one way gisrun writes a file or a folder: in full beside the target, then moved in.

Every output is first written to a temporary file (or folder) beside its target
(same folder, so the final move is a rename on one file system) and moved into
place with :func:`os.replace` only once it is complete. A run that fails or is
interrupted leaves the previous output untouched and no temporary file behind.
An existing output is replaced only when ``overwrite`` is true.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from ..errors import OutputError, OutputExistsError

__all__ = ["atomic_target", "staged_folder"]


@contextmanager
def atomic_target(target: str | Path, *, overwrite: bool) -> Iterator[Path]:
    """Yield a temporary path beside ``target``; move it onto ``target`` on success.

    Parameters
    ----------
    target : path
        The final output path.
    overwrite : bool
        Whether an existing ``target`` may be replaced.

    Raises
    ------
    OutputExistsError
        If ``target`` exists and ``overwrite`` is false.
    OutputError
        If the folder cannot be created or written.
    """
    target = Path(target)
    if target.exists() and not overwrite:
        raise OutputExistsError(
            str(target), "already exists", "pass --overwrite or choose another output path"
        )
    if target.is_dir():
        raise OutputError(str(target), "is a folder", "give a file path for the output")
    blocker = _file_in_the_way(target.parent)
    if blocker is not None:
        raise OutputError(str(blocker), "is a file, not a folder, so the output cannot go under it",
                          "choose another output path")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, name = tempfile.mkstemp(
            prefix=f".{target.stem}.", suffix=f".partial{target.suffix}", dir=target.parent
        )
    except OSError as err:
        raise OutputError(
            str(target.parent), f"cannot be written ({err.strerror or err})",
            "choose a folder you can write to",
        ) from None
    os.close(fd)
    tmp = Path(name)
    tmp.unlink()  # writers create the file themselves (GDAL will not open an empty file)
    try:
        yield tmp
        os.replace(tmp, target)
    except OSError as err:
        if isinstance(err, OutputError):
            raise
        raise OutputError(
            str(target), f"could not be written ({err.strerror or err})",
            "check free disk space and permissions, then run again",
        ) from None
    finally:
        _remove(tmp)


def _file_in_the_way(folder: Path) -> Path | None:
    """The nearest existing ancestor of ``folder`` (itself included) if it is not a folder."""
    for path in (folder, *folder.parents):
        if path.exists():
            return None if path.is_dir() else path
    return None


def _remove(path: Path) -> None:
    for extra in (path, Path(f"{path}-journal"), Path(f"{path}-wal"), Path(f"{path}-shm")):
        try:
            extra.unlink()
        except FileNotFoundError:
            pass
        except IsADirectoryError:
            shutil.rmtree(extra, ignore_errors=True)


@contextmanager
def staged_folder(target: Path, *, overwrite: bool) -> Iterator[Path]:
    """Yield an empty temporary folder beside ``target``; move it onto ``target`` on success.

    Raises
    ------
    OutputExistsError
        If ``target`` exists and ``overwrite`` is false.
    OutputError
        If the folder cannot be created or moved.
    """
    if target.exists() and not overwrite:
        raise OutputExistsError(str(target), "already exists",
                                "pass --overwrite or choose another output path")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{target.name}.", suffix=".partial",
                                    dir=target.parent))
    except OSError as err:
        raise OutputError(str(target.parent), f"cannot be written ({err.strerror or err})",
                          "choose a folder you can write to") from None
    try:
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o777 & ~umask)  # mkdtemp makes it private; give it a normal folder's mode
        yield tmp
        _swap_in(tmp, target)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def _swap_in(tmp: Path, target: Path) -> None:
    old = None
    try:
        if target.exists():
            old = target.with_name(f".{target.name}.{os.getpid()}.old")
            os.replace(target, old)
        os.replace(tmp, target)
    except OSError as err:
        if old is not None and not target.exists():
            os.replace(old, target)
        raise OutputError(str(target), f"could not be moved into place ({err.strerror or err})",
                          "check permissions of the output folder, then run again") from None
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)
