"""Overlay speed and memory against two general-purpose zonal statistics libraries.

Generates (once, into benchmarks/scratch/) a categorical GeoTIFF with coherent
class patches and Voronoi subcatchments, then runs in one go, each in a fresh
process so peak memory is its own:

- gisrun's exact overlay (``compute_unit_areas``),
- rasterstats categorical ``zonal_stats`` (cell-centre counts, not exact),
- exactextract ``unique`` + ``frac`` (exact coverage) in its configurations,

and prints times, peak resident memory and the ratios. Targets: at least 10x
faster than rasterstats, at most 0.5x the fastest exactextract configuration,
peak memory under 1 GB.

    python benchmarks/bench_overlay.py            # 8000 x 8000 cells, 10,000 polygons
    python benchmarks/bench_overlay.py --polygons 100000
    python benchmarks/bench_overlay.py --small    # 2000 x 2000 cells, 1,000 polygons
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

WORK = Path(__file__).parent / "scratch"
CRS = "EPSG:32617"
X0, Y0, CELL = 600_000.0, 3_910_000.0, 1.0
CODES = {1: "A", 2: "B", 3: "C", 4: "D", 5: "B/D"}


def make_raster(path: Path, n: int) -> None:
    import rasterio
    from rasterio.transform import from_origin
    from scipy import ndimage

    rng = np.random.default_rng(7)
    coarse = ndimage.gaussian_filter(rng.standard_normal((n // 20 + 2, n // 20 + 2)), 2.0)
    edges = np.quantile(coarse, [0.2, 0.4, 0.6, 0.8])
    profile = {"driver": "GTiff", "width": n, "height": n, "count": 1, "dtype": "uint8",
               "crs": CRS, "transform": from_origin(X0, Y0, CELL, CELL), "nodata": 255,
               "tiled": True, "blockxsize": 512, "blockysize": 512, "compress": "deflate"}
    with rasterio.open(path, "w", **profile) as dst:
        for r0 in range(0, n, 512):
            rows = np.arange(r0, min(r0 + 512, n))
            rr, cc = np.meshgrid(rows / 20.0, np.arange(n) / 20.0, indexing="ij")
            field = ndimage.map_coordinates(coarse, [rr, cc], order=1)
            codes = (np.digitize(field, edges) + 1).astype(np.uint8)
            dst.write(codes, 1, window=((r0, r0 + len(rows)), (0, n)))


def make_polygons(path: Path, n_cells: int, n_poly: int) -> None:
    import geopandas as gpd
    import shapely

    rng = np.random.default_rng(11)
    extent = shapely.box(X0, Y0 - n_cells * CELL, X0 + n_cells * CELL, Y0)
    pts = rng.uniform([X0, Y0 - n_cells * CELL], [X0 + n_cells * CELL, Y0], (n_poly, 2))
    cells = shapely.voronoi_polygons(shapely.MultiPoint(pts), extend_to=extent)
    geoms = shapely.intersection(np.asarray(cells.geoms), extent)
    geoms = shapely.segmentize(geoms, 7.3 * CELL)  # vertices along edges, as digitised lines have
    gdf = gpd.GeoDataFrame({"subcatchment_id": [f"S{i}" for i in range(len(geoms))]},
                           geometry=geoms, crs=CRS)
    gdf.to_file(path, layer="subcatchments", engine="pyogrio")


def run_gisrun(tif: str, gpkg: str) -> tuple[float, str]:
    from gisrun.grid.overlay import compute_unit_areas
    from gisrun.io.raster import read_class_raster
    from gisrun.io.vector import read_subcatchments

    gdf = read_subcatchments(gpkg, id_field="subcatchment_id")
    t0 = time.perf_counter()
    soil = read_class_raster(tif, codes=CODES)
    units, cov, _ = compute_unit_areas(gdf, soil, soil_codes=CODES, nodata_rule="omit",
                                       max_nodata_fraction=1.0)
    dt = time.perf_counter() - t0
    units.to_parquet(WORK / "gisrun_units.parquet") if _has_pyarrow() else None
    return dt, f"{len(units)} units"


def run_rasterstats(tif: str, gpkg: str) -> tuple[float, str]:
    import geopandas as gpd
    from rasterstats import zonal_stats

    gdf = gpd.read_file(gpkg)
    t0 = time.perf_counter()
    stats = zonal_stats(gdf, tif, categorical=True, nodata=255)
    return time.perf_counter() - t0, f"{len(stats)} features"


def run_exactextract(tif: str, gpkg: str, strategy: str) -> tuple[float, str]:
    import geopandas as gpd
    from exactextract import exact_extract

    gdf = gpd.read_file(gpkg)
    t0 = time.perf_counter()
    df = exact_extract(tif, gdf, ["unique", "frac"], include_cols=["subcatchment_id"],
                       strategy=strategy, output="pandas")
    return time.perf_counter() - t0, f"{len(df)} features"


def _has_pyarrow() -> bool:
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        return False
    return True


def _child(name: str, *args: str) -> None:
    fn = {"gisrun": run_gisrun, "rasterstats": run_rasterstats,
          "exactextract": run_exactextract}[name]
    seconds, info = fn(*args)
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps([seconds, peak_mb, info]))


def measure(name: str, *args: str) -> tuple[float, float, str]:
    """Run one contender in a fresh process; its peak RSS is then its own."""
    proc = subprocess.run([sys.executable, __file__, "--child", name, *args],
                          capture_output=True, text=True, check=False)
    if proc.returncode != 0:
        raise RuntimeError(f"{name} failed:\n{proc.stderr[-3000:]}")
    seconds, peak_mb, info = json.loads(proc.stdout.strip().splitlines()[-1])
    return seconds, peak_mb, info


def main() -> int:
    if len(sys.argv) > 2 and sys.argv[1] == "--child":
        _child(*sys.argv[2:])
        return 0
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--small", action="store_true", help="2000 x 2000 cells, 1000 polygons")
    parser.add_argument("--polygons", type=int, default=None, help="number of subcatchments")
    parser.add_argument("--skip-rasterstats", action="store_true")
    opts = parser.parse_args()
    n_cells = 2000 if opts.small else 8000
    n_poly = opts.polygons or (1000 if opts.small else 10_000)
    WORK.mkdir(exist_ok=True)
    tif, gpkg = WORK / f"classes_{n_cells}.tif", WORK / f"subcatchments_{n_cells}_{n_poly}.gpkg"
    if not tif.exists():
        make_raster(tif, n_cells)
    if not gpkg.exists():
        make_polygons(gpkg, n_cells, n_poly)
    print(f"raster {n_cells} x {n_cells} cells (uint8, tiled), {n_poly} polygons")
    rows = {"gisrun exact overlay": measure("gisrun", str(tif), str(gpkg))}
    for strategy in ("feature-sequential", "raster-sequential"):
        rows[f"exactextract {strategy}"] = measure("exactextract", str(tif), str(gpkg), strategy)
    if not opts.skip_rasterstats:
        rows["rasterstats categorical"] = measure("rasterstats", str(tif), str(gpkg))
    for name, (sec, mb, info) in rows.items():
        print(f"  {name:34s} {sec:8.2f} s   peak RSS {mb:7.0f} MB   ({info})")
    ours, peak = rows["gisrun exact overlay"][0], rows["gisrun exact overlay"][1]
    fastest_ee = min(v[0] for k, v in rows.items() if k.startswith("exactextract"))
    print(f"ratio gisrun / fastest exactextract: {ours / fastest_ee:.2f}  (target <= 0.5)")
    if "rasterstats categorical" in rows:
        print(f"speed-up over rasterstats: {rows['rasterstats categorical'][0] / ours:.1f}x  "
              "(target >= 10)")
    print(f"gisrun peak memory: {peak:.0f} MB  (target < 1024)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
