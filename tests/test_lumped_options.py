"""[method] lumped_parameters: all three sets, the area-weighted one only, or none."""

from __future__ import annotations

import dataclasses

import pyogrio
import pytest

from gisrun import run, write_outputs
from gisrun.config.project import load_project
from gisrun.write.extras import ExtrasOptions, write_extras


@pytest.fixture(scope="module")
def project(tmp_path_factory):
    from test_cellgrid import tiny_project

    return load_project(tiny_project(tmp_path_factory.mktemp("lumped") / "p"))


def test_default_makes_all_three_sets(project):
    assert project.lumped_parameters == "auto"
    result = run(project)
    assert set(result.lumped_parameters["basis"].astype(str)) == {"area_weighted", "equivalent",
                                                                   "fitted"}
    assert result.project.lumped_parameters == "solve"


def test_default_makes_none_for_a_large_run_and_says_so(project, monkeypatch):
    # the searches and the table kept for the whole run cost more than the run itself at
    # 100,000 subcatchments (bench_run.py): "auto" leaves them out above the threshold
    import gisrun.workflow.pipeline as pipeline

    monkeypatch.setattr(pipeline, "KEEP_STEP_ARRAYS_BELOW", 2)  # the tiny project has 2
    result = run(project)
    assert result.lumped_parameters.empty and result.project.lumped_parameters == "off"
    assert any("lumped parameters not made for 2 subcatchments" in w for w in result.warnings)
    asked = run(dataclasses.replace(project, lumped_parameters="area_weighted"))
    assert not asked.lumped_parameters.empty


def test_area_weighted_only_skips_the_searches(project):
    table = run(dataclasses.replace(project, lumped_parameters="area_weighted")).lumped_parameters
    assert set(table["basis"].astype(str)) == {"area_weighted"}
    assert table["lumped_runoff_depth_m"].notna().any()  # still run lumped, beside the runoff


def test_off_makes_no_layer_and_no_files(project, tmp_path):
    result = run(dataclasses.replace(project, lumped_parameters="off"))
    assert result.lumped_parameters.empty
    gpkg = write_outputs(result, output=tmp_path / "out.gpkg")
    assert "lumped_parameters" not in {name for name, _ in pyogrio.list_layers(gpkg)}
    made = write_extras(result, gpkg, options=ExtrasOptions(maps=False, report=False,
                                                            rasters=False))
    assert made.lumped_parameters == {} and made.excess_series.exists()


def test_the_project_file_reads_the_choice(tmp_path):
    from test_cellgrid import tiny_project

    path = tiny_project(tmp_path / "p")
    path.write_text(path.read_text().replace("[method]", '[method]\nlumped_parameters = "Off"'))
    assert load_project(path).lumped_parameters == "off"
