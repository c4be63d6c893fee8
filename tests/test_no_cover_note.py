"""A run without a land-cover raster says what it assumes (issue 15, item 10).

Invented test data from :mod:`bad_inputs_helpers`.
"""

from __future__ import annotations

import pyogrio
from bad_inputs_helpers import edit_toml, make_project, run_cli, warning_lines

from gisrun import run

COVER_TABLE = '[cover]\npath = "cover.tif"\n\n[cover.codes]\n"5" = "open_space_good"\n'
#: TR-55 (1986) Table 2-2a, open space in good condition (grass cover > 75 %): CN 39/61/74/80
#: (from memory; see tests/parameters/test_published_sources.py); 5 mm depression storage is
#: gisrun's shipped value for grass (common practice).
EXPECTED = ("no land-cover raster, so every unit is priced as fully pervious open space in good "
            "condition (open_space_good: no impervious share, TR-55 curve numbers 39/61/74/80 "
            "for groups A-D) with 5 mm depression storage")


def no_cover_project(tmp_path):
    project = make_project(tmp_path / "p")
    edit_toml(project, COVER_TABLE, "")
    return project


def test_run_without_cover_warns(tmp_path):
    # issue 15 item 10: the report used to say "Warnings: None"
    result = run(no_cover_project(tmp_path))
    notes = [w for w in result.warnings if "no land-cover raster" in w]
    assert len(notes) == 1 and EXPECTED in notes[0]
    assert notes[0].startswith("gisrun.toml:[cover]: ")


def test_cli_run_and_check_print_the_note(tmp_path, capsys):
    # issue 15 item 10: the CLI summary and check both say it; run_info keeps it
    project = no_cover_project(tmp_path)
    code, out, _ = run_cli(capsys, ["run", str(project)])
    assert code == 0 and "no land-cover raster" in out
    info = pyogrio.read_dataframe(project.parent / "out" / "result.gpkg", layer="run_info")
    warnings_rows = info.loc[info["key"] == "warning", "value"].tolist()
    assert any(EXPECTED in w for w in warnings_rows)
    report = (project.parent / "out" / "result_files" / "report.html").read_text()
    assert "no land-cover raster" in report and "Warnings</h2><p>None" not in report
    code, _, err = run_cli(capsys, ["check", str(project)])
    assert code == 0
    assert any("no land-cover raster" in line for line in warning_lines(err))


def test_no_note_with_a_cover_raster(tmp_path):
    assert not [w for w in run(make_project(tmp_path / "p")).warnings
                if "land-cover" in w]
