"""Other processes at work on the same files: a GIS program editing the user's GeoPackage,
a second gisrun run on the same output, and the leftovers of a run killed with SIGKILL.

Every step is synchronised through a pipe (the other process answers ``ok`` to each command)
or a file flag (a ``.partial`` temporary appearing beside the target), never through a sleep.
The user's GeoPackage and the tiny project are invented test data built in ``tmp_path``.
"""

from __future__ import annotations

import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import time
from contextlib import closing
from pathlib import Path

import pyogrio
import pytest
from bad_inputs_helpers import make_project, run_cli
from test_user_geopackage import GISRUN_LAYERS, _user_geopackage

from gisrun.io.locks import remove_leftovers
from gisrun.workflow.stream import run_and_write

#: Other processes and POSIX signals (slow).
pytestmark = [pytest.mark.slow,
              pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals and flock")]

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"
WAIT_FOR_WRITING_S = 180.0

#: A program that keeps the GeoPackage open in WAL mode and edits it when told to.
EDITOR = """
import sqlite3, sys
db = sqlite3.connect(sys.argv[1], isolation_level=None)
assert db.execute("PRAGMA journal_mode=WAL").fetchone()[0] == "wal"
for line in sys.stdin:
    command, _, arg = line.strip().partition(" ")
    if command == "insert":
        db.execute("INSERT INTO inspections (inlet, blocked, checked_on) "
                   "VALUES (?, 0, '2024-01-01')", (arg,))
    elif command in ("begin", "commit"):
        db.execute("BEGIN IMMEDIATE" if command == "begin" else "COMMIT")
    elif command == "quit":
        break
    print("ok", flush=True)
db.close()
"""


class Editor:
    """Another program holding the user's GeoPackage open; each command waits for its ``ok``."""

    def __init__(self, path: Path) -> None:
        self.proc = subprocess.Popen([sys.executable, "-c", EDITOR, str(path)],
                                     stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)

    def __call__(self, command: str) -> None:
        self.proc.stdin.write(command + "\n")
        self.proc.stdin.flush()
        assert self.proc.stdout.readline().strip() == "ok", f"editor failed on {command!r}"

    def quit(self) -> None:
        self.proc.stdin.write("quit\n")
        self.proc.stdin.flush()
        assert self.proc.wait(timeout=60) == 0


def test_a_wal_editor_keeps_every_committed_row_and_the_file_stays_sound(tmp_path):
    project = make_project(tmp_path / "project")
    user = _user_geopackage(tmp_path / "town.gpkg")
    editor = Editor(user)
    try:
        editor("insert IN-100")  # committed; sits in the -wal file while the editor is open
        editor("begin")
        editor("insert IN-101")  # not committed yet when gisrun copies the file
        assert Path(f"{user}-wal").stat().st_size > 0

        def progress(message: str) -> None:
            if message == "writing outputs":  # during the run, after gisrun's copy was taken
                editor("commit")
                editor("insert IN-102")

        run_and_write(project, into=user, progress=progress)
        editor("insert IN-103")  # the editor's connection still works on the same file
    finally:
        editor.quit()
    with closing(sqlite3.connect(user)) as db:
        assert db.execute("PRAGMA integrity_check").fetchone() == ("ok",)
        inlets = [r[0] for r in db.execute("SELECT inlet FROM inspections ORDER BY fid")]
    assert inlets == ["IN-7", "IN-9", "IN-12", "IN-100", "IN-101", "IN-102", "IN-103"]
    assert GISRUN_LAYERS <= {str(row[0]) for row in pyogrio.list_layers(user)}
    out = pyogrio.read_dataframe(user, layer="runoff_steady", read_geometry=False)
    assert sorted(out["subcatchment_id"]) == ["S1", "S2"]


# --- a second gisrun run on the same output --------------------------------------------------

def _start_run(project: Path, target: Path, *extra: str) -> subprocess.Popen[str]:
    code = ("from gisrun.cli.main import main\n"
            f"raise SystemExit(main(['run', {str(project)!r}, '--output', {str(target)!r}, "
            f"'--quiet', *{list(extra)!r}]))\n")
    return subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def _wait_for_partial(proc: subprocess.Popen[str], folder: Path) -> None:
    """Wait for the file flag that says the run is writing: its temporary appears."""
    deadline = time.monotonic() + WAIT_FOR_WRITING_S
    while time.monotonic() < deadline:
        if any(".partial" in p.name for p in folder.iterdir()):
            return
        if proc.poll() is not None:
            pytest.fail(f"the run ended (exit {proc.returncode}) before writing began:\n"
                        f"{proc.communicate()[1]}")
        time.sleep(0.01)  # polling interval of the file flag
    proc.kill()
    proc.communicate()
    pytest.fail("no .partial file appeared in time")


@pytest.fixture
def demo(tmp_path: Path) -> Path:
    project = tmp_path / "demo"
    shutil.copytree(DEMO, project, ignore=shutil.ignore_patterns("output"))
    return project


def test_a_second_run_on_the_same_new_output_is_refused(tmp_path, demo, capsys):
    folder = tmp_path / "results"
    folder.mkdir()
    target = folder / "runoff.gpkg"
    first = _start_run(demo, target, "--no-extras")
    try:
        _wait_for_partial(first, folder)
        first.send_signal(signal.SIGSTOP)  # hold the first run while it is writing
        code, _, err = run_cli(capsys, ["run", str(demo), "--output", str(target),
                                        "--no-extras", "--quiet"])
    finally:
        first.send_signal(signal.SIGCONT)
    _, first_err = first.communicate(timeout=300)
    assert first.returncode == 0, first_err
    assert code == 2, err
    assert f"{target}: is being written by another gisrun run (process {first.pid})" in err
    assert "wait for that run to finish" in err
    assert sorted(p.name for p in folder.iterdir()) == ["runoff.gpkg"]


# --- leftovers of killed runs ----------------------------------------------------------------

def test_a_later_run_clears_what_a_killed_run_left(tmp_path, demo, capsys):
    folder = tmp_path / "results"
    folder.mkdir()
    target = folder / "runoff.gpkg"
    killed = _start_run(demo, target, "--no-extras")
    _wait_for_partial(killed, folder)
    killed.kill()  # SIGKILL: no cleanup code runs
    killed.communicate()
    assert any(".partial" in p.name for p in folder.iterdir())
    code, _, err = run_cli(capsys, ["run", str(demo), "--output", str(target), "--no-extras",
                                    "--quiet"])
    assert code == 0, err
    assert sorted(p.name for p in folder.iterdir()) == ["runoff.gpkg"]


def _dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def test_only_leftovers_of_dead_processes_are_removed(tmp_path, capsys):
    project = make_project(tmp_path / "project")
    out = project.parent / "out"
    out.mkdir()
    dead, alive = _dead_pid(), subprocess.Popen([sys.executable, "-c", "input()"],
                                                stdin=subprocess.PIPE, text=True)
    try:
        dead_files = [f".result.{dead}-abc123.partial.gpkg",
                      f".result.{dead}-abc123.partial.gpkg-journal",
                      f".result_files.{dead}-x9y8.partial"]
        live_file = f".result.{alive.pid}-def456.partial.gpkg"
        for name in [*dead_files[:2], live_file]:
            (out / name).write_bytes(b"left behind")
        (out / dead_files[2]).mkdir()
        (out / dead_files[2] / "report.html").write_text("half a report")
        other = out / f".other.{dead}-abc123.partial.gpkg"  # another target's: not ours to clear
        other.write_bytes(b"someone else's")
        code, _, err = run_cli(capsys, ["run", str(project.parent), "--quiet"])
        assert code == 0, err
        names = sorted(p.name for p in out.iterdir())
        assert names == sorted([other.name, live_file, "result.gpkg", "result_files"])
    finally:
        alive.communicate("\n")


def test_a_folder_moved_aside_by_a_killed_run_is_put_back(tmp_path, capsys):
    project = make_project(tmp_path / "project")
    out = project.parent / "out"
    code, _, err = run_cli(capsys, ["run", str(project.parent), "--quiet"])
    assert code == 0, err
    report = (out / "result_files" / "report.html").read_bytes()
    # a run killed between moving the old extras aside and moving the new ones in
    os.rename(out / "result_files", out / f".result_files.{_dead_pid()}-q1w2e3.old")
    assert remove_leftovers(out / "result_files", "result_files", "") == []
    assert (out / "result_files" / "report.html").read_bytes() == report
    assert sorted(p.name for p in out.iterdir()) == ["result.gpkg", "result_files"]
