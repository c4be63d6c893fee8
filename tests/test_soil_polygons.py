"""Soil polygon layers end to end: project file, run, check, provenance and the demo.

The tiny project (tests/bad_inputs_helpers.py) has soil group A west of x = 50 m and B east of
it, as a raster; drawn as two polygons along the same line, every result must be the same.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
from bad_inputs_helpers import CRS, edit_toml, make_project, run_cli, square, write_raster
from polygon_helpers import soil_layer

from gisrun import load_project, read_inputs
from gisrun.errors import InputError, ProjectFileError
from gisrun.workflow.steps import overlay_inputs, prepare_parameters, run_storm

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


def run_tiny(tmp_path, capsys, *steps, name="result.gpkg"):
    folder = tmp_path / name.replace(".gpkg", "")
    make_project(folder)
    for step in steps:
        step(folder)
    target = tmp_path / name
    code, out, err = run_cli(capsys, ["run", str(folder), "--output", str(target),
                                      "--no-extras", "--quiet"])
    assert code == 0, err
    return target, out + err


def test_polygons_along_the_raster_line_give_the_raster_results(tmp_path, capsys):
    raster, _ = run_tiny(tmp_path, capsys, name="raster.gpkg")
    polygons, _ = run_tiny(tmp_path, capsys, soil_layer(), name="polygons.gpkg")
    for layer in ("runoff_steady", "unit_results", "coverage"):
        a = pyogrio.read_dataframe(raster, layer=layer, read_geometry=False)
        b = pyogrio.read_dataframe(polygons, layer=layer, read_geometry=False)
        numeric = a.select_dtypes("number").columns
        assert len(a) == len(b) > 0
        np.testing.assert_allclose(b[numeric].to_numpy(float), a[numeric].to_numpy(float),
                                   rtol=1e-12, atol=1e-12)


def test_codes_in_the_field_go_through_the_code_table(tmp_path, capsys):
    target, _ = run_tiny(tmp_path, capsys, soil_layer(labels=[2, 1], keep_codes=True))
    units = pyogrio.read_dataframe(target, layer="unit_results", read_geometry=False)
    pervious = units[units["surface"] == "pervious"]
    assert dict(zip(pervious["subcatchment_id"], pervious["soil_class"], strict=True)) == {
        "S1": "B", "S2": "A"}  # code 2 (B) drawn in the west, 1 (A) in the east


def test_provenance_names_the_layer_and_field(tmp_path, capsys):
    target, _ = run_tiny(tmp_path, capsys, soil_layer())
    sources = pyogrio.read_dataframe(target, layer="parameter_sources", read_geometry=False)
    rows = sources[sources["parameter"] == "soil_class"]
    assert set(rows["soil_class"]) == {"A", "B"}
    assert rows["source"].str.contains("polygon layer soil.gpkg:soils, field group").all()
    info = pyogrio.read_dataframe(target, layer="run_info", read_geometry=False)
    assert any(k.startswith("sha256:soil.gpkg") for k in info["key"])


def test_gaps_are_outside_and_follow_the_nodata_rule(tmp_path, capsys):
    # the B polygon stops 5 m short of the east edge: 5 m x 100 m = 500 m2 of S2 uncovered
    target, _ = run_tiny(tmp_path, capsys, soil_layer(
        [square(0, 0, 50, 100), square(50, 0, 95, 100)]))
    coverage = pyogrio.read_dataframe(target, layer="coverage", read_geometry=False)
    row = coverage.set_index("subcatchment_id").loc["S2"]
    assert row["outside_area_m2"] == pytest.approx(500.0, rel=1e-9)
    assert row["nodata_area_m2"] == 0.0
    units = pyogrio.read_dataframe(target, layer="unit_results", read_geometry=False)
    s2 = units[units["subcatchment_id"] == "S2"]  # dominant: the gap goes to its one unit
    assert s2["area_m2"].sum() == pytest.approx(5000.0, rel=1e-9)
    info = pyogrio.read_dataframe(target, layer="run_info", read_geometry=False)
    assert info["value"].str.contains("given to their dominant unit").any()


def test_check_describes_the_layer(tmp_path, capsys):
    folder = tmp_path / "p"
    make_project(folder)
    soil_layer([square(0, 0, 50, 100), square(50, 0, 95, 100), square(95, 0, 100, 20)],
               ["A", "B", None])(folder)
    code, out, err = run_cli(capsys, ["check", str(folder)])
    assert code == 0, err
    line = next(x for x in out.splitlines() if x.startswith("polygon layer soil.gpkg:soils"))
    assert "3 polygon(s)" in line and "A (1), B (1)" in line and "(no class) (1)" in line
    assert "no overlapping polygons" in line
    assert "gaps (ground in no polygon" in line and ": 400 m2 in 1 subcatchment(s)" in line


def test_layer_without_class_field_is_refused(tmp_path):
    project = make_project(tmp_path / "p")
    project.write_text(project.read_text().replace('path = "soil.tif"',
                                                   'path = "soil.gpkg"\nlayer = "soils"'))
    with pytest.raises(ProjectFileError, match=r"\[soil\]\.layer: is given without class_field"):
        load_project(project)


def test_demo_soil_polygons_equal_the_raster_demo():
    """The demo's soil map is its soil raster traced along the cell edges (make_demo.py), and
    the cover raster's cells nest in the soil cells: both overlays are exact, so they agree to
    rounding, and so do the runoff results."""
    results = []
    for name in ("gisrun.toml", "gisrun_soil_polygons.toml"):
        project = load_project(DEMO / name)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            inputs = read_inputs(project)
            units, coverage, _ = overlay_inputs(project, inputs)
            params, _, _ = prepare_parameters(project, inputs, units)
        ids = inputs.subcatchments["subcatchment_id"].to_numpy(dtype=object)
        storm = run_storm(params, inputs.storms[1], project.time_step_s, sub_ids=ids)
        results.append((units, coverage, storm.subcatchments))
    (u_r, c_r, s_r), (u_p, c_p, s_p) = results
    keys = ["subcatchment_id", "soil_class", "cover_class"]
    merged = u_r.merge(u_p, on=keys, how="outer", suffixes=("_r", "_p"))
    assert merged.notna().all().all()  # the same units on both sides
    np.testing.assert_allclose(merged["area_m2_p"], merged["area_m2_r"], rtol=1e-8, atol=1e-6)
    for column in ("covered_area_m2", "nodata_area_m2", "outside_area_m2"):
        np.testing.assert_allclose(c_p[column], c_r[column], rtol=1e-8, atol=1e-6)
    numeric = s_r.select_dtypes("number").columns
    pd.testing.assert_frame_equal(s_p[numeric], s_r[numeric], rtol=1e-8, atol=1e-9)


def _cover_raster_in_halves(d):
    """Cover raster: impervious (code 1) in the north half, open space (5) in the south."""
    codes = np.full((10, 10), 5, dtype=np.uint8)
    codes[:5] = 1
    (d / "cover.tif").unlink()
    write_raster(d / "cover.tif", codes)
    edit_toml(d / "gisrun.toml", '"5" = "open_space_good"', '"1" = "impervious"\n'
              '"5" = "open_space_good"')


def _cover_polygons_in_halves(d):
    """The same cover as two polygons of a cover layer, class names in the field."""
    gpd.GeoDataFrame({"cover": ["impervious", "open_space_good"]},
                     geometry=[square(0, 50, 100, 100), square(0, 0, 100, 50)],
                     crs=CRS).to_file(d / "cover.gpkg", layer="cover", engine="pyogrio")
    edit_toml(d / "gisrun.toml", 'path = "cover.tif"', 'path = "cover.gpkg"\n'
              'class_field = "cover"')
    edit_toml(d / "gisrun.toml", '[cover.codes]\n"5" = "open_space_good"\n', "")


@pytest.mark.parametrize("soil_as_polygons", [False, True])
def test_cover_polygons_give_the_cover_raster_results(tmp_path, capsys, soil_as_polygons):
    soil = (soil_layer(),) if soil_as_polygons else ()
    raster, _ = run_tiny(tmp_path, capsys, *soil, _cover_raster_in_halves, name="raster.gpkg")
    polygons, _ = run_tiny(tmp_path, capsys, *soil, _cover_polygons_in_halves,
                           name="polygons.gpkg")
    for layer in ("runoff_steady", "unit_results"):
        a = pyogrio.read_dataframe(raster, layer=layer, read_geometry=False)
        b = pyogrio.read_dataframe(polygons, layer=layer, read_geometry=False)
        assert set(a.get("cover_class", ["x"])) == set(b.get("cover_class", ["x"]))
        numeric = a.select_dtypes("number").columns
        np.testing.assert_allclose(b[numeric].to_numpy(float), a[numeric].to_numpy(float),
                                   rtol=1e-12, atol=1e-12)


def test_impervious_grid_with_a_polygon_layer_is_refused(tmp_path):
    folder = tmp_path / "p"
    make_project(folder)
    soil_layer()(folder)
    write_raster(folder / "imp.tif", np.full((10, 10), 40, dtype=np.uint8))
    with open(folder / "gisrun.toml", "a") as handle:
        handle.write('\n[impervious]\npath = "imp.tif"\nscale = "percent"\n')
    with pytest.raises(InputError, match=r"\[impervious\]\.path: .*\[soil\] is a polygon layer"):
        read_inputs(load_project(folder))


def _keys_with_table(d):
    """Map-unit keys in the layer's field, their groups in an attribute table (CSV)."""
    (d / "soil_keys.csv").write_text("key,hydrologic_soil_group\n470,A\n471,B\n")
    edit_toml(d / "gisrun.toml", 'class_field = "group"',
              'class_field = "group"\nattributes = "soil_keys.csv"')


def test_keys_in_the_field_go_through_an_attribute_table(tmp_path, capsys):
    named, _ = run_tiny(tmp_path, capsys, soil_layer(), name="named.gpkg")
    keyed, _ = run_tiny(tmp_path, capsys, soil_layer(labels=[470, 471]), _keys_with_table,
                        name="keyed.gpkg")
    a = pyogrio.read_dataframe(named, layer="unit_results", read_geometry=False)
    b = pyogrio.read_dataframe(keyed, layer="unit_results", read_geometry=False)
    assert a["soil_class"].tolist() == b["soil_class"].tolist()
    numeric = a.select_dtypes("number").columns
    np.testing.assert_allclose(b[numeric].to_numpy(float), a[numeric].to_numpy(float),
                               rtol=1e-12)
