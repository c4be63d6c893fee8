"""Issue 15 item 12: overlapping subcatchments are reported per pair, and stop the run above a
share the project sets (``[subcatchments] max_overlap_fraction``)."""

from __future__ import annotations

import itertools

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


def _pairwise_by_shapely(geoms):
    """Every pair whose intersection has area, by brute force with shapely (the reference)."""
    return sorted((a, b) for a, b in itertools.combinations(range(len(geoms)), 2)
                  if geoms[a].intersection(geoms[b]).area > 0)


@pytest.mark.parametrize("extra", [
    [],  # a tiling with matched edges: a valid coverage, no pair
    [square(0, 0, 100, 100)],  # a duplicate of the first square
    [square(20, 20, 40, 40)],  # one inside the first square
    [square(0, 0, 50, 100)],  # inside the first square, sharing three of its edges
    [square(95, 0, 195, 100)],  # a sliver over the first two
])
def test_a_tiling_with_and_without_an_overlap_matches_brute_force(extra):
    # 3 x 3 squares sharing edges vertex for vertex, then one more polygon on top
    tiles = [square(100 * c, 100 * r, 100 * c + 100, 100 * r + 100)
             for r in range(3) for c in range(3)]
    geoms = tiles + extra
    subs = gpd.GeoDataFrame({"subcatchment_id": [f"s{k}" for k in range(len(geoms))]},
                            geometry=geoms, crs=CRS)
    found = subcatchment_overlaps(subs)
    index = {f"s{k}": k for k in range(len(geoms))}
    got = sorted(tuple(sorted((index[a], index[b])))
                 for a, b in zip(found["subcatchment_id"], found["other_id"], strict=True))
    assert got == _pairwise_by_shapely(geoms)
    assert (len(got) > 0) == bool(extra)
