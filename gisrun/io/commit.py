"""Build several outputs beside their targets, then move them all into place together.

A run's GeoPackage and its ``<output>_files/`` folder must change together: an
:class:`OutputSet` hands out temporary files and folders beside their targets
(locked against other gisrun runs, see :mod:`gisrun.io.locks`), and
:meth:`OutputSet.commit` moves them all in at the end, with Ctrl-C and SIGTERM
held back until the last one is in place. If one move fails, the ones already
made are undone (the old versions were kept aside until then). Steps added with
:meth:`OutputSet.add_step` (adding layers to a user's GeoPackage in one SQLite
transaction) run after the moves; if one fails, the moves are undone too.

A signal that arrives during the commit is not lost: once everything is in
place, :class:`InterruptedAfterCommit` is raised, so the caller can say
truthfully that the outputs were completed. A set committed while another is
open (a raster moved into a staged folder) passes the signal on as usual
instead, since the outer outputs are not in place yet.
"""

from __future__ import annotations

import errno
import os
import shutil
import signal
import tempfile
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from ..errors import OutputError, OutputExistsError
from .locks import OutputLock, remove_leftovers, temp_prefix, write_intent

__all__ = ["InterruptedAfterCommit", "OutputSet", "output_set", "signals_deferred"]


class InterruptedAfterCommit(BaseException):
    """Ctrl-C or SIGTERM arrived while outputs were moved into place; they all were.

    A ``BaseException`` like ``KeyboardInterrupt``; ``signum`` is the signal, ``paths``
    the outputs that are complete.
    """

    def __init__(self, signum: int, paths: list[Path]) -> None:
        super().__init__(signum, paths)
        self.signum, self.paths = signum, paths


#: How many output sets are open; a set committed inside another (a file written into a staged
#: folder) passes a signal on as usual, since the outer outputs are not in place yet.
_OPEN_SETS = [0]


@contextmanager
def signals_deferred() -> Iterator[list[int]]:
    """Hold back SIGINT and SIGTERM in the block; yield the list of those that arrived.

    Only the main thread can handle signals; elsewhere this does nothing.
    """
    arrived: list[int] = []
    if threading.current_thread() is not threading.main_thread():
        yield arrived
        return
    kinds = [k for k in (signal.SIGINT, signal.SIGTERM)  # an ignored signal stays ignored
             if signal.getsignal(k) not in (signal.SIG_IGN, None)]
    previous = {k: signal.signal(k, lambda signum, _frame: arrived.append(signum)) for k in kinds}
    try:
        yield arrived
    finally:
        for kind, handler in previous.items():
            signal.signal(kind, handler)


@dataclass
class _Staged:
    tmp: Path
    target: Path
    overwrite: bool
    folder: bool
    aside: Path | None = None
    moved: bool = False
    created: bool = False  # there was no target before the move


class OutputSet:
    """Temporary outputs beside their targets, moved into place together by :meth:`commit`."""

    def __init__(self) -> None:
        self._staged: list[_Staged] = []
        self._scratch: list[Path] = []
        self._locks: dict[Path, OutputLock] = {}
        self._steps: list[Callable[[], None]] = []
        self._step_targets: list[Path] = []

    def lock(self, target: Path) -> None:
        """Take the lock on ``target`` (once) and clear its dead runs' temporaries.

        Raises
        ------
        OutputBusyError
            Another gisrun run is writing ``target``.
        """
        key = Path(os.path.abspath(target))
        if key in self._locks:
            return
        _make_parent(key)
        self._locks[key] = OutputLock(key).acquire()
        remove_leftovers(key, key.stem, key.suffix)
        remove_leftovers(key, key.name, "")

    def file(self, target: Path, *, overwrite: bool) -> Path:
        """A temporary path (no file yet) that :meth:`commit` moves onto ``target``."""
        _refuse_file_in_the_way(Path(target))
        self.lock(target)  # first: a killed run's old version is put back before the check
        target = _checked(target, overwrite)
        tmp = _new_temp(target, folder=False)
        self._staged.append(_Staged(tmp, target, overwrite, folder=False))
        return tmp

    def folder(self, target: Path, *, overwrite: bool) -> Path:
        """An empty temporary folder that :meth:`commit` moves onto ``target``."""
        self.lock(target)
        target = _checked(target, overwrite, folder=True)
        tmp = _new_temp(target, folder=True)
        self._staged.append(_Staged(tmp, target, overwrite, folder=True))
        return tmp

    def scratch(self, target: Path) -> Path:
        """A temporary path beside ``target`` that is removed, never moved in."""
        self.lock(target)
        tmp = _new_temp(Path(target), folder=False)
        self._scratch.append(tmp)
        return tmp

    def add_step(self, step: Callable[[], None], target: Path) -> None:
        """Run ``step`` (which writes ``target`` in one transaction) in :meth:`commit`.

        Steps run before the moves: if one fails, nothing has been moved.
        """
        self._steps.append(step)
        self._step_targets.append(Path(target))

    def commit(self) -> None:
        """Move every staged output into place, with Ctrl-C and SIGTERM held back meanwhile.

        Raises
        ------
        OutputExistsError
            A target without ``overwrite`` appeared while the outputs were built.
        OutputError
            A move failed (the moves already made are undone).
        InterruptedAfterCommit
            A signal arrived during the commit, after which all was done.
        """
        with signals_deferred() as arrived:
            for item in self._staged:  # refuse before a step changes anything
                if os.path.lexists(item.target) and not item.overwrite:
                    raise _appeared(item.target)
            for step in self._steps:  # its own transaction: a failure there changes nothing
                step()
            several = len(self._staged) > 1 or (self._steps and self._staged)
            intent = write_intent(self._staged) if several else None
            try:
                for item in self._staged:
                    _move_in(item)
            except BaseException as err:
                for item in reversed(self._staged):
                    _undo(item)
                _drop(intent)
                if self._steps and isinstance(err, OutputError):
                    raise type(err)(err.where, f"{err.problem} (the layers were already added "
                                    f"to {', '.join(map(str, self._step_targets))})",
                                    err.fix) from None
                raise
            for item in self._staged:
                _drop(item.aside)
                item.aside = None
            _drop(intent)
        if arrived and _OPEN_SETS[0] > 1:  # inside an outer set, which is not in place yet
            signal.raise_signal(arrived[0])
        elif arrived:
            raise InterruptedAfterCommit(arrived[0], [*self._step_targets,
                                                      *(s.target for s in self._staged)])

    def close(self) -> None:
        """Remove every temporary left and release the locks."""
        for path in [*(s.tmp for s in self._staged if not s.moved), *self._scratch]:
            _drop(path)
        self._staged, self._scratch, self._steps, self._step_targets = [], [], [], []
        for held in self._locks.values():
            held.release()
        self._locks = {}


@contextmanager
def output_set() -> Iterator[OutputSet]:
    """An :class:`OutputSet` committed when the block ends normally, cleaned up always."""
    outputs = OutputSet()
    _OPEN_SETS[0] += 1
    try:
        yield outputs
        outputs.commit()
    finally:
        _OPEN_SETS[0] -= 1
        outputs.close()


def _checked(target: Path, overwrite: bool, *, folder: bool = False) -> Path:
    target = Path(target)
    if os.path.lexists(target) and not overwrite:
        raise OutputExistsError(str(target), "already exists",
                                "pass --overwrite or choose another output path")
    if target.is_dir() and not folder:
        raise OutputError(str(target), "is a folder", "give a file path for the output")
    return target


def _refuse_file_in_the_way(target: Path) -> None:
    for path in (target.parent, *target.parent.parents):
        if path.exists():
            if not path.is_dir():
                raise OutputError(str(path), "is a file, not a folder, so the output cannot go "
                                  "under it", "choose another output path")
            return


def _make_parent(target: Path) -> None:
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise OutputError(str(target.parent), f"cannot be written ({err.strerror or err})",
                          "choose a folder you can write to") from None


def _new_temp(target: Path, *, folder: bool) -> Path:
    key, suffix = (target.name, "") if folder else (target.stem, target.suffix)
    try:
        if folder:
            tmp = Path(tempfile.mkdtemp(prefix=temp_prefix(key), suffix=".partial",
                                        dir=target.parent))
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(tmp, 0o777 & ~umask)  # mkdtemp makes it private; give a folder's mode
            return tmp
        fd, name = tempfile.mkstemp(prefix=temp_prefix(key), suffix=f".partial{suffix}",
                                    dir=target.parent)
    except OSError as err:
        raise OutputError(str(target.parent), f"cannot be written ({err.strerror or err})",
                          "choose a folder you can write to") from None
    os.close(fd)
    os.unlink(name)  # writers create the file themselves (GDAL will not open an empty file)
    return Path(name)


def _aside_name(target: Path) -> Path:
    key, suffix = (target.name, "") if target.is_dir() else (target.stem, target.suffix)
    return Path(tempfile.mktemp(prefix=temp_prefix(key), suffix=f".old{suffix}",  # noqa: S306
                                dir=target.parent))


def _move_in(item: _Staged) -> None:
    """Move one temporary onto its target, keeping the old version aside until the end."""
    target, exists = item.target, os.path.lexists(item.target)
    try:
        if exists and not item.overwrite:
            raise FileExistsError(errno.EEXIST, "exists")
        if item.folder:
            if exists:
                item.aside = _aside_name(target)
                os.rename(target, item.aside)
            os.rename(item.tmp, target)  # onto an existing non-empty folder this fails
        elif exists:
            item.aside = _second_name(target)
            os.replace(item.tmp, target)
        else:
            _exclusive_move(item.tmp, target)
            item.created = True
    except FileExistsError:
        raise _appeared(target) from None
    except OSError as err:
        if item.folder and err.errno in (errno.ENOTEMPTY, errno.EEXIST):
            raise _appeared(target) from None
        raise OutputError(str(target), f"could not be moved into place ({err.strerror or err})",
                          "check free disk space and permissions, then run again") from None
    item.moved = True


def _second_name(target: Path) -> Path | None:
    """A second name (hard link) for the old file, to put it back on an undo; None if none."""
    aside = _aside_name(target)
    try:
        os.link(target, aside)
    except OSError:  # no hard links here (or not for this file): no undo for this one
        return None
    return aside


def _appeared(target: Path) -> OutputExistsError:
    return OutputExistsError(str(target), "was created by another program while this run went "
                             "on", "pass --overwrite or choose another output path")


def _exclusive_move(tmp: Path, target: Path) -> None:
    """Rename ``tmp`` to ``target`` only if no ``target`` exists (a hard link, then unlink)."""
    try:
        os.link(tmp, target)
    except FileExistsError:
        raise
    except OSError:  # a file system without hard links: the check above is all we have
        if os.path.lexists(target):
            raise FileExistsError(errno.EEXIST, "exists") from None
        os.replace(tmp, target)
        return
    os.unlink(tmp)


def _undo(item: _Staged) -> None:
    """Put back what :func:`_move_in` replaced (best effort; never raises)."""
    try:
        if item.moved:
            if item.folder:
                os.rename(item.target, item.tmp)
                item.moved = False
            elif item.created:
                os.unlink(item.target)
        if item.aside is not None:
            os.replace(item.aside, item.target)
            item.aside = None
    except OSError:
        pass


def _drop(path: Path | None) -> None:
    if path is None:
        return
    for extra in (path, Path(f"{path}-journal"), Path(f"{path}-wal"), Path(f"{path}-shm")):
        try:
            extra.unlink()
        except FileNotFoundError:
            pass
        except (IsADirectoryError, PermissionError):
            shutil.rmtree(extra, ignore_errors=True)
