"""A disk that fills up while gisrun adds its layers to a user's GeoPackage (``--into``).

A real small file system (a 4 MB tmpfs, mounted when the tests run as root; skipped otherwise)
holds the user's GeoPackage (invented, see :mod:`test_user_geopackage`). Once the run has built
its layers beside the file, a filler file takes all but a few kilobytes of the space, so the
transaction that adds the layers in place meets SQLite's real "database or disk is full".
"""

from __future__ import annotations

import hashlib
import os
import sqlite3
import subprocess
import sys
from collections.abc import Iterator
from contextlib import closing
from pathlib import Path

import pytest
from bad_inputs_helpers import make_project
from test_user_geopackage import _user_geopackage

from gisrun.errors import OutputError
from gisrun.workflow.stream import run_and_write

#: Mounts a file system (a process); root on Linux only.
pytestmark = [pytest.mark.slow,
              pytest.mark.skipif(sys.platform != "linux" or os.geteuid() != 0,
                                 reason="mounting a small tmpfs needs root on Linux")]


@pytest.fixture
def small_disk(tmp_path: Path) -> Iterator[Path]:
    mount = tmp_path / "small"
    mount.mkdir()
    made = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=4m", "tmpfs", str(mount)],
                          capture_output=True, text=True)
    if made.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {made.stderr.strip()}")
    try:
        yield mount
    finally:
        subprocess.run(["umount", str(mount)], check=True)


def _fill(folder: Path, leave_bytes: int = 4096) -> Path:
    """Take all but ``leave_bytes`` of the free space of ``folder``'s file system."""
    stats = os.statvfs(folder)
    filler = folder / "filler.bin"
    with open(filler, "wb") as handle:
        handle.write(b"\0" * max(stats.f_bavail * stats.f_frsize - leave_bytes, 0))
    return filler


def test_a_full_disk_while_adding_layers_leaves_the_user_file_as_it_was(tmp_path, small_disk):
    project = make_project(tmp_path / "project")
    user = _user_geopackage(small_disk / "town.gpkg")
    digest = hashlib.sha256(user.read_bytes()).hexdigest()
    filled: list[Path] = []

    def fill_after_building(*_: object) -> None:  # the layers are built; the merge comes next
        filled.append(_fill(small_disk))

    with pytest.raises(OutputError, match=r"town\.gpkg: could not be written \(database or "
                                          r"disk is full\); check free disk space"):
        run_and_write(project, into=user, extras=fill_after_building)
    assert filled
    assert hashlib.sha256(user.read_bytes()).hexdigest() == digest
    with closing(sqlite3.connect(user)) as db:
        assert db.execute("PRAGMA integrity_check").fetchone() == ("ok",)
    assert sorted(p.name for p in small_disk.iterdir()) == ["filler.bin", "town.gpkg"]
