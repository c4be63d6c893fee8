"""Keep two gisrun processes off one output, and clear what killed runs left behind.

A run that writes an output first takes an exclusive lock on it: a lock file
``.<name>.lock`` beside the target, held with ``flock`` for as long as the output
is being built and moved into place. A second run that wants the same output
gets a one-line error at once instead of silently replacing the first run's
result. The kernel drops the lock when its process dies, even under SIGKILL, so a
lock file left behind by a killed run is simply taken over.

Temporary files and folders carry the writing process's id in their names
(``.<stem>.<pid>-<random>.partial<suffix>``). Holding the lock on a target, a
run removes the temporaries of that target whose process is no longer alive:
what a SIGKILL, a power cut or a crash left behind. A temporary of a live
process is never touched.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..errors import OutputError

try:  # POSIX; elsewhere the commit's exclusive create still refuses a second writer
    import fcntl
except ImportError:  # pragma: no cover - not POSIX
    fcntl = None  # type: ignore[assignment]

__all__ = ["OutputBusyError", "OutputLock", "leftover_pattern", "remove_leftovers",
           "temp_prefix", "pid_alive", "write_intent"]


class OutputBusyError(OutputError):
    """Another live gisrun process is writing the same output."""


def temp_prefix(key: str) -> str:
    """Start of the name of a temporary for target ``key`` (a file's stem or a folder's name)."""
    return f".{key}.{os.getpid()}-"


def leftover_pattern(key: str, suffix: str) -> re.Pattern[str]:
    """Names of the temporaries (and SQLite side files) of target ``key``, with their pid."""
    return re.compile(rf"^\.{re.escape(key)}\.(?P<pid>\d+)-[a-z0-9_]+\."
                      rf"(?P<kind>partial|old|commit){re.escape(suffix)}(-journal|-wal|-shm)?$")


def pid_alive(pid: int) -> bool:
    """Whether a process with this id exists (one owned by another user counts)."""
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    except OSError:  # pragma: no cover - e.g. an id out of range
        return False
    return True


def remove_leftovers(target: Path, key: str, suffix: str) -> list[Path]:
    """Remove the temporaries of ``target`` whose writing process is dead; return them.

    A killed run's record of the moves it had begun (``.commit``, see
    :func:`write_intent`) is honoured first: every output it lists that is still
    a temporary is moved in, since all were complete. An old version moved aside
    while a folder was swapped (``.old``) is put back when ``target`` is missing
    (the run died between the two renames); otherwise it is removed. Call this
    only while holding the target's :class:`OutputLock`.
    """
    pattern = leftover_pattern(key, suffix)
    removed: list[Path] = []
    try:
        names = sorted(os.listdir(target.parent))
    except OSError:
        return removed
    dead = [(name, match) for name in names if (match := pattern.match(name)) is not None
            and not pid_alive(int(match["pid"]))]
    for name, match in dead:  # first finish the moves a killed run had begun
        if match["kind"] == "commit":
            _finish_moves(target.parent / name)
    for name, match in dead:
        path = target.parent / name
        if not os.path.lexists(path):
            continue
        if match["kind"] == "old" and not os.path.lexists(target) and not match[3]:
            os.replace(path, target)
            continue
        if path.is_dir() and not path.is_symlink():
            shutil.rmtree(path, ignore_errors=True)
        else:
            path.unlink(missing_ok=True)
        removed.append(path)
    return removed


def write_intent(staged: Sequence[Any]) -> Path:
    """Record the moves about to be made (``tmp``, ``target``, ``folder`` of each); return the file.

    Named after the first target (``.<stem>.<pid>-<random>.commit<suffix>``), so
    the next run on that output finds it.
    """
    first = Path(staged[0].target)
    fd, name = tempfile.mkstemp(prefix=temp_prefix(first.stem), suffix=f".commit{first.suffix}",
                                dir=first.parent)
    moves = [[os.path.abspath(s.tmp), os.path.abspath(s.target), bool(s.folder)] for s in staged]
    with os.fdopen(fd, "w", encoding="utf-8") as handle:
        json.dump(moves, handle)
        handle.flush()
        os.fsync(handle.fileno())
    return Path(name)


def _finish_moves(intent: Path) -> None:
    """Move in every output a killed run had finished but not yet moved (all were complete)."""
    try:
        moves = json.loads(intent.read_text(encoding="utf-8"))
    except (OSError, ValueError):  # killed while writing the intent: no move had begun
        return
    for tmp, target, folder in moves:
        tmp, target = Path(tmp), Path(target)
        if not tmp.exists():
            continue  # moved in before the kill
        if folder and os.path.lexists(target):
            old = Path(tempfile.mktemp(prefix=temp_prefix(target.name),  # noqa: S306
                                       suffix=".old", dir=target.parent))
            os.replace(target, old)
            os.replace(tmp, target)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, target)
@dataclass
class OutputLock:
    """An exclusive lock on one output path, held by this process until :meth:`release`."""

    target: Path
    fd: int | None = None

    @property
    def path(self) -> Path:
        """The lock file, ``.<name>.lock`` beside the target."""
        return self.target.with_name(f".{self.target.name}.lock")

    def acquire(self) -> OutputLock:
        """Take the lock, or raise :class:`OutputBusyError` naming the process that holds it.

        Raises
        ------
        OutputBusyError
            Another process holds the lock.
        OutputError
            The lock file cannot be created.
        """
        if fcntl is None:  # pragma: no cover - not POSIX
            return self
        while True:
            try:
                fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
            except OSError as err:
                raise OutputError(str(self.target.parent),
                                  f"cannot be written ({err.strerror or err})",
                                  "choose a folder you can write to") from None
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                holder = _read_pid(fd)
                os.close(fd)
                raise OutputBusyError(
                    str(self.target), f"is being written by another gisrun run{holder}",
                    "wait for that run to finish, or choose another output path") from None
            if _same_file(fd, self.path):  # not a lock file removed by its last holder
                break
            os.close(fd)
        os.ftruncate(fd, 0)
        os.write(fd, f"{os.getpid()}\n".encode())
        self.fd = fd
        return self

    def release(self) -> None:
        """Remove the lock file and drop the lock (in that order, so no one locks a stale file)."""
        if self.fd is None:
            return
        try:
            if _same_file(self.fd, self.path):
                self.path.unlink(missing_ok=True)
        finally:
            os.close(self.fd)
            self.fd = None


def _same_file(fd: int, path: Path) -> bool:
    try:
        on_disk = os.stat(path)
    except FileNotFoundError:
        return False
    held = os.fstat(fd)
    return (held.st_dev, held.st_ino) == (on_disk.st_dev, on_disk.st_ino)


def _read_pid(fd: int) -> str:
    try:
        text = os.pread(fd, 32, 0).decode("ascii", "replace").strip()
    except OSError:
        return ""
    return f" (process {text})" if text.isdigit() else ""
