"""Cell-level runoff and ponding rasters: grid, mapping of unit results onto cells, weighting.

The synthetic case (built here, tiny rasters) has hand-checkable cells: a soil
grid of 10 m cells (A in columns 0-2, D in 3-5) under a 5 m cover grid (open
space, one impervious column of cover cells at x 20-25 m, quarter-acre housing
in the northern 10 m), and two subcatchments split at x = 27 m, so soil column 2
is cut by the boundary and holds two cover classes.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import shapely
from numpy.testing import assert_allclose
from shapely.geometry import box

from gisrun import run
from gisrun.grid import cells as cellgrid
from gisrun.write.rasters import write_cell_rasters

TOML = """
[project]
name = "tiny"
units = "si"
output = "out/tiny.gpkg"
time_step_min = 5
[subcatchments]
path = "sub.gpkg"
layer = "subcatchments"
id_field = "sid"
{extra_sub}
[soil]
path = "soil.tif"
classification = "hydrologic_soil_group"
initial_saturation = 0.3
[soil.codes]
"1" = "A"
"4" = "D"
[cover]
path = "cover.tif"
[cover.codes]
"1" = "impervious"
"2" = "residential_quarter_acre"
"5" = "open_space_good"
[nodata]
rule = "omit"
max_fraction = 0.5
[method]
name = "green_ampt"
combine = "{combine}"
{extra}
[[storms]]
name = "uniform_60mm"
kind = "uniform"
depth = 60
duration_min = 60
"""


def write_geotiff(path: Path, codes: np.ndarray, *, origin: tuple[float, float], cell: float,
                  nodata: float) -> Path:
    """One-band GeoTIFF in EPSG:32617, row 0 northernmost, starting at ``origin`` (x, y)."""
    from rasterio.transform import from_origin

    with rasterio.open(path, "w", driver="GTiff", height=codes.shape[0], width=codes.shape[1],
                       count=1, dtype=codes.dtype, crs="EPSG:32617", nodata=nodata,
                       transform=from_origin(origin[0], origin[1], cell, cell)) as dst:
        dst.write(codes, 1)
    return path


def write_polygons(path: Path, geoms: list, **fields: list) -> Path:
    """Polygons with attribute columns into a GeoPackage layer ``subcatchments``."""
    gdf = gpd.GeoDataFrame(dict(fields), geometry=list(geoms), crs="EPSG:32617")
    gdf.to_file(path, layer="subcatchments", engine="pyogrio")
    return path


def tiny_project(folder: Path, *, combine: str = "units", rain_scale: tuple[float, float] | None
                 = None, cover_origin: tuple[float, float] = (0.0, 40.0)) -> Path:
    """Write the synthetic project into ``folder``; returns the project file."""
    folder.mkdir(parents=True, exist_ok=True)
    soil = np.ones((4, 6), dtype=np.uint8)
    soil[:, 3:] = 4
    write_geotiff(folder / "soil.tif", soil, origin=(0.0, 40.0), cell=10.0, nodata=255)
    cover = np.full((8, 12), 5, dtype=np.uint8)
    cover[:, 4] = 1  # x 20-25 m: impervious
    cover[:2, :] = 2  # y 30-40 m: quarter-acre housing
    write_geotiff(folder / "cover.tif", cover, origin=cover_origin, cell=5.0, nodata=0)
    fields = {"sid": ["P1", "P2"]}
    extra_sub, extra = "", ""
    if rain_scale:
        fields["rain_factor"] = list(rain_scale)
        extra = '[rain_scale]\nfield = "rain_factor"'
    write_polygons(folder / "sub.gpkg", [box(0, 10, 27, 40), box(27, 10, 60, 40)], **fields)
    text = TOML.format(extra_sub=extra_sub, extra=extra, combine=combine)
    (folder / "gisrun.toml").write_text(text)
    return folder / "gisrun.toml"


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    folder = tmp_path_factory.mktemp("tiny")
    result = run(tiny_project(folder / "p", rain_scale=(1.0, 1.5)))
    paths = write_cell_rasters(result, folder / "rasters")
    notes = list(result.cells.notes)
    return result, paths["uniform_60mm"], notes


def read(path):
    with rasterio.open(path) as src:
        return src.read(1, masked=True).filled(np.nan), src.profile


def unit(result, sid, soil, cover, surface="pervious", col="runoff_depth_m"):
    u = result.storms[0].units
    row = u[(u.subcatchment_id == sid) & (u.soil_class == soil) & (u.cover_class == cover)
            & (u.surface == surface)]
    assert len(row) == 1
    return float(row[col].iloc[0])


def test_grid_crs_transform_nodata_and_layout_match_the_soil_raster(tiny):
    result, paths, _ = tiny
    with rasterio.open(result.project.soil.path) as soil:
        ref = soil.profile
    for key in ("runoff", "time_to_ponding"):
        _, prof = read(paths[key])
        assert rasterio.crs.CRS.from_user_input(prof["crs"]) == ref["crs"]
        assert prof["transform"] == ref["transform"]
        assert (prof["width"], prof["height"]) == (ref["width"], ref["height"])
        # issue 15 item 2: float outputs' nodata is NaN, not the soil raster's 255
        assert ref["nodata"] == 255 and np.isnan(prof["nodata"])
        assert prof["dtype"] == "float32"
    with rasterio.open(paths["runoff"]) as src:
        assert src.compression.name.lower() == "deflate"
        assert src.profile["tiled"]


def test_cells_outside_every_subcatchment_are_nodata(tiny):
    _, paths, _ = tiny
    runoff, _ = read(paths["runoff"])
    assert np.isnan(runoff[3]).all()  # y 0-10 m: no polygon
    assert np.isfinite(runoff[:3]).all()


def test_interior_cells_take_their_units_result_exactly(tiny):
    """Rows 2 (y 10-20 m): open space only, except the impervious cover column in soil col 2."""
    result, paths, _ = tiny
    runoff, _ = read(paths["runoff"])
    ponding, _ = read(paths["time_to_ponding"])
    assert_allclose(runoff[2, 0] / 1000, unit(result, "P1", "A", "open_space_good"), rtol=1e-6)
    assert_allclose(runoff[2, 4] / 1000, unit(result, "P2", "D", "open_space_good"), rtol=1e-6)
    ttp = unit(result, "P2", "D", "open_space_good", col="time_to_ponding_s") / 60
    assert_allclose(ponding[2, 4], ttp, rtol=1e-6)


def test_cut_cell_weights_cover_and_subcatchment_parts_by_area(tiny):
    """Soil cell (row 2, col 2), x 20-30 m: P1 owns 20-27 (5 m impervious + 2 m open), P2 27-30.

    P2 gets 1.5 x the rain, so its open-space unit differs from P1's.
    """
    result, paths, _ = tiny
    runoff, _ = read(paths["runoff"])
    ponding, _ = read(paths["time_to_ponding"])
    imp = unit(result, "P1", "A", "impervious", surface="impervious")
    open1 = unit(result, "P1", "A", "open_space_good")
    open2 = unit(result, "P2", "A", "open_space_good")
    assert open2 > open1 * 1.2  # the case really mixes different values
    assert_allclose(runoff[2, 2] / 1000, (5 * imp + 2 * open1 + 3 * open2) / 10, rtol=1e-6)
    first = min(unit(result, s, "A", "open_space_good", col="time_to_ponding_s")
                for s in ("P1", "P2")) / 60
    assert_allclose(ponding[2, 2], first, rtol=1e-6)


def patchy_project(folder: Path) -> Path:
    """A 600 m x 400 m case: soil and cover in patches of 40 m and 20 m, two subcatchments
    split by a slanted line, so cut cells are a few percent of each subcatchment's area."""
    tiny_project(folder)
    rows, cols = np.indices((40, 60))
    soil = np.where(((rows // 4) + (cols // 4)) % 3 == 0, 4, 1).astype(np.uint8)
    write_geotiff(folder / "soil.tif", soil, origin=(0.0, 400.0), cell=10.0, nodata=255)
    r5, c5 = np.indices((80, 120))
    pattern = ((r5 // 4) * 7 + (c5 // 4) * 3) % 5
    cover = np.choose(np.minimum(pattern, 2), [5, 1, 2]).astype(np.uint8)
    write_geotiff(folder / "cover.tif", cover, origin=(0.0, 400.0), cell=5.0, nodata=0)
    line = [(0, 395), (263.3, 395), (331.7, 5), (0, 5)]
    left = shapely.Polygon(line)
    right = shapely.difference(box(3, 5, 597, 395), left)
    write_polygons(folder / "sub.gpkg", [left, right], sid=["P1", "P2"])
    return folder / "gisrun.toml"


def test_area_weighted_cells_match_each_subcatchment_within_one_percent(tmp_path):
    result = run(patchy_project(tmp_path / "p"))
    paths = write_cell_rasters(result, tmp_path / "rasters")
    runoff, prof = read(paths["uniform_60mm"]["runoff"])
    subs = result.storms[0].subcatchments.set_index("subcatchment_id")
    for sid, geom in zip(result.subcatchments.subcatchment_id, result.subcatchments.geometry,
                         strict=True):
        cell_mean = coverage_weighted(runoff, geom, prof["transform"]) / 1000
        assert_allclose(cell_mean, subs.loc[sid, "runoff_depth_m"], rtol=0.01)


def coverage_weighted(raster, geom, transform):
    """Mean of a raster over a polygon, cells weighted by the exact cover (shapely)."""
    rows, cols = np.indices(raster.shape)
    x0, y1 = transform @ (cols.ravel(), rows.ravel())
    x1, y0 = transform @ (cols.ravel() + 1, rows.ravel() + 1)
    cells = shapely.box(x0, y0, x1, y1)
    area = shapely.area(shapely.intersection(geom, cells))
    values = raster.ravel()
    ok = (area > 0) & np.isfinite(values)
    return float(np.sum(area[ok] * values[ok]) / np.sum(area[ok]))


def test_composite_runs_still_map_soil_and_cover_units(tmp_path):
    """With combine = "composite" the rasters still show the units (run here per unit)."""
    result = run(tiny_project(tmp_path / "p", combine="composite"))
    units_result = run(tiny_project(tmp_path / "q"))
    paths = write_cell_rasters(result, tmp_path / "rasters")
    runoff, _ = read(paths["uniform_60mm"]["runoff"])
    assert_allclose(runoff[2, 0] / 1000, unit(units_result, "P1", "A", "open_space_good"),
                    rtol=1e-6)
    assert runoff[2, 4] != pytest.approx(runoff[2, 0], rel=0.05)  # D and A differ


def test_unaligned_cover_is_sampled_at_the_cell_centre_and_says_so(tmp_path):
    result = run(tiny_project(tmp_path / "p", cover_origin=(2.5, 40.0)))
    paths = write_cell_rasters(result, tmp_path / "rasters")
    notes = list(result.cells.notes)
    assert any("centre" in n for n in notes)
    runoff, _ = read(paths["uniform_60mm"]["runoff"])
    # soil cell (2, 0) centre x = 5 m lies in cover column 0 (x 2.5-7.5): open space
    assert_allclose(runoff[2, 0] / 1000, unit(result, "P1", "A", "open_space_good"), rtol=1e-6)


def test_rasters_say_what_they_hold_and_us_runs_write_inches(tmp_path):
    """Defect: the GeoTIFFs had no band description and no unit, so a GIS showed bare numbers
    (mm or in told only by the file name). Each band now names its quantity and unit, and a
    US run's runoff raster holds inches: 1 in = 0.0254 m exactly (NIST SP 811, App. B)."""
    toml = tiny_project(tmp_path / "p")
    toml.write_text(toml.read_text().replace('units = "si"', 'units = "us"')
                    .replace("depth = 60", "depth = 2.4"))
    result = run(toml)
    paths = write_cell_rasters(result, tmp_path / "rasters")["uniform_60mm"]
    assert paths["runoff"].name == "runoff_depth_in_uniform_60mm.tif"
    with rasterio.open(paths["runoff"]) as src:
        assert src.units == ("in",)
        assert src.descriptions == ("runoff depth, uniform_60mm",)
    with rasterio.open(paths["time_to_ponding"]) as src:
        assert src.units == ("min",)
        assert src.descriptions == ("time to ponding, uniform_60mm",)
    runoff, _ = read(paths["runoff"])
    assert_allclose(runoff[2, 0] * 0.0254, unit(result, "P1", "A", "open_space_good"),
                    rtol=1e-6)  # float32 raster
    ponding, _ = read(paths["time_to_ponding"])
    assert np.isfinite(ponding[2, 0]) and np.isfinite(runoff[2, 0]) and runoff[2, 0] > 0
    assert_allclose(ponding[2, 0] * 60.0,
                    unit(result, "P1", "A", "open_space_good", col="time_to_ponding_s"),
                    rtol=1e-6)


def test_dominant_rule_fills_nodata_slots_from_the_largest_unit():
    import pandas as pd

    frame = pd.DataFrame({
        "subcatchment_id": ["S", "S"], "soil_class": ["A", "B"], "cover_class": ["x", "x"],
        "surface": ["pervious", "pervious"], "area_m2": [1.0, 3.0],
        "runoff_depth_m": [0.01, 0.02], "time_to_ponding_s": [np.nan, 600.0]})
    filled = cellgrid.unit_lookup([frame], ["S"], soil_labels=["A", "B"], cover_labels=["x"],
                                  fill_dominant=True)
    assert filled.runoff_m[0, 0, 2, 0] == 0.02 and filled.ponding_s[0, 0, 0, 1] == 600.0
    left = cellgrid.unit_lookup([frame], ["S"], soil_labels=["A", "B"], cover_labels=["x"],
                                fill_dominant=False)
    assert np.isnan(left.runoff_m[0, 0, 2, 0])
