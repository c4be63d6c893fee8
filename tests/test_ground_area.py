"""Issue 15 item 1: areas are ground areas, whatever CRS the polygons and rasters are in.

The reference is pyproj's ``Geod`` (geodesic area on the ellipsoid, Karney 2013 algorithm)
of the polygon in longitude and latitude; the scale errors come from pyproj's
``Proj.get_factors``.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
from bad_inputs_helpers import make_project, run_cli, write_subcatchments
from pyproj import Geod, Proj
from shapely.geometry import box

from gisrun.crs import AREA_SCALE_TOLERANCE, ground_areas, is_web_mercator
from gisrun.grid.overlay import compute_unit_areas
from gisrun.io.raster import read_class_raster

#: A 200 m square in UTM 17N near 40 N, 80.3 W (about 60 km east of the central meridian).
SQUARE = box(560_000, 4_428_000, 560_200, 4_428_200)
#: Ohio North and Pennsylvania South state plane, US survey feet (NAD83).
COPIES = ["EPSG:32617", "EPSG:3857", "EPSG:4326", "EPSG:3734", "EPSG:2272"]


def geod_area(geoms: gpd.GeoSeries) -> float:
    """Reference: pyproj Geod area of the polygon in longitude-latitude (GRS80 = NAD83's)."""
    lonlat = geoms.to_crs("EPSG:4326").iloc[0]
    return abs(Geod(ellps="GRS80").geometry_area_perimeter(lonlat)[0])


def test_a_200_m_square_has_one_ground_area_in_every_crs():
    # issue 15 item 1 acceptance: UTM, Web Mercator, EPSG:4326 and US-feet state plane copies
    utm = gpd.GeoSeries([SQUARE], crs="EPSG:32617")
    ref = geod_area(utm)
    areas = {crs: ground_areas(utm.to_crs(crs)).area_m2[0] for crs in COPIES}
    for crs, area in areas.items():
        assert area == pytest.approx(ref, rel=AREA_SCALE_TOLERANCE), crs
    assert max(areas.values()) / min(areas.values()) - 1 < AREA_SCALE_TOLERANCE
    # the planar Web Mercator area, which gisrun reported before, is 1.7 times the ground
    assert utm.to_crs("EPSG:3857").area.iloc[0] / ref == pytest.approx(1.706, rel=1e-2)


def test_planar_only_where_the_scale_error_is_within_the_tolerance():
    utm = gpd.GeoSeries([SQUARE], crs="EPSG:32617")
    for crs, planar in [("EPSG:32617", True), ("EPSG:3734", True), ("EPSG:3857", False)]:
        g = utm.to_crs(crs)
        got = ground_areas(g)
        assert got.method.tolist() == ["planar" if planar else "ellipsoidal"], crs
        # the scale error is pyproj's areal scale at the square's centre, to the variation
        # across 200 m (Proj.get_factors, PROJ's projection factors)
        lon, lat = utm.to_crs("EPSG:4326").iloc[0].centroid.coords[0]
        factor = Proj(crs).get_factors(lon, lat).areal_scale
        assert got.scale_error[0] == pytest.approx(abs(factor - 1), abs=1e-4)
    assert ground_areas(utm.to_crs("EPSG:4326")).method.tolist() == ["ellipsoidal"]


def test_far_from_the_central_meridian_utm_areas_are_geodesic():
    # 450 km east of the UTM 17N central meridian the areal scale is about 1 + 0.5 %
    far = gpd.GeoSeries([box(950_000, 4_428_000, 950_200, 4_428_200)], crs="EPSG:32617")
    got = ground_areas(far)
    assert got.method.tolist() == ["ellipsoidal"]
    assert got.area_m2[0] == pytest.approx(geod_area(far), rel=1e-6)
    assert far.area.iloc[0] / got.area_m2[0] > 1.004  # the planar area would be 0.4 % off


def test_web_mercator_is_recognised():
    assert is_web_mercator(gpd.GeoSeries([], crs="EPSG:3857").crs)
    assert not is_web_mercator(gpd.GeoSeries([], crs="EPSG:3395").crs)  # World Mercator
    assert not is_web_mercator(gpd.GeoSeries([], crs="EPSG:32617").crs)


@pytest.mark.parametrize("raster_crs", ["EPSG:32617", "EPSG:3857"])
def test_unit_areas_add_up_to_the_ground_area(geotiff, raster_crs):
    # Web Mercator polygons over a UTM raster, and over a Web Mercator raster (planar cells
    # there are 1.7 times their ground area): units are scaled to the ground area
    utm = gpd.GeoSeries([SQUARE, box(560_200, 4_428_000, 560_300, 4_428_100)], crs="EPSG:32617")
    ref = [geod_area(utm.iloc[[i]]) for i in range(2)]
    grid = utm.to_crs(raster_crs).total_bounds
    cell = 5.0
    width = int(np.ceil((grid[2] - grid[0]) / cell)) + 4
    height = int(np.ceil((grid[3] - grid[1]) / cell)) + 4
    codes = np.ones((height, width), np.uint8)
    codes[:, width // 2:] = 2
    soil = read_class_raster(geotiff(codes, origin=(grid[0] - 2 * cell, grid[3] + 2 * cell),
                                     cell=cell, crs=raster_crs))
    subs = gpd.GeoDataFrame({"subcatchment_id": ["a", "b"]}, geometry=utm.to_crs("EPSG:3857"))
    units, cov, _ = compute_unit_areas(subs, soil, soil_codes={1: "A", 2: "B"})
    totals = units.groupby("subcatchment_id")["area_m2"].sum()
    np.testing.assert_allclose(totals[["a", "b"]], ref, rtol=AREA_SCALE_TOLERANCE)
    np.testing.assert_allclose(cov["area_m2"], ref, rtol=AREA_SCALE_TOLERANCE)
    assert cov["area_method"].tolist() == ["ellipsoidal", "ellipsoidal"]


def test_a_web_mercator_layer_runs_with_ground_areas_and_says_so(tmp_path, capsys):
    # the tiny project's two 50 m x 100 m squares (UTM, central meridian), given in Web Mercator
    folder = tmp_path / "project"
    make_project(folder)
    utm = gpd.read_file(folder / "sub.gpkg", layer="subcatchments")
    (folder / "sub.gpkg").unlink()
    write_subcatchments(folder / "sub.gpkg", list(utm.geometry.to_crs("EPSG:3857")),
                        crs="EPSG:3857")
    target = tmp_path / "result.gpkg"
    code, out, err = run_cli(capsys, ["run", str(folder), "--output", str(target),
                                      "--no-extras"])
    assert code == 0, err
    assert "Web Mercator" in " ".join((out + err).split())
    ref = [geod_area(utm.geometry.iloc[[i]]) for i in range(2)]
    layer = pyogrio.read_dataframe(target, layer="runoff_steady", read_geometry=False)
    np.testing.assert_allclose(layer["area_m2"], ref, rtol=AREA_SCALE_TOLERANCE)
    np.testing.assert_allclose(layer["modelled_area_m2"], ref, rtol=AREA_SCALE_TOLERANCE)
    np.testing.assert_allclose(layer["runoff_volume_m3"],
                               layer["runoff_depth_mm"] / 1000 * layer["modelled_area_m2"],
                               rtol=1e-9)
    info = pyogrio.read_dataframe(target, layer="run_info")
    rows = info.loc[info["key"] == "area_method", "value"].tolist()
    assert rows == ["ellipsoidal (pyproj Geod; geographic CRS or areal scale error above 0.1 %): "
                    "2 subcatchment(s)"]
    assert any("Web Mercator" in v for v in info.loc[info["key"] == "warning", "value"])


def test_run_info_says_planar_in_a_local_projection(tmp_path, capsys):
    folder = tmp_path / "project"
    make_project(folder)
    target = tmp_path / "result.gpkg"
    code, _, err = run_cli(capsys, ["run", str(folder), "--output", str(target), "--no-extras",
                                    "--quiet"])
    assert code == 0, err
    info = pyogrio.read_dataframe(target, layer="run_info")
    rows = info.loc[info["key"] == "area_method", "value"].tolist()
    assert rows == ["planar in WGS 84 / UTM zone 17N (areal scale error within 0.1 %): "
                    "2 subcatchment(s)"]
