"""A raster code given twice in a project's code table (issue 15, item 4).

Invented test data from :mod:`bad_inputs_helpers`.
"""

from __future__ import annotations

import pytest
from bad_inputs_helpers import assert_one_clear_error, edit_toml, make_project, run_cli

from gisrun import load_project
from gisrun.errors import ProjectFileError


@pytest.mark.parametrize(("table", "anchor", "first", "second", "label"), [
    ("soil", '"2" = "B"', '"1"', '"01"', '"D"'),
    ("soil", '"2" = "B"', '"1"', '" 1"', '"C"'),
    ("cover", '"5" = "open_space_good"', '"5"', '"005"', '"woods_good"'),
])
def test_same_code_twice_is_an_error_naming_both_keys(tmp_path, table, anchor, first, second,
                                                      label):
    # issue 15 item 4: the later entry used to win silently
    project = make_project(tmp_path / "p")
    edit_toml(project, anchor, f"{anchor}\n{second} = {label}")
    with pytest.raises(ProjectFileError) as err:
        load_project(project)
    text = str(err.value)
    assert f"[{table}.codes].{second}" in text
    assert f"already given as {first}" in text
    assert "keep one entry per raster code" in text


@pytest.mark.parametrize("command", ["check", "run"])
def test_same_code_twice_from_check_and_run(tmp_path, capsys, command):
    # issue 15 item 4: both commands stop with one clear line naming both keys
    project = make_project(tmp_path / "p")
    edit_toml(project, '"2" = "B"', '"2" = "B"\n"01" = "D"')
    args = [command, str(project)] + (["-q"] if command == "run" else [])
    code, _, err = run_cli(capsys, args)
    line = assert_one_clear_error(code, err, '[soil.codes]."01"')
    assert '"1" = \'A\'' in line
