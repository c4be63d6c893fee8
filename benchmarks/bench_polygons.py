"""Soil (and cover) polygon layers against the raster path: time ratio measured in one run.

Generates (once, into benchmarks/scratch/) the usual synthetic rasters and Voronoi
subcatchments (``make_inputs.py``), traces the soil raster (and the cover raster, for the
both-polygons case) into polygons along the cell edges with ``rasterio.features.shapes``, and
times, interleaved, in this one process, each overlay as the workflow calls it:

- raster path: ``compute_unit_areas(subs, soil_raster, cover_raster, ...)``
- soil polygons, cover raster: ``polygon_unit_areas(subs, soil_polygons, cover_raster, ...)``
- soil polygons, no cover: ``polygon_unit_areas(subs, soil_polygons)`` against
  ``compute_unit_areas(subs, soil_raster)``
- both polygons: ``polygon_unit_areas(subs, soil_polygons, cover_polygons)`` against the
  two rasters

Because the polygons are the cells' outlines both paths are exact, so it also prints the
largest difference in unit area (a check that the two timed calls did the same work). The
ratio is what this prints; there is no target beyond "same order as the raster path".

    python benchmarks/bench_polygons.py                 # 1000 x 1000 cells, 1,000 polygons
    python benchmarks/bench_polygons.py --cells 2000 --polygons 4000 --repeat 3
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import rasterio
import shapely
from make_inputs import (
    COVER_CLASSES,
    SOIL_CLASSES,
    SOIL_NODATA,
    InputPaths,
    default_out_dir,
    make_rasters,
    make_subcatchments,
)
from rasterio.features import shapes

from gisrun.grid.overlay import compute_unit_areas
from gisrun.grid.polygons import MAX_VERTICES, class_polygons, polygon_unit_areas
from gisrun.io.raster import read_class_raster
from gisrun.io.vector import read_subcatchments

SOIL = {c: label for c, (label, _) in SOIL_CLASSES.items()}
COVER = {c: label for c, (label, _) in COVER_CLASSES.items()}


def traced(path, codes, where):
    """The raster's connected patches as polygons (cell edges), classes from ``codes``."""
    with rasterio.open(path) as src:
        data, transform, crs = src.read(1), src.transform, src.crs
    parts = list(shapes(data, transform=transform))
    geoms = [shapely.geometry.shape(g) for g, _ in parts]
    labels = [codes.get(int(v)) if int(v) != SOIL_NODATA else None for _, v in parts]
    return class_polygons(geoms, labels, np.arange(len(geoms)), crs.to_wkt(), where)


def timed(call, repeat):
    best, out = np.inf, None
    for _ in range(repeat):
        start = time.perf_counter()
        out = call()
        best = min(best, time.perf_counter() - start)
    return best, out


def largest_difference(a, b):
    keys = ["subcatchment_id", "soil_class", "cover_class"]
    m = a[0].merge(b[0], on=keys, how="outer", suffixes=("_a", "_b")).fillna(0.0)
    return float(np.max(np.abs(m["area_m2_a"] - m["area_m2_b"]) / np.maximum(m["area_m2_a"], 1)))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=1000)
    parser.add_argument("--polygons", type=int, default=1000)
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()
    paths = InputPaths.in_folder(default_out_dir(args.cells, args.polygons))
    if not paths.subcatchments.exists():
        make_rasters(paths.folder, n_cells=args.cells)
        make_subcatchments(paths.folder, n_polygons=args.polygons, n_cells=args.cells)
    subs = read_subcatchments(paths.subcatchments, id_field="subcatchment_code")
    soil, cover = read_class_raster(paths.soil), read_class_raster(paths.cover)
    soil_polygons = traced(paths.soil, SOIL, "soil (traced)")
    cover_polygons = traced(paths.cover, COVER, "cover (traced)")
    vertices = int(shapely.get_num_coordinates(soil_polygons.geometry).sum())
    print(f"{args.cells} x {args.cells} cells, {len(subs)} subcatchments; soil traced into "
          f"{len(soil_polygons.labels)} polygons ({vertices} vertices), cover into "
          f"{len(cover_polygons.labels)}; best of {args.repeat}, interleaved")
    start = time.perf_counter()  # done once per run by the workflow (align_polygon_layers)
    soil_polygons, cover_polygons = soil_polygons.subdivide(), cover_polygons.subdivide()
    print(f"cutting both layers into pieces of at most {MAX_VERTICES} vertices, once per run: "
          f"{time.perf_counter() - start:.2f} s (ClassPolygons.subdivide())")
    options = {"nodata_rule": "dominant", "max_nodata_fraction": 1.0}
    cases = [
        ("soil polygons + cover raster",
         "compute_unit_areas(subs, soil_raster, cover_raster, soil_codes, cover_codes)",
         lambda: compute_unit_areas(subs, soil, cover, soil_codes=SOIL, cover_codes=COVER,
                                    **options),
         "polygon_unit_areas(subs, soil_polygons, cover_raster, cover_codes=...)",
         lambda: polygon_unit_areas(subs, soil_polygons, cover, cover_codes=COVER, **options)),
        ("soil polygons, no cover", "compute_unit_areas(subs, soil_raster, soil_codes=...)",
         lambda: compute_unit_areas(subs, soil, soil_codes=SOIL, **options),
         "polygon_unit_areas(subs, soil_polygons)",
         lambda: polygon_unit_areas(subs, soil_polygons, **options)),
        ("soil and cover polygons",
         "compute_unit_areas(subs, soil_raster, cover_raster, soil_codes, cover_codes)",
         lambda: compute_unit_areas(subs, soil, cover, soil_codes=SOIL, cover_codes=COVER,
                                    **options),
         "polygon_unit_areas(subs, soil_polygons, cover_polygons)",
         lambda: polygon_unit_areas(subs, soil_polygons, cover_polygons, **options)),
    ]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for name, raster_text, raster_call, vector_text, vector_call in cases:
            t_raster, a = timed(raster_call, args.repeat)
            t_vector, b = timed(vector_call, args.repeat)
            print(f"\n{name}:\n  raster path  {t_raster:8.2f} s  {raster_text}\n"
                  f"  polygon path {t_vector:8.2f} s  {vector_text}\n"
                  f"  ratio polygon / raster = {t_vector / t_raster:.2f}; largest unit-area "
                  f"difference {largest_difference(a, b):.1e} (relative)")


if __name__ == "__main__":
    main()
