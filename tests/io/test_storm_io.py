"""Storm CSV reading/writing and the [[storms]] builder: formats, row-level errors, round trip."""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from gisrun.config.storms import storm_from_config, storms_from_config
from gisrun.errors import GisrunWarning, OutputError, OutputExistsError, StormError
from gisrun.io.storm_csv import read_hyetograph_csv, read_idf_table_csv, write_hyetograph_csv
from gisrun.storm import Hyetograph, nrcs_24h
from gisrun.units import SI, US


def _csv(tmp_path: Path, text: str, name: str = "rain.csv") -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


# --- formats (hand-computed answers) ------------------------------------------------------

# 12 mm/h for 10 min = 2 mm; 24 mm/h for 10 min = 4 mm (unit conversion by hand).
FORMATS = {
    "intensity_mm": "time_min,intensity_mm_per_h\n0,\n10,12\n20,24\n",
    "intensity_in": "time_min,intensity_in_per_h\n10,0.47244094488188976\n20,0.9448818897637795\n",
    "depth_mm_hours": "time_h,depth_mm\n0,0\n0.16666666666666666,2\n0.3333333333333333,4\n",
    "depth_in": "time_min,depth_in\n10,0.07874015748031496\n20,0.15748031496062992\n",
    "cumulative_mm": "time_min,cumulative_depth_mm\n0,0\n10,2\n20,6\n",
    "cumulative_in_clock": "time,cumulative_depth_in\n"
                           "13:50,0\n14:00,0.07874015748031496\n14:10,0.2362204724409449\n",
    "clock_no_start_row": "time,depth_mm\n14:00,2\n14:10,4\n",
    "iso_clock": "time,depth_mm\n2024-06-01T13:50:00,0\n2024-06-01T14:00:00,2\n"
                 "2024-06-01T14:10:00,4\n",
    "past_midnight": "time,depth_mm\n23:50,0\n00:00,2\n00:10,4\n",
}


@pytest.mark.parametrize("case", sorted(FORMATS))
def test_read_formats_give_the_same_storm(tmp_path, case):
    h = read_hyetograph_csv(_csv(tmp_path, FORMATS[case]))
    assert_allclose(h.time_s, [0, 600, 1200], atol=1e-9)
    assert_allclose(h.depth_m, [0.002, 0.004], rtol=1e-12)


def test_read_irregular_steps_and_comment_name(tmp_path):
    path = _csv(tmp_path, "# name: gauge 7\ntime_min,depth_mm\n5,1\n12,0\n30,3.5\n")
    h = read_hyetograph_csv(path)
    assert h.name == "gauge 7"
    assert_allclose(h.time_s, [0, 300, 720, 1800])
    assert_allclose(h.depth_m, [0.001, 0.0, 0.0035])
    assert read_hyetograph_csv(path, name="other").name == "other"


def test_unitless_header_uses_the_unit_system(tmp_path):
    path = _csv(tmp_path, "time_min,depth\n10,1\n")
    assert read_hyetograph_csv(path, units=US).total_depth_m == pytest.approx(0.0254)
    assert read_hyetograph_csv(path, units=SI).total_depth_m == pytest.approx(0.001)
    with pytest.raises(StormError, match="rain.csv.*missing units"):
        read_hyetograph_csv(path)


# --- every bad file names the file and the data row ---------------------------------------

BAD_ROWS = {
    "negative": ("time_min,depth_mm\n0,0\n5,1\n10,-2\n", 3, "negative"),
    "blank": ("time_min,depth_mm\n5,1\n10,\n15,1\n", 2, "blank"),
    "nan": ("time_min,intensity_mm_per_h\n5,1\n10,nan\n", 2, "nan"),
    "text": ("time_min,depth_mm\n5,1\n10,lots\n", 2, "not a number"),
    "not_increasing": ("time_min,depth_mm\n5,1\n10,1\n10,2\n", 3, "does not increase"),
    "backwards": ("time_min,depth_mm\n0,\n5,1\n15,1\n10,2\n", 4, "does not increase"),
    "cumulative_falls": ("time_min,cumulative_depth_mm\n0,0\n5,3\n10,2\n", 3, "decreases"),
    "gap": ("time_min,depth_mm\n5,1\n10,1\n15,1\n30,1\n35,1\n", 4, "gap"),
    "rain_at_time_0": ("time_min,depth_mm\n0,3\n5,1\n", 1, "time 0"),
    "bad_time": ("time_min,depth_mm\n5,1\nten,1\n", 2, "not a number"),
    "bad_clock": ("time,depth_mm\n14:00,0\n25:61,1\n", 2, "HH:MM"),
}


@pytest.mark.parametrize("case", sorted(BAD_ROWS))
def test_bad_rows_raise_with_file_and_row(tmp_path, case):
    text, row, words = BAD_ROWS[case]
    path = _csv(tmp_path, text, name=f"{case}.csv")
    with pytest.raises(StormError) as err:
        read_hyetograph_csv(path)
    message = str(err.value)
    assert f"{case}.csv:row {row}:" in message
    assert words.lower() in message.lower()
    assert "\n" not in message


def test_gap_message_suggests_zero_rows(tmp_path):
    with pytest.raises(StormError, match="add rows with zero rain"):
        read_hyetograph_csv(_csv(tmp_path, BAD_ROWS["gap"][0]))


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("time_min,intensty_mm_per_h\n5,1\n", "did you mean 'intensity_mm_per_h'"),
        ("tme_min,depth_mm\n5,1\n", "did you mean 'time_min'"),
        ("time_min\n5\n", "columns"),
        ("time_min,depth_mm,extra\n5,1,1\n", "extra"),
        ("", "is empty"),
        ("# only a comment\n\n", "is empty"),
        ("time_min,depth_mm\n", "no data rows"),
    ],
)
def test_bad_headers_and_empty_files(tmp_path, text, words):
    path = _csv(tmp_path, text, name="storm_x.csv")
    with pytest.raises(StormError, match="storm_x.csv") as err:
        read_hyetograph_csv(path)
    assert words in str(err.value)


def test_unreadable_file(tmp_path):
    with pytest.raises(StormError, match="missing.csv.*cannot be read"):
        read_hyetograph_csv(tmp_path / "missing.csv")
    (tmp_path / "binary.csv").write_bytes(b"\xff\xfe\x00\x81\x00")
    with pytest.raises(StormError, match="binary.csv"):
        read_hyetograph_csv(tmp_path / "binary.csv")


def test_implausible_depth_warns(tmp_path):
    # 500 mm in one hour is above the ~305 mm-in-42-min world record (WMO, from memory).
    with pytest.warns(GisrunWarning, match="world record"):
        read_hyetograph_csv(_csv(tmp_path, "time_min,depth_mm\n30,250\n60,250\n"))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        read_hyetograph_csv(_csv(tmp_path, "time_min,depth_mm\n30,50\n60,50\n", "ok.csv"))


def test_implausible_depth_is_told_in_the_project_units(tmp_path):
    """Defect: a US project (storm file in inches) was warned in millimetres. 20 in in one hour
    is 508 mm (1 in = 25.4 mm exactly, NIST SP 811 App. B), above the one-hour limit of
    400 mm = 15.7 in; an SI project still reads millimetres."""
    path = _csv(tmp_path, "time_min,depth_in\n30,10\n60,10\n")
    with pytest.warns(GisrunWarning) as us_warned:
        read_hyetograph_csv(path, units=US)
    assert "20 in of rain within 1 h exceeds the world record (about 15.7 in)" in str(
        us_warned[0].message)
    with pytest.warns(GisrunWarning) as si_warned:
        read_hyetograph_csv(path, units=SI)
    assert "508 mm of rain within 1 h exceeds the world record (about 400 mm)" in str(
        si_warned[0].message)


# --- writing ------------------------------------------------------------------------------


@pytest.mark.parametrize("units", [SI, US])
def test_write_read_round_trip(tmp_path, units):
    rng = np.random.default_rng(7)
    time_s = np.concatenate([[0.0], np.cumsum(rng.uniform(30, 900, 25))])
    h = Hyetograph("round, trip", time_s, rng.uniform(0, 0.004, 25))
    path = write_hyetograph_csv(h, tmp_path / "out.csv", units=units)
    back = read_hyetograph_csv(path)
    assert back.name == "round, trip"
    assert_allclose(back.time_s, h.time_s, rtol=1e-14)
    assert_allclose(back.depth_m, h.depth_m, rtol=1e-14)
    assert [p.name for p in tmp_path.iterdir()] == ["out.csv"]  # no partial file left


def test_write_refuses_to_replace_when_asked(tmp_path):
    h = nrcs_24h("II", 0.05, 3600)
    path = write_hyetograph_csv(h, tmp_path / "s.csv", units=SI)
    with pytest.raises(OutputExistsError, match="s.csv"):
        write_hyetograph_csv(h, path, units=SI, overwrite=False)


def test_a_failed_write_keeps_the_old_file_and_leaves_no_partial_one(tmp_path, monkeypatch):
    h = nrcs_24h("II", 0.05, 3600)
    path = write_hyetograph_csv(h, tmp_path / "s.csv", units=SI)
    before = path.read_bytes()

    def disk_full(self, *_args, **_kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(Path, "write_text", disk_full)
    with pytest.raises(OutputError, match=r"s\.csv: could not be written .*No space left"):
        write_hyetograph_csv(h, path, units=US, overwrite=True)
    monkeypatch.undo()
    assert path.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["s.csv"]


def test_read_idf_table(tmp_path):
    path = _csv(tmp_path, "duration_min,intensity_in_per_h\n10,4\n60,1.5\n", "idf.csv")
    table = read_idf_table_csv(path)
    assert_allclose(table.duration_s, [600, 3600])
    assert float(table.intensity_m_per_s(3600)) == pytest.approx(1.5 * 0.0254 / 3600)
    with pytest.raises(StormError, match="idf.csv:row 2"):
        read_idf_table_csv(_csv(tmp_path, "duration_min,intensity_mm_per_h\n10,4\n5,6\n",
                                "idf.csv"))


# --- [[storms]] ---------------------------------------------------------------------------

W = "project.toml:[[storms]]"


def _build(spec, tmp_path=Path("."), units=SI):
    return storm_from_config(spec, base_dir=tmp_path, units=units, where=W)


def test_config_nrcs_depth_in_project_units_and_default_step():
    h = _build({"kind": "nrcs_24h", "distribution": "II", "depth": 4}, units=US)
    assert h.name == "nrcs_24h_II_4in"
    assert h.total_depth_m == pytest.approx(4 * 0.0254, rel=1e-12)
    assert len(h.depth_m) == 240  # default 6-min step


def test_config_idf_kinds_convert_a_with_the_rate_unit(tmp_path):
    spec = {"kind": "chicago", "idf": {"a": 1500, "b": 10, "c": 0.8}, "duration_min": 120}
    h = _build(spec)
    # P = a td / (td + b)^c with a in mm/h, td in minutes -> mm over 120 min, by hand
    expected_mm = 1500 / (120 + 10) ** 0.8 * 120 / 60
    assert h.total_depth_m * 1000 == pytest.approx(expected_mm, rel=1e-12)
    assert len(h.depth_m) == 24  # default 5-min step
    (tmp_path / "idf.csv").write_text("duration_min,intensity_mm_per_h\n5,150\n60,40\n")
    block = _build({"kind": "alternating_block", "idf_table": "idf.csv", "duration_min": 60,
                    "name": "blocks"}, tmp_path)
    assert block.total_depth_m == pytest.approx(0.040, rel=1e-12)  # 40 mm/h for 1 h


def test_config_file_and_uniform(tmp_path):
    (tmp_path / "storms").mkdir()
    (tmp_path / "storms" / "obs.csv").write_text("time_min,depth\n10,2\n")
    h = _build({"kind": "file", "path": "storms/obs.csv"}, tmp_path)
    assert h.name == "obs" and h.total_depth_m == pytest.approx(0.002)
    u = _build({"kind": "uniform", "depth": 30, "duration_min": 60, "step_min": 10})
    assert_allclose(u.depth_m, 0.005)


@pytest.mark.parametrize(
    ("spec", "where", "words"),
    [
        ({"kind": "chicgo"}, f"{W}.kind", "did you mean 'chicago'"),
        ({"kind": "nrcs_24h", "distribution": "II", "depht": 4}, f"{W}.depht",
         "did you mean 'depth'"),
        ({"kind": "nrcs_24h", "distribution": "II", "depth": 4, "duration_min": 60},
         f"{W}.duration_min", "does not apply"),
        ({"kind": "nrcs_24h", "distribution": "IIII", "depth": 4}, f"{W}.distribution",
         "did you mean"),
        ({"kind": "nrcs_24h", "depth": 4}, W, "needs key 'distribution'"),
        ({"kind": "uniform", "depth": -1, "duration_min": 60}, f"{W}.depth", "> 0"),
        ({"kind": "uniform", "depth": True, "duration_min": 60}, f"{W}.depth", "not a number"),
        ({"kind": "alternating_block", "duration_min": 60}, W, "exactly one of idf"),
        ({"kind": "chicago", "idf": {"a": 1, "b": 1, "k": 1}, "duration_min": 60},
         f"{W}.idf.k", "not an IDF coefficient"),
        ({"kind": "chicago", "idf": {"a": 1, "b": 1, "c": 1}, "duration_min": 60,
          "peak_position": 1.5}, f"{W}.peak_position", "<= 1"),
        ({"kind": "alternating_block", "idf": {"a": 900, "b": 5, "c": 0.7},
          "duration_min": 60, "step_min": 7}, W, "whole number"),
        ({"name": "x"}, W, "has no kind"),
    ],
)
def test_config_errors_name_the_key(spec, where, words):
    with pytest.raises(StormError) as err:
        _build(spec)
    assert str(err.value).startswith(f"{where}:")
    assert words in str(err.value)


def test_storms_from_config_requires_unique_names():
    specs = [{"kind": "uniform", "depth": 10, "duration_min": 60},
             {"kind": "nrcs_24h", "distribution": "I", "depth": 10}]
    storms = storms_from_config(specs, base_dir=Path("."), units=SI, where=W)
    assert [s.name for s in storms] == ["uniform_10mm_60min", "nrcs_24h_I_10mm"]
    with pytest.raises(StormError, match=r"\[\[storms\]\] 2: name 'uniform_10mm_60min'"):
        storms_from_config([specs[0], specs[0]], base_dir=Path("."), units=SI, where=W)
    with pytest.raises(StormError, match="no"):
        storms_from_config([], base_dir=Path("."), units=SI, where=W)
