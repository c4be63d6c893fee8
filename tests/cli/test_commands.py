"""The ``gisrun`` group: every command is wired, help and version, tables, exit codes."""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from gisrun._version import __version__
from gisrun.cli import tables as tables_module
from gisrun.cli.main import cli, main
from gisrun.parameters import list_tables

DEMO = Path(__file__).resolve().parents[2] / "demo_catchment"


def test_the_group_lists_every_command():
    result = CliRunner().invoke(cli, ["--help"])
    assert result.exit_code == 0
    for command in ("run", "check", "tables", "storm"):
        assert f"  {command} " in result.output


@pytest.mark.parametrize("group", [[], ["storm"]])
def test_command_lists_are_not_cut_off_in_an_80_column_terminal(group):
    """Defect: the help lines of ``check`` and ``tables`` ended in '...' in the command list."""
    result = CliRunner().invoke(cli, [*group, "--help"], terminal_width=80)
    listed = result.output.split("Commands:")[1].strip().splitlines()
    assert len(listed) >= 2
    for line in listed:
        assert not line.rstrip().endswith("..."), line
        assert len(line) <= 80


@pytest.mark.parametrize("args", [["run"], ["check"], ["tables"], ["storm"], ["storm", "make"],
                                  ["storm", "show"]])
def test_every_command_has_help(args):
    result = CliRunner().invoke(cli, [*args, "--help"])
    assert result.exit_code == 0, result.output
    assert result.output.startswith("Usage: ")


def test_version_is_the_package_version(capsys):
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"gisrun, version {__version__}"


def test_tables_lists_each_shipped_table_with_its_source(capsys):
    assert main(["tables"]) == 0
    out = capsys.readouterr().out
    for table in list_tables():
        assert f"{table.name}: {table.title}\n" in out
        assert all(f"    {line}\n" in out for line in table.source_lines)


def test_one_table_is_printed_with_its_source_lines(capsys):
    first = list_tables()[0]
    assert main(["tables", first.name]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"{first.name}: {first.title}\n# {first.source_lines[0]}\n")
    assert first.frame.columns[0] in out


def test_unknown_table_is_one_line_naming_it_and_the_choices(capsys):
    assert main(["tables", "no_such_table"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1
    assert "'no_such_table'" in err and list_tables()[0].name in err


def test_internal_error_exits_1_with_a_report_hint_and_no_traceback(monkeypatch, capsys):
    def broken() -> list:
        raise RuntimeError("boom")

    monkeypatch.setattr(tables_module, "list_tables", broken)
    assert main(["tables"]) == 1
    err = capsys.readouterr().err
    assert "internal error (RuntimeError: boom)" in err and "please report" in err
    assert "Traceback" not in err


def test_output_and_into_together_is_a_usage_error(tmp_path, capsys):
    code = main(["run", str(DEMO), "--output", str(tmp_path / "a.gpkg"),
                 "--into", str(tmp_path / "b.gpkg")])
    assert code == 2  # click's exit code for usage errors
    assert "give either --output or --into, not both" in capsys.readouterr().err
    assert list(tmp_path.iterdir()) == []

