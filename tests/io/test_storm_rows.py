"""Storm CSV rows that used to change the rain without a word (issue 15, items 3 and 9).

Every file here is invented test data; the expected depths are worked by hand.
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np
import pytest
from bad_inputs_helpers import assert_one_clear_error, edit_toml, make_project, run_cli
from numpy.testing import assert_allclose

from gisrun import run
from gisrun.errors import StormError
from gisrun.io.storm_csv import read_hyetograph_csv, read_idf_table_csv


def _csv(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "rain.csv"
    path.write_text(text)
    return path


# --- item 3: a row with more cells than the header ------------------------------------------

def test_decimal_comma_row_is_an_error_naming_the_row(tmp_path):
    # issue 15 item 3: "5,1,5" (1.5 mm written with a decimal comma) used to read as 1 mm
    path = _csv(tmp_path, "time_min,depth_mm\n0,0\n5,1,5\n10,2\n")
    with pytest.raises(StormError) as err:
        read_hyetograph_csv(path)
    text = str(err.value)
    assert f"{path}:row 2" in text
    assert "3 cells" in text and "header has 2" in text
    assert "decimal comma" in text and "delimiter" in text


def test_extra_cell_in_the_last_row_is_an_error(tmp_path):
    # issue 15 item 3: any row, not only the first data row
    path = _csv(tmp_path, "time_min,intensity_mm_per_h\n15,10\n30,10\n45,10,5\n")
    with pytest.raises(StormError, match=r"row 3: has 3 cells"):
        read_hyetograph_csv(path)


def test_trailing_blank_cells_are_allowed(tmp_path):
    # a spreadsheet export's empty columns change nothing: 1.5 mm and 2 mm (by hand)
    path = _csv(tmp_path, "time_min,depth_mm\n0,0,\n5,1.5,\n10,2,,\n")
    h = read_hyetograph_csv(path)
    assert_allclose(h.depth_m, [0.0015, 0.002])


def test_idf_table_row_with_extra_cells_is_an_error(tmp_path):
    # issue 15 item 3: the IDF table reader shares the row reader
    path = _csv(tmp_path, "duration_min,intensity_mm_per_h\n5,120\n10,95,5\n")
    with pytest.raises(StormError, match=r"row 2: has 3 cells.*decimal comma"):
        read_idf_table_csv(path)


def test_decimal_comma_from_check_and_run_is_one_clear_error(tmp_path, capsys):
    # issue 15 item 3, through the command line
    project = make_project(tmp_path / "p")
    (project.parent / "storm.csv").write_text(
        "time_min,intensity_mm_per_h\n0,0\n15,10\n30,10,5\n45,10\n60,10\n")
    for command in ("check", "run"):
        code, _, err = run_cli(capsys, [command, str(project), "-q"] if command == "run"
                               else [command, str(project)])
        assert_one_clear_error(code, err, "storm.csv:row 3")


# --- item 9: naive ISO times are read as given, whatever the local time zone -----------------

#: Naive times across the start of British Summer Time (clocks go from 01:00 GMT to 02:00 BST
#: on 29 March 2026): 30-min steps as written.
DST_CSV = ("time,depth_mm\n2026-03-29T00:00:00,0\n2026-03-29T00:30:00,1\n"
           "2026-03-29T01:00:00,2\n2026-03-29T01:30:00,3\n2026-03-29T02:00:00,4\n"
           "2026-03-29T02:30:00,5\n")


@pytest.fixture
def local_zone(monkeypatch):
    """Set the process's time zone (TZ) for one test and restore it afterwards."""
    def set_zone(name: str) -> None:
        monkeypatch.setenv("TZ", name)
        time.tzset()
    yield set_zone
    monkeypatch.undo()
    time.tzset()


@pytest.mark.parametrize("zone", ["UTC", "Europe/London", "America/New_York", "Asia/Kolkata"])
def test_naive_iso_times_do_not_depend_on_the_time_zone(tmp_path, local_zone, zone):
    # issue 15 item 9: under Europe/London the 01:30 row (a time that does not exist locally)
    # used to be shifted by an hour, and the file failed with "time does not increase"
    local_zone(zone)
    h = read_hyetograph_csv(_csv(tmp_path, DST_CSV))
    assert_allclose(h.time_s, np.arange(6) * 1800.0)
    assert_allclose(h.depth_m, [0.001, 0.002, 0.003, 0.004, 0.005])


def test_times_with_an_offset_still_count_their_offset(tmp_path, local_zone):
    # an explicit offset is honoured: 01:00+01:00 is 00:00 UTC, 30 min after 23:30 UTC
    local_zone("Europe/London")
    h = read_hyetograph_csv(_csv(tmp_path, "time,depth_mm\n2026-03-28T23:00:00+00:00,0\n"
                                           "2026-03-29T00:30:00+01:00,1\n"
                                           "2026-03-29T00:30:00+00:00,2\n"))
    assert_allclose(h.time_s, [0.0, 1800.0, 5400.0])


def test_run_under_london_time_equals_run_under_utc(tmp_path, local_zone):
    # issue 15 item 9: the same project gives the same rain under either zone
    project = make_project(tmp_path / "p")
    (project.parent / "storm.csv").write_text(DST_CSV)
    edit_toml(project, "time_step_min = 5", "time_step_min = 30")
    totals = []
    for zone in ("UTC", "Europe/London"):
        local_zone(zone)
        storm = run(project).storms[0]
        totals.append(storm.rain_per_step_m.tolist())
    assert totals[0] == totals[1]
    assert_allclose(totals[0], [0.001, 0.002, 0.003, 0.004, 0.005])
