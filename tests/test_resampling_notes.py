"""A storm changed by the run's step is reported, with peak and duration (issue 15, 8 and 11).

Storm files and projects are invented test data (:mod:`bad_inputs_helpers`); every expected
intensity is worked by hand.
"""

from __future__ import annotations

import pytest
from bad_inputs_helpers import edit_toml, make_project, run_cli, warning_lines

from gisrun import run
from gisrun.storm import Hyetograph, nrcs_24h, peak_window_s, resampling_note, uniform
from gisrun.units import US

STORM_FILE = 'kind = "file"\npath = "storm.csv"'


def nrcs_ii_project(tmp_path, step_min):
    project = make_project(tmp_path / "p")
    edit_toml(project, STORM_FILE, 'kind = "nrcs_24h"\ndistribution = "II"\ndepth = 100')
    edit_toml(project, "time_step_min = 5", f"time_step_min = {step_min}")
    return project


def test_type_ii_storm_at_a_60_min_step_warns_with_peak_before_and_after():
    # issue 15 item 8. NRCS type II ordinates (TR-55 1986, App. B, as shipped): 0.357 at
    # 11.75 h, 0.663 at 12 h, 0.235 at 11 h. Built at 6 min, the steps 11.8-11.9 h and
    # 11.9-12 h lie inside the steepest segment: 100 mm x (0.663 - 0.357) / 15 min = 122.4 mm/h.
    # At a 60-min step the wettest hour is 11-12 h: 100 mm x (0.663 - 0.235) = 42.8 mm/h.
    storm = nrcs_24h("II", 0.1, 360.0, name="type_ii")
    note = resampling_note(storm, 3600.0)
    assert note is not None
    assert note.startswith("storm 'type_ii': the run's 60-min step is coarser than")
    assert "18-min peak-intensity window" in note  # 11.7-12 h at or above half the peak
    assert "falls from 122.4 to 42.8 mm/h (-65 %)" in note
    assert "time_step_min to 6 or less" in note


def test_step_coarser_than_the_resolution_but_inside_the_window():
    # issue 15 item 8: a 15-min step on the 6-min type II storm: the wettest 15 min are
    # 11.75-12 h at 122.4 mm/h only if the grid meets 11.75 h; on the 15-min grid (705 min is
    # a multiple of 15) 705-720 min holds 708-720 at 122.4 and 705-708 at the 702-708 mean
    # ((3 x 29.6 + 3 x 122.4) / 6 = 76 mm/h): (3 x 76 + 12 x 122.4) / 15 = 113.12 mm/h
    storm = nrcs_24h("II", 0.1, 360.0, name="type_ii")
    note = resampling_note(storm, 900.0)
    assert "coarser than the storm's 6-min resolution" in note
    assert "falls from 122.4 to 113.1 mm/h" in note


def test_us_units_in_the_note():
    storm = nrcs_24h("II", 0.1, 360.0, name="type_ii")
    note = resampling_note(storm, 3600.0, units=US)
    # 122.4 mm/h = 4.819 in/h, 42.8 mm/h = 1.685 in/h (/ 25.4)
    assert "falls from 4.819 to 1.685 in/h" in note


def test_irregular_storm_resampled_warns_with_peak_and_duration():
    # issue 15 item 11: 10 mm/h for 2 min, 70 mm/h for 6 min, 10 mm/h for 23 min (31 min).
    # On 5-min steps: 0-5 min (2 x 10 + 3 x 70) / 5 = 46 mm/h; 5-10 min (3 x 70 + 2 x 10) / 5
    # = 46 mm/h; the last step 30-35 min is padded: 35 min.
    storm = Hyetograph("irregular", [0.0, 120.0, 480.0, 1860.0],
                       [10 / 3.6e6 * 120, 70 / 3.6e6 * 360, 10 / 3.6e6 * 1380])
    note = resampling_note(storm, 300.0)
    assert "falls from 70 to 46 mm/h (-34 %)" in note
    assert "duration goes from 31 to 35 min" in note


def test_off_grid_storm_with_the_same_peak_still_reports_its_longer_duration():
    # issue 15 item 11: 7-min steps of 12 mm/h (resolution coarser than the 5-min run step):
    # the peak stays 12 mm/h but 21 min become 25 min
    storm = uniform(0.0042, 1260.0, 420.0, name="seven")
    note = resampling_note(storm, 300.0)
    assert note.startswith("storm 'seven': its times do not fall on the run's 5-min step")
    assert "peak intensity stays 12 mm/h" in note
    assert "duration goes from 21 to 25 min" in note


@pytest.mark.parametrize(("storm", "dt_s"), [
    (uniform(0.01, 3600.0, 60.0), 300.0),     # finer storm, constant intensity: nothing lost
    (uniform(0.01, 3600.0, 900.0), 300.0),    # coarser storm on the grid: split exactly
    (nrcs_24h("II", 0.1, 360.0), 300.0),      # the demo's case: 6-min storm, 5-min step
])
def test_no_note_when_peak_and_duration_are_kept(storm, dt_s):
    assert resampling_note(storm, dt_s) is None


def test_peak_window_is_the_width_at_half_the_peak():
    # 5, 20, 12, 8, 30, 2 mm/h on 10-min steps: half the peak is 15: only the 10-min step at 30
    h = Hyetograph("w", [0, 600, 1200, 1800, 2400, 3000, 3600],
                   [v / 3.6e6 * 600 for v in (5, 20, 12, 8, 30, 2)])
    assert peak_window_s(h) == 600.0
    # 20, 30, 16 mm/h: all three are at least 15 -> 30 min
    h = Hyetograph("w", [0, 600, 1200, 1800], [v / 3.6e6 * 600 for v in (20, 30, 16)])
    assert peak_window_s(h) == 1800.0


def test_the_run_and_check_report_the_coarse_step(tmp_path, capsys):
    # issue 15 item 8, through the run (run_info, report and CLI take result.warnings) and check
    project = nrcs_ii_project(tmp_path, 60)
    notes = [w for w in run(project).warnings if "peak intensity" in w]
    assert len(notes) == 1 and "falls from 122.4 to 42.8 mm/h" in notes[0]
    code, _, err = run_cli(capsys, ["check", str(project)])
    assert code == 0
    assert any("60-min step is coarser" in line for line in warning_lines(err))


def test_no_note_for_the_same_storm_at_a_5_min_step(tmp_path):
    project = nrcs_ii_project(tmp_path, 5)
    assert not [w for w in run(project).warnings if "peak intensity" in w]
