"""Outputs that would destroy an input or each other are refused before any work.

Invented test data: the tiny project of :mod:`bad_inputs_helpers` and storms made here.
"""

from __future__ import annotations

import os
import subprocess
import sys

import geopandas as gpd
import pytest
from bad_inputs_helpers import X0, Y0, assert_one_clear_error, make_project, run_cli
from shapely.geometry import box

import gisrun.io.commit as commit
from gisrun.errors import OutputError, OutputExistsError, VectorError
from gisrun.io.commit import OutputSet, output_set
from gisrun.io.files import atomic_target
from gisrun.io.locks import write_intent
from gisrun.write.extras import check_plot_ids

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), file signature


def test_overwrite_refuses_an_extras_folder_that_holds_a_storm_file(tmp_path, capsys):
    folder = tmp_path / "project"
    make_project(folder)
    assert run_cli(capsys, ["run", str(folder), "--quiet"])[0] == 0
    kept = folder / "out" / "result_files" / "storm.csv"  # the user keeps the storm there
    (folder / "storm.csv").rename(kept)
    toml = folder / "gisrun.toml"
    toml.write_text(toml.read_text().replace('path = "storm.csv"',
                                             'path = "out/result_files/storm.csv"'))
    text = kept.read_text()
    code, out, err = run_cli(capsys, ["run", str(folder), "--overwrite", "--quiet"])
    assert_one_clear_error(code, err + out, "result_files: would replace an input of this run "
                                            "([[storms]] 1.path")
    assert kept.read_text() == text


def test_storm_plot_onto_the_storm_csv_is_refused(tmp_path, capsys):
    csv = tmp_path / "h.csv"
    code, out, err = run_cli(capsys, ["storm", "make", "--kind", "uniform", "--depth", "20",
                                      "--duration-min", "60", "-o", str(csv), "--plot",
                                      str(csv)])
    assert_one_clear_error(code, err + out, "h.csv: is also the --output CSV")
    assert not csv.exists()  # refused before anything was written


def test_storm_show_plot_onto_its_own_csv_is_refused(tmp_path, capsys):
    csv = tmp_path / "h.csv"
    assert run_cli(capsys, ["storm", "make", "--kind", "uniform", "--depth", "20",
                            "--duration-min", "60", "-o", str(csv)])[0] == 0
    text = csv.read_text()
    code, out, err = run_cli(capsys, ["storm", "show", str(csv), "--plot", str(csv)])
    assert_one_clear_error(code, err + out, "h.csv: would replace an input of this run")
    assert csv.read_text() == text and not text.startswith(PNG_SIGNATURE.decode("latin-1"))


def test_storm_make_refuses_to_write_over_its_idf_table(tmp_path, capsys):
    table = tmp_path / "idf.csv"
    table.write_text("duration_min,intensity_mm_per_h\n5,120\n10,90\n30,50\n60,30\n")
    text = table.read_text()
    code, out, err = run_cli(capsys, ["storm", "make", "--kind", "alternating_block",
                                      "--idf-table", str(table), "--duration-min", "60",
                                      "-o", str(table), "--overwrite"])
    assert_one_clear_error(code, err + out, "idf.csv: would replace an input of this run "
                                            "(--idf-table")
    assert table.read_text() == text


def _two_ids(*ids: str) -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame({"subcatchment_id": list(ids)},
                            geometry=[box(X0, Y0, X0 + 1, Y0 + 1)] * len(ids), crs="EPSG:32617")


def test_two_plot_ids_with_one_file_name_are_refused():
    with pytest.raises(VectorError, match=r"--plot s_1: would be written to the same file as "
                                          r"--plot S-1"):
        check_plot_ids(_two_ids("S-1", "s_1"), ["S-1", "s_1"])
    assert check_plot_ids(_two_ids("S-1", "s_1"), ["S-1", "S-1"]) == ["S-1"]


def test_plot_ids_with_one_file_name_fail_before_the_run(tmp_path, capsys):
    from bad_inputs_helpers import square, write_subcatchments

    folder = tmp_path / "project"
    make_project(folder)
    (folder / "sub.gpkg").unlink()
    write_subcatchments(folder / "sub.gpkg", [square(0, 0, 50, 100), square(50, 0, 100, 100)],
                        ids=["S-1", "s_1"])
    code, out, err = run_cli(capsys, ["run", str(folder), "--plot", "S-1", "--plot", "s_1"])
    assert_one_clear_error(code, err + out, "--plot s_1")
    assert not (folder / "out").exists()


def test_a_target_created_by_another_program_meanwhile_is_not_replaced(tmp_path):
    target = tmp_path / "result.csv"
    with pytest.raises(OutputExistsError, match=r"result\.csv: was created by another program"):
        with atomic_target(target, overwrite=False) as tmp:
            tmp.write_text("ours\n")
            target.write_text("theirs\n")  # another program, after our existence check
    assert target.read_text() == "theirs\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["result.csv"]


def test_a_failed_second_move_puts_the_first_output_back(tmp_path, monkeypatch):
    import gisrun.io.commit as commit

    gpkg, folder = tmp_path / "result.gpkg", tmp_path / "result_files"
    gpkg.write_text("earlier GeoPackage")
    folder.mkdir()
    (folder / "report.html").write_text("earlier report")
    original = commit._move_in

    def move_in(item: commit._Staged) -> None:
        if item.folder:  # the first move (the GeoPackage) is made; this one fails
            raise OutputError(str(item.target), "could not be moved into place (I/O error)",
                              "check free disk space and permissions, then run again")
        original(item)

    monkeypatch.setattr(commit, "_move_in", move_in)
    with pytest.raises(OutputError, match=r"result_files: could not be moved into place"):
        with output_set() as outputs:
            outputs.file(gpkg, overwrite=True).write_text("new GeoPackage")
            (outputs.folder(folder, overwrite=True) / "report.html").write_text("new report")
    assert gpkg.read_text() == "earlier GeoPackage"  # the pair changed not at all
    assert (folder / "report.html").read_text() == "earlier report"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["result.gpkg", "result_files"]


def test_a_run_killed_during_the_moves_is_finished_by_the_next(tmp_path):
    gpkg, folder = tmp_path / "result.gpkg", tmp_path / "result_files"
    gpkg.write_text("earlier GeoPackage")
    folder.mkdir()
    (folder / "report.html").write_text("earlier report")
    outputs = OutputSet()
    outputs.file(gpkg, overwrite=True).write_text("new GeoPackage")
    (outputs.folder(folder, overwrite=True) / "report.html").write_text("new report")
    staged = outputs._staged
    intent = write_intent(staged)
    commit._move_in(staged[0])  # the GeoPackage is in; then SIGKILL, which drops its locks
    for held in outputs._locks.values():
        held.release()
    mine, dead = f".{os.getpid()}-", f".{_dead_pid()}-"
    intent.write_text(intent.read_text().replace(mine, dead))
    for path in tmp_path.iterdir():  # the temporaries of a process that is gone
        if mine in path.name:
            path.rename(path.with_name(path.name.replace(mine, dead)))
    with output_set() as later:  # the next run on the same output
        later.lock(gpkg)
    assert gpkg.read_text() == "new GeoPackage"
    assert (folder / "report.html").read_text() == "new report"  # the pair is whole again
    assert sorted(p.name for p in tmp_path.iterdir()) == ["result.gpkg", "result_files"]


def _dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid
