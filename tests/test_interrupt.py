"""A run stopped by Ctrl-C (SIGINT) or SIGTERM while writing leaves the earlier output intact.

The demo is copied to ``tmp_path`` and run once to make an earlier output. A second run with
``--overwrite`` starts in a subprocess; as soon as its temporary ``.partial`` GeoPackage appears
beside the target (so it is writing), the test sends the signal. The earlier output must be
byte-for-byte unchanged and no temporary file may remain. Exit codes 130 (SIGINT) and 143
(SIGTERM) are 128 + the signal number (common practice).
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from gisrun.cli.main import main

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"
WAIT_FOR_WRITING_S = 180.0

#: An interrupt test (slow); POSIX signals only.
pytestmark = [pytest.mark.slow,
              pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals")]


@pytest.fixture(scope="module")
def earlier_output(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo's GeoPackage from a finished run (written once for this module)."""
    target = tmp_path_factory.mktemp("earlier") / "runoff.gpkg"
    assert main(["run", str(DEMO), "--output", str(target), "--no-extras", "--quiet"]) == 0
    return target


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file()}


def _start_run(project: Path, target: Path) -> subprocess.Popen[str]:
    # the child behaves as if started from a terminal: Ctrl-C raises KeyboardInterrupt even if
    # this test process was started with SIGINT ignored (as background jobs are)
    code = (
        "import signal; signal.signal(signal.SIGINT, signal.default_int_handler)\n"
        "from gisrun.cli.main import main\n"
        f"raise SystemExit(main(['run', {str(project)!r}, '--output', {str(target)!r}, "
        "'--overwrite', '--no-extras', '--quiet']))\n"
    )
    return subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def _wait_until_writing(proc: subprocess.Popen[str], folder: Path) -> None:
    deadline = time.monotonic() + WAIT_FOR_WRITING_S
    while time.monotonic() < deadline:
        if any(".partial" in p.name for p in folder.iterdir()):
            return
        if proc.poll() is not None:
            out, err = proc.communicate()
            pytest.fail(f"the run ended (exit {proc.returncode}) before writing began:\n{err}")
        time.sleep(0.01)
    proc.kill()
    proc.communicate()
    pytest.fail("no .partial file appeared in time")


@pytest.mark.parametrize(("signum", "exit_code"), [(signal.SIGTERM, 143), (signal.SIGINT, 130)],
                         ids=["SIGTERM", "SIGINT"])
def test_interrupted_overwrite_keeps_the_earlier_output(tmp_path, earlier_output, signum,
                                                         exit_code):
    project = tmp_path / "demo"
    shutil.copytree(DEMO, project, ignore=shutil.ignore_patterns("output"))
    folder = tmp_path / "results"
    folder.mkdir()
    target = folder / "runoff.gpkg"
    shutil.copyfile(earlier_output, target)
    before = _snapshot(folder)

    proc = _start_run(project, target)
    _wait_until_writing(proc, folder)
    proc.send_signal(signum)
    try:
        _, err = proc.communicate(timeout=120)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.communicate()
        pytest.fail("the run did not stop after the signal")

    assert proc.returncode == exit_code, err
    assert "Traceback" not in err
    assert "interrupted" in err and "unchanged" in err
    assert _snapshot(folder) == before  # same names (no temporary left) and same bytes


# --- the GeoPackage and its extras folder change together --------------------------------------

#: Storms kept in the extras tests' copy of the demo: a design storm and a rain grid (every kind
#: of extra file), so a finished run with extras takes a third of the whole demo's time.
EXTRAS_STORMS = ("nrcs_ii_24h_2yr_50mm", "radar_event")


def demo_with_storms(target: Path, names: tuple[str, ...]) -> Path:
    """A copy of the demo whose project file keeps only the ``[[storms]]`` blocks ``names``."""
    shutil.copytree(DEMO, target, ignore=shutil.ignore_patterns("output"))
    head, *blocks = (target / "gisrun.toml").read_text().split("\n[[storms]]\n")
    kept = [b for b in blocks if any(f'name = "{n}"' in b for n in names)]
    assert len(kept) == len(names), "a kept storm is no longer in the demo's project file"
    (target / "gisrun.toml").write_text("\n[[storms]]\n".join([head, *kept]))
    return target


@pytest.fixture(scope="module")
def small_demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return demo_with_storms(tmp_path_factory.mktemp("small") / "demo", EXTRAS_STORMS)


@pytest.fixture(scope="module")
def earlier_with_extras(tmp_path_factory: pytest.TempPathFactory, small_demo: Path) -> Path:
    """The GeoPackage and its ``_files`` folder from a finished run of the demo's copy."""
    folder = tmp_path_factory.mktemp("earlier_extras")
    assert main(["run", str(small_demo), "--output", str(folder / "runoff.gpkg"),
                 "--quiet"]) == 0
    return folder


def _wait_for_extras(proc: subprocess.Popen[str], folder: Path) -> None:
    """Wait for the file flag that says the extras are being written: their staged folder."""
    deadline = time.monotonic() + WAIT_FOR_WRITING_S
    while time.monotonic() < deadline:
        if any(p.name.startswith(".runoff_files.") and p.name.endswith(".partial")
               for p in folder.iterdir()):
            return
        if proc.poll() is not None:
            _, err = proc.communicate()
            pytest.fail(f"the run ended (exit {proc.returncode}) before the extras began:\n{err}")
        time.sleep(0.01)  # polling interval of the file flag
    proc.kill()
    proc.communicate()
    pytest.fail("no staged extras folder appeared in time")


@pytest.mark.parametrize(("signum", "exit_code"), [(signal.SIGTERM, 143), (signal.SIGINT, 130)],
                         ids=["SIGTERM", "SIGINT"])
def test_interrupted_extras_keep_the_earlier_geopackage_and_extras(tmp_path, earlier_with_extras,
                                                                   small_demo, signum, exit_code):
    project = small_demo
    folder = tmp_path / "results"
    shutil.copytree(earlier_with_extras, folder)
    before = _snapshot(folder)
    code = (
        "import signal; signal.signal(signal.SIGINT, signal.default_int_handler)\n"
        "from gisrun.cli.main import main\n"
        f"raise SystemExit(main(['run', {str(project)!r}, '--output', "
        f"{str(folder / 'runoff.gpkg')!r}, '--overwrite', '--quiet']))\n"
    )
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    _wait_for_extras(proc, folder)
    proc.send_signal(signum)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == exit_code, err
    assert "interrupted" in err and "unchanged" in err
    assert _snapshot(folder) == before  # the old GeoPackage and the old extras, nothing else


def _signal_when_moving(monkeypatch: pytest.MonkeyPatch, name: str) -> None:
    """Send this process SIGTERM just before the move of the output called ``name``."""
    import gisrun.io.commit as commit

    original = commit._move_in

    def move_in(item: commit._Staged) -> None:
        if item.target.name == name:
            os.kill(os.getpid(), signal.SIGTERM)
        original(item)

    monkeypatch.setattr(commit, "_move_in", move_in)


def test_a_signal_during_the_final_moves_is_held_until_all_are_in(tmp_path, capsys, monkeypatch):
    from bad_inputs_helpers import make_project

    project = make_project(tmp_path / "project")
    _signal_when_moving(monkeypatch, "result_files")  # after the GeoPackage was moved in
    code = main(["run", str(project), "--quiet"])
    err = capsys.readouterr().err
    assert code == 143, err
    out = project.parent / "out"
    assert "interrupted while the finished outputs were moved into place; they are complete" \
        in err and str(out / "result.gpkg") in err
    assert sorted(p.name for p in out.iterdir()) == ["result.gpkg", "result_files"]
    assert (out / "result_files" / "report.html").is_file()


def test_a_signal_while_a_raster_is_moved_into_the_staged_folder_discards_all(tmp_path, capsys,
                                                                              monkeypatch):
    from bad_inputs_helpers import make_project

    project = make_project(tmp_path / "project")
    _signal_when_moving(monkeypatch, "runoff_depth_mm_steady.tif")
    code = main(["run", str(project), "--quiet"])
    err = capsys.readouterr().err
    assert code == 143, err
    assert "discarded" in err and "unchanged" in err
    assert not (project.parent / "out").exists()  # the folder the run made is gone too
