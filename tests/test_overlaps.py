"""Issue 15 item 12: overlapping subcatchments are reported per pair, and stop the run above a
share the project sets (``[subcatchments] max_overlap_fraction``)."""

from __future__ import annotations

import geopandas as gpd
import pyogrio
import pytest
from bad_inputs_helpers import edit_toml, make_project, run_cli, square, write_subcatchments

from gisrun import load_project
from gisrun.workflow.inputs import subcatchment_overlaps

#: UTM 17N on its central meridian, where planar areas are ground areas to 0.08 %.
CRS = "EPSG:32617"


def test_overlap_area_per_pair_by_hand():
    subs = gpd.GeoDataFrame(
        {"subcatchment_id": ["a", "b", "c", "d"]},
        geometry=[square(0, 0, 100, 100), square(80, 0, 180, 100),  # a x b: 20 m x 100 m
                  square(10, 10, 20, 20),  # inside a: all of c (100 m2)
                  square(180, 0, 280, 100)],  # only touches b: no overlap
        crs=CRS)
    found = subcatchment_overlaps(subs).set_index(["subcatchment_id", "other_id"])
    assert sorted(found.index) == [("a", "b"), ("a", "c")]
    assert found.loc[("a", "b"), "overlap_area_m2"] == pytest.approx(2000.0, rel=1e-9)
    assert found.loc[("a", "b"), "overlap_fraction"] == pytest.approx(0.2, rel=1e-9)
    assert found.loc[("a", "c"), "overlap_area_m2"] == pytest.approx(100.0, rel=1e-9)
    assert found.loc[("a", "c"), "overlap_fraction"] == pytest.approx(1.0, rel=1e-9)


def test_the_project_sets_the_share_and_the_pair_is_in_run_info(tmp_path, capsys):
    folder = tmp_path / "project"
    project_file = make_project(folder)
    assert load_project(project_file).subcatchments.max_overlap_fraction == 0.01  # default
    (folder / "sub.gpkg").unlink()
    write_subcatchments(folder / "sub.gpkg", [square(0, 0, 50, 100), square(40, 0, 100, 100)])
    code, _, err = run_cli(capsys, ["run", str(folder), "--no-extras", "--quiet"])
    assert code == 2 and "max_overlap_fraction" in err  # 20 % of S1 overlaps S2
    edit_toml(project_file, 'id_field = "code"', 'id_field = "code"\nmax_overlap_fraction = 0.25')
    assert load_project(project_file).subcatchments.max_overlap_fraction == 0.25
    target = tmp_path / "result.gpkg"
    code, _, err = run_cli(capsys, ["run", str(folder), "--output", str(target), "--no-extras",
                                    "--quiet"])
    assert code == 0, err
    info = pyogrio.read_dataframe(target, layer="run_info")
    rows = [v for v in info.loc[info["key"] == "warning", "value"] if "overlap" in v]
    assert rows == ["sub.gpkg: subcatchments S1 and S2 overlap by 1000 m2 (20.00% of the "
                    "smaller); the rain on that area is counted in both"]
