"""Reading soil and cover polygon layers: formats, feature ids, field types, repairs."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
from shapely.geometry import Polygon, box

from gisrun.errors import CRSError, GisrunWarning, VectorError
from gisrun.io.class_layer import read_class_layer

CRS = "EPSG:32617"
SHAPES = [box(0, 0, 10, 10), box(10, 0, 20, 10), box(20, 0, 30, 10)]


@pytest.mark.parametrize(("name", "driver", "layer"), [
    ("soil.gpkg", "GPKG", "soils"), ("soil.shp", "ESRI Shapefile", None),
    ("soil.geojson", "GeoJSON", None), ("soil.fgb", "FlatGeobuf", None)])
def test_any_gdal_polygon_format(tmp_path, name, driver, layer):
    path = tmp_path / name
    kwargs = {"layer": layer} if layer else {}
    gpd.GeoDataFrame({"group": ["A", "B", None]}, geometry=SHAPES, crs=CRS).to_file(
        path, driver=driver, engine="pyogrio", **kwargs)
    frame, here = read_class_layer(path, field="group", layer=layer)
    assert here.startswith(f"{name}:")
    frame = frame.iloc[np.argsort(frame.geometry.bounds["minx"].to_numpy())]  # FlatGeobuf sorts
    assert frame["value"].tolist()[:2] == ["A", "B"] and frame["value"].isna().tolist()[2]
    assert shapely.area(frame.geometry.to_numpy()).tolist() == [100.0, 100.0, 100.0]
    assert len(set(frame["feature_id"])) == 3  # the file's own ids (1.. in a GeoPackage)


def test_whole_number_field_and_feature_ids(tmp_path):
    path = tmp_path / "soil.gpkg"
    gpd.GeoDataFrame({"code": np.array([3, 1, 2], dtype=np.int32)}, geometry=SHAPES,
                     crs=CRS).to_file(path, layer="soils", engine="pyogrio")
    frame, _ = read_class_layer(path, field="code")
    assert frame["value"].tolist() == [3, 1, 2]
    assert frame["feature_id"].tolist() == [1, 2, 3]


def test_features_without_geometry_are_left_out_with_a_warning(tmp_path):
    path = tmp_path / "soil.gpkg"
    gpd.GeoDataFrame({"group": ["A", "B", "C"]}, geometry=[SHAPES[0], None, SHAPES[2]],
                     crs=CRS).to_file(path, layer="soils", engine="pyogrio")
    with pytest.warns(GisrunWarning, match=r"soil\.gpkg:soils: 1 feature\(s\) without geometry "
                                           r"left out \(feature ids \[2\]\)"):
        frame, _ = read_class_layer(path, field="group")
    assert frame["value"].tolist() == ["A", "C"]


def test_invalid_polygon_is_repaired_and_named(tmp_path):
    path = tmp_path / "soil.gpkg"
    bowtie = Polygon([(0, 0), (10, 10), (10, 0), (0, 10)])  # two triangles of 25 m2
    gpd.GeoDataFrame({"group": ["A", "B"]}, geometry=[box(20, 0, 30, 10), bowtie],
                     crs=CRS).to_file(path, layer="soils", engine="pyogrio")
    with pytest.warns(GisrunWarning, match=r"repaired 1 invalid polygon.*feature ids \[2\]"):
        frame, _ = read_class_layer(path, field="group")
    assert shapely.is_valid(frame.geometry.to_numpy()).all()
    assert shapely.area(frame.geometry.to_numpy()).tolist() == pytest.approx([100.0, 50.0])


def test_layer_without_crs_needs_one_stated(tmp_path):
    path = tmp_path / "soil.shp"
    gpd.GeoDataFrame({"group": ["A"]}, geometry=SHAPES[:1]).to_file(path, engine="pyogrio")
    with pytest.raises(CRSError, match=r"soil\.shp:soil: has no CRS"):
        read_class_layer(path, field="group")
    frame, _ = read_class_layer(path, field="group", crs="EPSG:32617")
    assert frame.crs.to_epsg() == 32617


def test_missing_field_is_named_with_the_nearest(tmp_path):
    path = tmp_path / "soil.gpkg"
    gpd.GeoDataFrame({"group": ["A"]}, geometry=SHAPES[:1], crs=CRS).to_file(
        path, layer="soils", engine="pyogrio")
    with pytest.raises(VectorError, match=r"soil\.gpkg:soils:grop: no such field.*group"):
        read_class_layer(path, field="grop")
