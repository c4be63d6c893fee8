"""Subcatchment reader: formats, ids, geometry checks and CRS."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import shapely
from shapely.geometry import LineString, Polygon, box

from gisrun.errors import CRSError, GisrunWarning, VectorError
from gisrun.io.vector import read_subcatchments

SQUARES = [box(0, 0, 10, 10), box(10, 0, 30, 10)]


@pytest.mark.parametrize(("name", "driver", "layer"), [
    ("sub.gpkg", "GPKG", "subcatchments"),
    ("sub.shp", "ESRI Shapefile", None),
    ("sub.geojson", "GeoJSON", None),
    ("sub.fgb", "FlatGeobuf", None),
])
def test_reads_common_formats(polygon_file, name, driver, layer):
    path = polygon_file(SQUARES, name, driver=driver, layer=layer, code=[7, 8], slope=[0.1, 0.2])
    gdf = read_subcatchments(path, id_field="code", keep_fields=["slope"])
    assert list(gdf.columns) == ["subcatchment_id", "geometry", "slope"]
    gdf = gdf.sort_values("subcatchment_id")  # FlatGeobuf stores features in its own order
    assert gdf["subcatchment_id"].tolist() == ["7", "8"]  # ids become text
    assert gdf.crs.to_epsg() == 32617
    np.testing.assert_allclose(gdf.area, [100.0, 200.0])
    np.testing.assert_allclose(gdf["slope"], [0.1, 0.2])


def test_layer_choice_and_filter(tmp_path, polygon_file):
    path = polygon_file(SQUARES, layer="first", sid=["a", "b"])
    polygon_file([box(0, 0, 1, 1)], layer="second", sid=["z"])
    assert read_subcatchments(path, id_field="sid")["subcatchment_id"].tolist() == ["a", "b"]
    second = read_subcatchments(path, id_field="sid", layer="second")
    assert second["subcatchment_id"].tolist() == ["z"]
    only_b = read_subcatchments(path, id_field="sid", where="sid = 'b'")
    assert only_b["subcatchment_id"].tolist() == ["b"]


def test_missing_file(tmp_path):
    with pytest.raises(VectorError, match=r"nothere\.gpkg: file not found"):
        read_subcatchments(tmp_path / "nothere.gpkg", id_field="id")


def test_unreadable_file(tmp_path):
    bad = tmp_path / "junk.gpkg"
    bad.write_bytes(b"not a geopackage at all")
    with pytest.raises(VectorError, match=r"junk\.gpkg: cannot be read"):
        read_subcatchments(bad, id_field="id")


def test_unknown_layer_lists_layers(polygon_file):
    path = polygon_file(SQUARES, layer="basins", sid=["a", "b"])
    with pytest.raises(VectorError,
                       match=r"sub\.gpkg:catchments: no such layer; use one of \['basins'\]"):
        read_subcatchments(path, id_field="sid", layer="catchments")
    with pytest.raises(VectorError, match=r"sub\.gpkg:basin: no such layer; did you mean 'basins'"):
        read_subcatchments(path, id_field="sid", layer="basin")


def test_missing_field_suggests_nearest(polygon_file):
    path = polygon_file(SQUARES, basin_id=["a", "b"], area_ha=[1, 2])
    with pytest.raises(VectorError,
                       match=r"subcatchments:basinid: no such field; did you mean 'basin_id'"):
        read_subcatchments(path, id_field="basinid")
    with pytest.raises(VectorError, match=r":slope_pct: no such field"):
        read_subcatchments(path, id_field="basin_id", keep_fields=["slope_pct"])


def test_empty_selection(polygon_file):
    path = polygon_file(SQUARES, sid=["a", "b"])
    with pytest.raises(VectorError, match=r"sub\.gpkg:subcatchments: has no features matching"):
        read_subcatchments(path, id_field="sid", where="sid = 'zz'")


def test_null_ids(polygon_file):
    path = polygon_file(SQUARES, sid=["a", None])
    with pytest.raises(VectorError, match=r":sid: 1 feature\(s\) have no id \(rows \[1\]\)"):
        read_subcatchments(path, id_field="sid")


def test_blank_ids(polygon_file):
    path = polygon_file(SQUARES, sid=["a", "  "])
    with pytest.raises(VectorError, match=r":sid: 1 feature\(s\) have an empty id"):
        read_subcatchments(path, id_field="sid")


def test_duplicate_ids_named(polygon_file):
    path = polygon_file([*SQUARES, box(40, 0, 50, 10)], sid=["S1", "S2", "S1"])
    with pytest.raises(VectorError, match=r"duplicate ids \['S1'\]; make the ids unique"):
        read_subcatchments(path, id_field="sid")


def test_non_polygon_geometry(polygon_file):
    path = polygon_file([SQUARES[0], LineString([(0, 0), (5, 5)])], name="mixed.geojson",
                        driver="GeoJSON", layer=None, sid=["a", "road"])
    with pytest.raises(VectorError, match=r"id=road: \['LineString'\] geometries are not polygons"):
        read_subcatchments(path, id_field="sid")


def test_zero_area_polygon(polygon_file):
    flat = Polygon([(0, 0), (10, 0), (20, 0), (0, 0)])
    path = polygon_file([SQUARES[0], flat], name="flat.geojson", driver="GeoJSON", layer=None,
                        sid=["a", "sliver"])
    with pytest.raises(VectorError, match=r"id=sliver: polygons with zero area"):
        read_subcatchments(path, id_field="sid")


def test_invalid_polygon_repaired_with_warning(polygon_file):
    bowtie = Polygon([(0, 0), (10, 10), (10, 0), (0, 10), (0, 0)])  # self-intersecting
    path = polygon_file([bowtie, SQUARES[1]], sid=["bow", "ok"])
    with pytest.warns(GisrunWarning, match=r"repaired invalid polygons \(ids \['bow'\]\)"):
        gdf = read_subcatchments(path, id_field="sid")
    geom = gdf.geometry.iloc[0]
    assert geom.is_valid and geom.geom_type in {"Polygon", "MultiPolygon"}
    # two triangles of 10 x 5 / 2 = 25 m2 each (hand computation)
    assert geom.area == pytest.approx(50.0)
    assert shapely.equals(gdf.geometry.iloc[1], SQUARES[1])


def test_valid_layer_reads_without_warning(polygon_file):
    path = polygon_file(SQUARES, sid=["a", "b"])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        read_subcatchments(path, id_field="sid")


def test_no_crs_needs_a_stated_one(polygon_file):
    # a shapefile without its .prj has no CRS (GeoJSON would imply WGS 84)
    path = polygon_file(SQUARES, name="nocrs.shp", driver="ESRI Shapefile", layer=None, crs=None,
                        sid=["a", "b"])
    with pytest.raises(CRSError, match=r"nocrs\.shp:nocrs: has no CRS"):
        read_subcatchments(path, id_field="sid")
    gdf = read_subcatchments(path, id_field="sid", crs="EPSG:26917")
    assert gdf.crs.to_epsg() == 26917


def test_file_crs_wins_over_stated(polygon_file):
    path = polygon_file(SQUARES, sid=["a", "b"])
    assert read_subcatchments(path, id_field="sid", crs="EPSG:4326").crs.to_epsg() == 32617
