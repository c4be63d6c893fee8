from pathlib import Path

import pytest

from gisrun.config.project import load_project
from gisrun.errors import ProjectFileError

GOOD = """
[project]
name = "Test"
units = "us"
output = "out/result.gpkg"
time_step_min = 10

[subcatchments]
path = "sub.gpkg"
id_field = "code"

[soil]
path = "rasters/soil.tif"
classification = "texture"
initial_saturation = 0.4
[soil.codes]
"1" = "silt loam"
"2" = "clay"

[method]
name = "horton"

[[storms]]
kind = "uniform"
depth = 2.0
duration_min = 60
"""


def write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "gisrun.toml"
    path.write_text(text)
    return path


def test_good_project_paths_relative_to_file_and_si_step(tmp_path):
    project = load_project(write(tmp_path, GOOD))
    assert project.soil.path == (tmp_path / "rasters" / "soil.tif").resolve()
    assert project.output == (tmp_path / "out" / "result.gpkg").resolve()
    assert project.time_step_s == 600.0
    assert project.units.depth == "in"
    assert project.soil.codes == {1: "silt loam", 2: "clay"}
    assert project.method == "horton"
    assert project.soil.initial_saturation == 0.4


def test_folder_finds_project_file(tmp_path):
    write(tmp_path, GOOD)
    assert load_project(tmp_path).name == "Test"


@pytest.mark.parametrize(
    ("edit", "match"),
    [
        (("id_field", "idfield"), r"\[subcatchments\]\.idfield.*did you mean 'id_field'"),
        (('name = "horton"', 'name = "hortn"'), r"\[method\]\.name.*did you mean 'horton'"),
        (("time_step_min = 10", "time_step_min = -1"), r"time_step_min.*outside"),
        (("time_step_min = 10", 'time_step_min = "ten"'), r"time_step_min.*not a number"),
        (("initial_saturation = 0.4", "initial_saturation = 1.4"), r"initial_saturation"),
        (('"1" = "silt loam"', '"one" = "silt loam"'), r"soil\.codes\]\.one.*whole-number"),
        (('units = "us"', 'units = "metric"'), r"units.*did you mean 'si'|units"),
        (("[[storms]]", "[[storm]]"), r"storm.*did you mean 'storms'"),
        (('classification = "texture"', 'classification = "textures"'), r"classification"),
    ],
)
def test_bad_values_name_the_key(tmp_path, edit, match):
    old, new = edit
    assert old in GOOD
    with pytest.raises(ProjectFileError, match=match):
        load_project(write(tmp_path, GOOD.replace(old, new, 1)))


def test_missing_sections_and_files(tmp_path):
    with pytest.raises(ProjectFileError, match=r"\[soil\].*is missing"):
        load_project(write(tmp_path, GOOD[: GOOD.index("[soil]")] + GOOD[GOOD.index("[method]"):]))
    with pytest.raises(ProjectFileError, match="does not exist"):
        load_project(tmp_path / "nothing.toml")
    empty = tmp_path / "empty"
    empty.mkdir()
    with pytest.raises(ProjectFileError, match="holds no project file"):
        load_project(empty)
    with pytest.raises(ProjectFileError, match="not valid TOML"):
        load_project(write(tmp_path, "[project\n"))
