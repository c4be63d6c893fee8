"""The ``storm`` command group: make -> CSV readable by the reader, show, plots, errors."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from gisrun.cli.main import main
from gisrun.cli.storm import storm
from gisrun.errors import StormError
from gisrun.io.storm_csv import read_hyetograph_csv

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), file signature


def test_make_nrcs_writes_a_readable_csv_and_plot(tmp_path):
    out, png = tmp_path / "type2.csv", tmp_path / "type2.png"
    result = CliRunner().invoke(storm, ["make", "--kind", "nrcs_24h", "--distribution", "II",
                                        "--depth", "100", "-o", str(out), "--plot", str(png)])
    assert result.exit_code == 0, result.output
    h = read_hyetograph_csv(out)
    assert h.total_depth_m == pytest.approx(0.100, rel=1e-12)
    assert len(h.depth_m) == 240  # 6-min default step over 24 h
    # peak 6-min block 0.306 * 0.1 / 0.25 * 100 mm = 12.24 mm -> 122.4 mm/h (TR-55 Type II
    # ordinates 0.357 at 11.75 h and 0.663 at 12 h, Chow et al. 1988 Table 14.4.1, from memory)
    assert "peak intensity: 122.4 mm/h" in result.output
    assert "licensed engineer" in result.output
    assert png.read_bytes()[:8] == PNG_SIGNATURE


def test_make_us_units_and_show(tmp_path):
    out = tmp_path / "u.csv"
    runner = CliRunner()
    made = runner.invoke(storm, ["make", "--kind", "uniform", "--depth", "2", "--duration-min",
                                 "60", "--step-min", "15", "--units", "us", "-o", str(out)])
    assert made.exit_code == 0, made.output
    assert out.read_text().splitlines()[2] == "time_min,depth_in"
    shown = runner.invoke(storm, ["show", str(out)])  # shown in SI: 2 in = 50.8 mm over 1 h
    assert shown.exit_code == 0, shown.output
    assert "total depth: 50.8 mm" in shown.output
    assert "duration: 60 min" in shown.output
    assert "peak intensity: 50.8 mm/h" in shown.output
    assert "step: 15 min" in shown.output


def test_show_irregular_file_with_plot(tmp_path):
    src = tmp_path / "obs.csv"
    src.write_text("time_min,depth_mm\n5,1\n12,0\n30,3.6\n")
    png = tmp_path / "obs.png"
    result = CliRunner().invoke(storm, ["show", str(src), "--plot", str(png)])
    assert result.exit_code == 0, result.output
    assert "total depth: 4.6 mm" in result.output
    assert "peak intensity: 12 mm/h" in result.output  # 3.6 mm in 18 min, 1 mm in 5 min
    assert "irregular, 5-18 min" in result.output
    assert png.read_bytes()[:8] == PNG_SIGNATURE


def test_make_chicago_and_alternating_block_from_options(tmp_path):
    runner = CliRunner()
    for kind in ("chicago", "alternating_block"):
        out = tmp_path / f"{kind}.csv"
        result = runner.invoke(storm, ["make", "--kind", kind, "--idf-a", "1500", "--idf-b", "10",
                                       "--idf-c", "0.8", "--duration-min", "120", "-o", str(out)])
        assert result.exit_code == 0, result.output
        # both keep the IDF depth for 2 h: 1500 / 130^0.8 mm/h * 2 h (hand computation)
        expected_m = 1500 / 130**0.8 * 2 / 1000
        assert read_hyetograph_csv(out).total_depth_m == pytest.approx(expected_m, rel=1e-12)


def test_errors_propagate_as_storm_errors(tmp_path):
    runner = CliRunner()
    bad = runner.invoke(storm, ["make", "--kind", "nrcs_24h", "--distribution", "V",
                                "--depth", "100", "-o", str(tmp_path / "x.csv")])
    assert isinstance(bad.exception, StormError)
    assert "distribution" in str(bad.exception)
    assert not (tmp_path / "x.csv").exists()
    src = tmp_path / "neg.csv"
    src.write_text("time_min,depth_mm\n5,1\n10,-1\n")
    shown = runner.invoke(storm, ["show", str(src)])
    assert isinstance(shown.exception, StormError)
    assert "neg.csv:row 2" in str(shown.exception)


def test_make_does_not_replace_without_overwrite(tmp_path):
    out = tmp_path / "s.csv"
    out.write_text("keep me")
    args = ["make", "--kind", "uniform", "--depth", "10", "--duration-min", "30", "-o", str(out)]
    result = CliRunner().invoke(storm, args)
    assert result.exception is not None and "already exists" in str(result.exception)
    assert out.read_text() == "keep me"
    assert CliRunner().invoke(storm, [*args, "--overwrite"]).exit_code == 0


def test_plot_is_replaced_whole_and_leaves_no_partial_file(tmp_path):
    src, png = tmp_path / "s.csv", tmp_path / "s.png"
    png.write_bytes(b"an older plot")
    args = ["make", "--kind", "uniform", "--depth", "10", "--duration-min", "30", "-o", str(src),
            "--plot", str(png)]
    assert CliRunner().invoke(storm, args).exit_code == 0
    assert png.read_bytes()[:8] == PNG_SIGNATURE
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.csv", "s.png"]


def test_plot_under_a_file_is_one_line_error_naming_it(tmp_path, capsys):
    src, blocker = tmp_path / "s.csv", tmp_path / "notes.txt"
    blocker.write_text("a file where a folder is expected")
    code = main(["storm", "make", "--kind", "uniform", "--depth", "10", "--duration-min", "30",
                 "-o", str(src), "--plot", str(blocker / "s.png")])
    err = capsys.readouterr().err
    assert code == 2
    assert str(blocker) in err and "is a file, not a folder" in err and "Traceback" not in err
    assert err.count("\n") == 1


def test_make_with_an_unwritable_plot_path_writes_nothing(tmp_path, capsys):
    """storm make --plot into a path that cannot be written: exit 2 and no CSV either."""
    (tmp_path / "blocker").write_text("a file, not a folder")
    csv = tmp_path / "h.csv"
    code = main(["storm", "make", "--kind", "uniform", "--depth", "20", "--duration-min", "60",
                 "-o", str(csv), "--plot", str(tmp_path / "blocker" / "h.png")])
    err = capsys.readouterr().err
    assert code == 2, err
    errors = [line for line in err.splitlines() if line.startswith("gisrun: error:")]
    assert len(errors) == 1 and "blocker" in errors[0], err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["blocker"]


# --- errors speak in the words of the command typed (issue 17) ---

def make_error(tmp_path, *args):
    out = tmp_path / "x.csv"
    result = CliRunner().invoke(storm, ["make", *args, "-o", str(out)])
    assert isinstance(result.exception, StormError), result.output
    assert not out.exists()
    return str(result.exception)


@pytest.mark.parametrize(("args", "expected"), [
    (["--kind", "nrcs_24h", "--depth", "50"],
     "gisrun storm make: --kind nrcs_24h needs --distribution; add --distribution VALUE"),
    (["--kind", "uniform", "--depth", "50"],
     "gisrun storm make: --kind uniform needs --duration-min; add --duration-min VALUE"),
    (["--kind", "uniform", "--depth", "-5", "--duration-min", "60"],
     "gisrun storm make --depth: is -5.0, outside (0, inf); give a number > 0"),
    (["--kind", "chicago", "--duration-min", "60", "--idf-a", "100", "--idf-b", "10",
      "--idf-c", "0.8", "--peak-position", "2"],
     "gisrun storm make --peak-position: is 2.0, outside [0, 1]; give a number >= 0 and <= 1"),
    (["--kind", "alternating_block", "--duration-min", "60", "--idf-a", "100"],
     "gisrun storm make: the IDF formula needs --idf-b too; give --idf-a, --idf-b and --idf-c "
     "(i = a / (t + b)^c)"),
])
def test_make_errors_name_the_flags_not_project_file_keys(tmp_path, args, expected):
    """Defect: ``storm make`` said ``add distribution = ...`` (project-file words)."""
    message = make_error(tmp_path, *args)
    assert message == expected
    assert "= ..." not in message and "duration_min" not in message


def test_make_option_that_does_not_apply_lists_the_flags_that_do(tmp_path):
    message = make_error(tmp_path, "--kind", "uniform", "--depth", "5", "--duration-min", "60",
                         "--idf-a", "3")
    assert message.startswith("gisrun storm make --idf-a/--idf-b/--idf-c: does not apply to "
                              "--kind uniform; remove it; --kind uniform takes --depth")


def test_show_missing_file_says_where_it_looked_without_a_project(tmp_path, monkeypatch):
    """Defect: ``storm show`` on a missing file spoke of 'the project file' with no project."""
    monkeypatch.chdir(tmp_path)
    result = CliRunner().invoke(storm, ["show", "nothere.csv"])
    message = str(result.exception)
    assert isinstance(result.exception, StormError)
    assert message.startswith("nothere.csv: does not exist")
    assert str(tmp_path) in message and "project" not in message


@pytest.mark.parametrize(("sep", "shown"), [(";", "';'"), ("\t", "'\\t'")])
def test_csv_with_another_separator_gets_a_hint(tmp_path, sep, shown):
    """Defect: a semicolon-separated CSV failed with 'has 1 columns' and no hint."""
    src = tmp_path / "semi.csv"
    src.write_text(f"time_min{sep}depth_mm\n5{sep}1\n10{sep}2\n")
    result = CliRunner().invoke(storm, ["show", str(src)])
    message = str(result.exception)
    assert "has 1 columns (" in message
    assert message.endswith(f"the file separates them by {shown}: save it with commas")
