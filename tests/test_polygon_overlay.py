"""Soil and cover polygon layers: unit areas against shapely intersections, and rasterisations.

The reference is shapely itself (GEOS polygon intersection and area): for hand-made shapes
every unit area must equal the sum of ``area(subcatchment & soil polygon [& cover polygon or
cell square])`` over the pieces of that class, to 1e-9 relative.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
from rasterio.features import rasterize
from rasterio.transform import from_origin
from shapely.geometry import Polygon, box

from gisrun.grid.overlay import compute_unit_areas
from gisrun.grid.polygons import (
    MAX_VERTICES,
    class_polygons,
    layer_overlaps,
    polygon_unit_areas,
)
from gisrun.io.raster import read_class_raster

#: A transverse Mercator with scale 1 on its central meridian: near its origin planar areas
#: are ground areas to 1e-9 (as in tests/test_overlay.py), so no scaling hides an error.
LOCAL = "+proj=tmerc +lat_0=0 +lon_0=-81 +k=1 +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs"
X0, Y0 = 1000.0, 4000.0
COVER = {1: "impervious", 2: "open_space_good", 3: "woods_good"}


def frame(geoms, crs=LOCAL):
    return gpd.GeoDataFrame({"subcatchment_id": [f"S{i}" for i in range(len(geoms))]},
                            geometry=list(geoms), crs=crs)


def layer(geoms, labels, crs=LOCAL, where="soil.gpkg:soil"):
    return class_polygons(list(geoms), list(labels), np.arange(1, len(geoms) + 1), crs, where)


def units_dict(units, sid):
    sub = units[units.subcatchment_id == sid]
    return dict(zip(zip(sub.soil_class, sub.cover_class, strict=True), sub.area_m2, strict=True))


def shapely_reference(subs, soil, cover=None):
    """(sub, soil, cover) -> area, straight from shapely intersections of every triple."""
    out: dict[tuple[str, str, str], float] = {}
    for k, s in enumerate(subs):
        for g, label in zip(*soil, strict=True):
            piece = shapely.intersection(s, g)
            for cg, clabel in zip(*(cover or ([piece], ["unspecified"]))[:2], strict=True):
                a = shapely.area(shapely.intersection(piece, cg))
                if a > 0 and label is not None:
                    key = (f"S{k}", label, clabel)
                    out[key] = out.get(key, 0.0) + a
    return out


#: Hand-made soil map: a rotated square, a triangle, a ring (polygon with a hole) and an
#: unsurveyed patch (no class) inside the ring's hole; the rest of the ground is a gap.
SOIL_SHAPES = [
    shapely.affinity.rotate(box(X0, Y0, X0 + 60, Y0 + 60), 17.0, origin=(X0, Y0)),
    Polygon([(X0 + 40, Y0 - 30), (X0 + 130, Y0 - 20), (X0 + 70, Y0 + 50)]).difference(
        shapely.affinity.rotate(box(X0, Y0, X0 + 60, Y0 + 60), 17.0, origin=(X0, Y0))),
    Polygon(box(X0 - 40, Y0 - 60, X0 + 160, Y0 - 30).exterior,
            [box(X0 + 10, Y0 - 55, X0 + 30, Y0 - 35).exterior.coords]),
    box(X0 + 10, Y0 - 55, X0 + 30, Y0 - 35),
]
#: ... and a second polygon of class A, so that pieces of one class must be added up
SOIL_SHAPES.append(box(X0 + 85, Y0 - 30, X0 + 150, Y0 - 5).difference(shapely.union_all(
    SOIL_SHAPES)))
SOIL_LABELS = ["B", "C/D", "A", None, "A"]
SUBS = [Polygon([(X0 - 10, Y0 - 50), (X0 + 90, Y0 - 45), (X0 + 80, Y0 + 40), (X0 + 5, Y0 + 30)]),
        shapely.Point(X0 + 100, Y0 - 30).buffer(25.0)]


def test_soil_polygons_equal_shapely_intersections():
    units, coverage, notes = polygon_unit_areas(frame(SUBS), layer(SOIL_SHAPES, SOIL_LABELS),
                                                nodata_rule="omit", max_nodata_fraction=1.0)
    ref = shapely_reference(SUBS, (SOIL_SHAPES, SOIL_LABELS))
    got = {(sid, s, c): a for sid in ("S0", "S1") for (s, c), a in units_dict(units, sid).items()}
    assert got.keys() == ref.keys()
    for key, area in ref.items():
        assert got[key] == pytest.approx(area, rel=1e-9), key
    # the unsurveyed patch is nodata, the rest of the uncovered ground outside (the gaps)
    nodata = shapely.area(shapely.intersection(SUBS[0], SOIL_SHAPES[3]))
    covered = shapely.area(shapely.intersection(SUBS[0], shapely.union_all(SOIL_SHAPES)))
    row = coverage.set_index("subcatchment_id").loc["S0"]
    assert row["nodata_area_m2"] == pytest.approx(nodata, rel=1e-9)
    assert row["outside_area_m2"] == pytest.approx(shapely.area(SUBS[0]) - covered, rel=1e-9)
    gap_notes = [n for n in notes if n.startswith("soil.gpkg:soil: ")]
    assert len(gap_notes) == 1 and "2 subcatchment(s) have ground in no polygon" in gap_notes[0]


#: Hand-made cover map: two roofs (one a multipolygon), woods, the rest open space; a gap.
COVER_SHAPES = [
    shapely.MultiPolygon([box(X0 + 5, Y0 + 5, X0 + 25, Y0 + 20),
                          box(X0 + 50, Y0 - 40, X0 + 70, Y0 - 25)]),
    Polygon([(X0 - 50, Y0 - 70), (X0 + 40, Y0 - 70), (X0 + 20, Y0)]),
    box(X0 - 50, Y0 - 70, X0 + 200, Y0 + 100).difference(shapely.union_all([
        box(X0 + 5, Y0 + 5, X0 + 25, Y0 + 20), box(X0 + 50, Y0 - 40, X0 + 70, Y0 - 25),
        Polygon([(X0 - 50, Y0 - 70), (X0 + 40, Y0 - 70), (X0 + 20, Y0)]),
        box(X0 + 60, Y0 + 20, X0 + 90, Y0 + 45)])),
]
COVER_LABELS = ["impervious", "woods_good", "open_space_good"]


def test_soil_and_cover_polygons_equal_shapely_intersections():
    units, _, _ = polygon_unit_areas(frame(SUBS), layer(SOIL_SHAPES, SOIL_LABELS),
                                     layer(COVER_SHAPES, COVER_LABELS, where="cover.gpkg:cover"),
                                     nodata_rule="omit", max_nodata_fraction=1.0)
    ref = shapely_reference(SUBS, (SOIL_SHAPES, SOIL_LABELS), (COVER_SHAPES, COVER_LABELS))
    got = {(sid, s, c): a for sid in ("S0", "S1") for (s, c), a in units_dict(units, sid).items()}
    assert got.keys() == ref.keys()
    for key, area in ref.items():
        assert got[key] == pytest.approx(area, rel=1e-9), key


def cover_raster(geotiff, cell=5.0):
    """A patchy 3-class cover raster over the shapes, origin (X0 - 60, Y0 + 60)."""
    rng = np.random.default_rng(7)
    n = int(240 / cell)
    codes = rng.integers(1, 4, (n, n)).astype(np.uint8)
    path = geotiff(codes, "cover.tif", origin=(X0 - 60, Y0 + 60), cell=cell, crs=LOCAL)
    return codes, read_class_raster(path)


def cell_reference(subs, soil, codes, cell, x0, y_top):
    """(sub, soil, cover) -> area from shapely: sub & soil polygon & every cell square."""
    rows, cols = np.indices(codes.shape)
    squares = shapely.box(x0 + cols * cell, y_top - (rows + 1) * cell,
                          x0 + (cols + 1) * cell, y_top - rows * cell).ravel()
    out: dict[tuple[str, str, str], float] = {}
    for k, s in enumerate(subs):
        for g, label in zip(*soil, strict=True):
            if label is None:
                continue
            areas = shapely.area(shapely.intersection(squares, shapely.intersection(s, g)))
            for code in np.unique(codes):
                a = float(areas[codes.ravel() == code].sum())
                if a > 0:
                    key = (f"S{k}", label, COVER[int(code)])
                    out[key] = out.get(key, 0.0) + a
    return out


def test_soil_polygons_with_a_cover_raster_equal_shapely_cell_intersections(geotiff):
    codes, cover = cover_raster(geotiff)
    units, _, _ = polygon_unit_areas(frame(SUBS), layer(SOIL_SHAPES, SOIL_LABELS), cover,
                                     cover_codes=COVER, nodata_rule="omit",
                                     max_nodata_fraction=1.0)
    ref = cell_reference(SUBS, (SOIL_SHAPES, SOIL_LABELS), codes, 5.0, X0 - 60, Y0 + 60)
    got = {(sid, s, c): a for sid in ("S0", "S1") for (s, c), a in units_dict(units, sid).items()}
    assert got.keys() == ref.keys()
    for key, area in ref.items():
        assert got[key] == pytest.approx(area, rel=1e-9), key


def test_soil_raster_with_cover_polygons_equals_shapely_cell_intersections(geotiff):
    rng = np.random.default_rng(11)
    codes = rng.integers(1, 3, (24, 24)).astype(np.uint8)
    soil = read_class_raster(geotiff(codes, "soil.tif", origin=(X0 - 60, Y0 + 60), cell=10.0,
                                     crs=LOCAL))
    cover = layer(COVER_SHAPES, COVER_LABELS, where="cover.gpkg:cover")
    units, _, _ = polygon_unit_areas(frame(SUBS), soil, cover, soil_codes={1: "A", 2: "D"},
                                     nodata_rule="omit", max_nodata_fraction=1.0)
    rows, cols = np.indices(codes.shape)
    squares = shapely.box(X0 - 60 + cols * 10.0, Y0 + 60 - (rows + 1) * 10.0,
                          X0 - 60 + (cols + 1) * 10.0, Y0 + 60 - rows * 10.0).ravel()
    for k, s in enumerate(SUBS):
        got = units_dict(units, f"S{k}")
        ref: dict[tuple[str, str], float] = {}
        for g, label in zip(COVER_SHAPES, COVER_LABELS, strict=True):
            areas = shapely.area(shapely.intersection(squares, shapely.intersection(s, g)))
            for code, soil_label in ((1, "A"), (2, "D")):
                a = float(areas[codes.ravel() == code].sum())
                if a > 0:
                    ref[(soil_label, label)] = ref.get((soil_label, label), 0.0) + a
        assert got == pytest.approx(ref, rel=1e-9)


def test_polygons_and_their_fine_rasterisation_agree_within_the_rasterisation_error(geotiff):
    """Rasterised at cell h (cell centres), a class boundary of length L moves at most
    about L x h of area between classes (common practice: each boundary cell is wholly one
    class); the polygon path must sit within that bound of the raster path, and be exact."""
    shapes, labels = [SOIL_SHAPES[i] for i in (0, 1, 2, 4)], ["B", "C/D", "A", "A"]
    boundary = float(shapely.length(shapely.boundary(shapely.union_all(
        [shapely.intersection(s, g) for s in SUBS for g in shapes]))))
    vector, _, _ = polygon_unit_areas(frame(SUBS), layer(shapes, labels), nodata_rule="omit",
                                      max_nodata_fraction=1.0)
    for cell in (2.0, 0.5):
        n = int(240 / cell)
        t = from_origin(X0 - 60, Y0 + 60, cell, cell)
        codes = rasterize([(g, {"B": 1, "C/D": 2, "A": 3}[k]) for g, k in
                           zip(shapes, labels, strict=True)], out_shape=(n, n),
                          transform=t, fill=255, dtype="uint8")
        soil = read_class_raster(geotiff(codes, f"fine_{cell}.tif", transform=t, crs=LOCAL,
                                         nodata=255))
        raster, _, _ = compute_unit_areas(frame(SUBS), soil, soil_codes={1: "B", 2: "C/D",
                                                                        3: "A"},
                                          nodata_rule="omit", max_nodata_fraction=1.0)
        a = vector.set_index(["subcatchment_id", "soil_class"])["area_m2"]
        b = raster.set_index(["subcatchment_id", "soil_class"])["area_m2"]
        diff = (a - b.reindex(a.index, fill_value=0.0)).abs()
        assert diff.max() <= boundary * cell, cell
    assert diff.max() > 0  # the raster path is not exact; the polygon path is (above)


def test_reprojected_layer_gives_the_same_units():
    """The soil layer in geographic coordinates, subcatchments in metres: same unit shares."""
    soil = layer(SOIL_SHAPES, SOIL_LABELS)
    here, _, notes = polygon_unit_areas(frame(SUBS), soil, nodata_rule="omit",
                                        max_nodata_fraction=1.0)
    moved, _, notes = polygon_unit_areas(frame(SUBS), soil.to_crs("EPSG:4326"),
                                         nodata_rule="omit", max_nodata_fraction=1.0)
    assert any("transformed" in n for n in notes)
    # straight edges in one CRS are slightly curved in the other: a few 1e-6 of the area
    assert moved["area_m2"].to_numpy() == pytest.approx(here["area_m2"].to_numpy(), rel=1e-5)


def test_overlaps_are_found_with_their_area():
    shapes = [box(0, 0, 10, 10), box(8, 0, 20, 10), box(20, 0, 30, 10),
              box(30, 0, 40, 10).union(box(29.999999, 0, 30, 10))]
    found = layer_overlaps(layer(shapes, ["A", "B", "C", "D"]))
    # 8-10 x 0-10 shared by features 1 and 2; the 1e-6 wide sliver at x = 30 is noise
    assert found[["feature_id", "other_id"]].values.tolist() == [[1, 2]]
    assert found["overlap_area_m2"].iloc[0] == pytest.approx(20.0, rel=1e-12)


def test_large_polygons_are_cut_into_small_pieces_with_the_same_ground():
    """A 4097-vertex disc and a 2049-vertex ring: pieces of at most MAX_VERTICES vertices that
    tile each polygon (areas to 1e-12), and the units equal shapely's intersections."""
    disc = shapely.Point(X0, Y0).buffer(80.0, quad_segs=1024)
    ring = shapely.Point(X0, Y0).buffer(120.0, quad_segs=512).difference(disc)
    big = layer([disc, ring], ["B", "D"])
    pieces = big.subdivide()
    assert shapely.get_num_coordinates(pieces.geometry).max() <= MAX_VERTICES
    assert pieces.geometry.size > 2 * 4097 / MAX_VERTICES
    for fid, whole in zip((1, 2), (disc, ring), strict=True):
        mine = pieces.geometry[pieces.feature_ids == fid]
        assert shapely.area(mine).sum() == pytest.approx(shapely.area(whole), rel=1e-12)
        assert shapely.area(shapely.union_all(mine).symmetric_difference(whole)) < 1e-6
    units, _, _ = polygon_unit_areas(frame(SUBS), big, nodata_rule="omit",
                                     max_nodata_fraction=1.0)
    ref = shapely_reference(SUBS, ([disc, ring], ["B", "D"]))
    got = {(sid, s, c): a for sid in ("S0", "S1") for (s, c), a in units_dict(units, sid).items()}
    assert got == pytest.approx(ref, rel=1e-9)
