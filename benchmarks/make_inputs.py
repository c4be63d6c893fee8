"""Write large synthetic inputs for the gisrun benchmarks.

Everything here is invented and only meant to load the program: square categorical soil and
cover rasters of N x N cells with coherent patches, M Voronoi-like subcatchments tiling the
same extent, and a project file tying them together. Nothing is committed; the default
output folder is ``benchmarks/scratch/`` (ignored by git).

The rasters are computed and written one strip of tile rows at a time, so memory stays small
(a few hundred MB) even for 20000 x 20000 cells. The same ``rng_state`` gives the same files.

Command line::

    python benchmarks/make_inputs.py                       # 8000 x 8000 cells, 10,000 polygons
    python benchmarks/make_inputs.py --cells 20000 --polygons 100000
    python benchmarks/make_inputs.py --cells 2000 --polygons 500 --out /tmp/small
    python benchmarks/make_inputs.py --edge-heavy          # 100,000 small curved polygons

From Python (benchmark scripts)::

    from make_inputs import make_inputs
    paths = make_inputs(out_dir, n_cells=8000, n_polygons=10_000)   # reuses existing files
    paths.project                                                   # -> .../gisrun.toml
"""

from __future__ import annotations

import argparse
import time
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import rasterio
import shapely
from numpy.typing import NDArray
from rasterio.transform import from_origin
from rasterio.windows import Window
from scipy import sparse

__all__ = [
    "InputPaths",
    "default_out_dir",
    "make_edge_heavy",
    "make_inputs",
    "make_rasters",
    "make_subcatchments",
    "write_project_file",
    "main",
]

HERE = Path(__file__).resolve().parent
RNG_STATE = 7321  # fixed state of the random-number generator: same files every run
CRS = "EPSG:32617"
WEST_M, NORTH_M = 300_000.0, 4_500_000.0  # invented origin of the grid, top-left corner
CELL_M = 10.0
BLOCK = 256  # tile size and strip height, cells
PATCH_SCALES_CELLS = (160.0, 32.0)  # broad and fine patch sizes of the class fields
PATCH_WEIGHTS = (1.0, 0.45)
SOIL_NODATA, COVER_NODATA = 255, 0
NODATA_SHARE = 0.004  # share of soil cells set to nodata (small scattered blobs)
# The edge-heavy set: many small polygons with curved, densified edges (about 95 vertices each)
# and more nodata, so that work at polygon edges dominates an overlay.
EDGE_HEAVY = dict(n_cells=8000, n_polygons=100_000, vertex_spacing_m=11.0, nodata_share=0.03,
                  curved_edges=True)
# Smooth bend of the plane that makes straight edges curved: (wavelength m, amplitude m) pairs.
BEND_WAVES = ((800.0, 30.0), (300.0, 10.0))
BEND_RAMP_M = 2000.0  # the bend fades to nothing over this distance from the frame
GAP_SCALE_CELLS = 10.0  # size of the nodata blobs
GPKG_DATE = "2024-06-11T00:00:00.000Z"  # pinned so the GeoPackage is reproducible

# code -> (class label, share of cells)
SOIL_CLASSES = {1: ("A", 0.15), 2: ("B", 0.35), 3: ("C", 0.25), 4: ("D", 0.13),
                5: ("B/D", 0.06), 6: ("C/D", 0.06)}
COVER_CLASSES = {1: ("impervious", 0.08), 2: ("residential_quarter_acre", 0.12),
                 3: ("residential_half_acre", 0.10), 4: ("commercial", 0.04),
                 5: ("open_space_good", 0.10), 6: ("woods_good", 0.30),
                 7: ("pasture_good", 0.14), 8: ("row_crops_good", 0.12)}


@dataclass(frozen=True)
class InputPaths:
    """Where one set of benchmark inputs lives."""

    folder: Path
    soil: Path
    cover: Path
    subcatchments: Path
    project: Path

    @classmethod
    def in_folder(cls, folder: Path) -> InputPaths:
        """The standard file names inside ``folder``."""
        folder = Path(folder)
        return cls(folder, folder / "soil_groups.tif", folder / "land_cover.tif",
                   folder / "subcatchments.gpkg", folder / "gisrun.toml")


def default_out_dir(n_cells: int, n_polygons: int, *, edge_heavy: bool = False) -> Path:
    """``benchmarks/scratch/[edge_heavy_]cells<N>_polygons<M>``, next to this script."""
    prefix = "edge_heavy_" if edge_heavy else ""
    return HERE / "scratch" / f"{prefix}cells{n_cells}_polygons{n_polygons}"


def make_edge_heavy(out_dir: str | Path | None = None, *, overwrite: bool = False) -> InputPaths:
    """The edge-heavy set (``EDGE_HEAVY``): 100,000 small curved polygons, 3 % nodata."""
    folder = out_dir or default_out_dir(EDGE_HEAVY["n_cells"], EDGE_HEAVY["n_polygons"],
                                        edge_heavy=True)
    return make_inputs(folder, overwrite=overwrite, **EDGE_HEAVY)


# --- smooth random fields, evaluated strip by strip ---

def _bspline_matrix(n_fine: int, scale_cells: float) -> sparse.csr_matrix:
    """Cubic B-spline weights from a coarse node grid to ``n_fine`` cell centres.

    Row i holds the four weights of cell i on coarse nodes spaced ``scale_cells`` apart
    (one padding node before the first cell). Shape (n_fine, n_coarse).
    """
    x = (np.arange(n_fine) + 0.5) / scale_cells
    k0 = np.floor(x).astype(np.int64)
    t = x - k0
    weights = np.stack([(1 - t) ** 3, 3 * t**3 - 6 * t**2 + 4, -3 * t**3 + 3 * t**2 + 3 * t + 1,
                        t**3], axis=1) / 6.0
    cols = k0[:, None] + np.arange(4)[None, :]
    rows = np.repeat(np.arange(n_fine), 4)
    n_coarse = int(cols.max()) + 1
    return sparse.csr_matrix((weights.ravel(), (rows, cols.ravel())), shape=(n_fine, n_coarse))


class _SmoothField:
    """Sum of B-spline-interpolated white-noise grids; any strip of rows on demand."""

    def __init__(self, rng: np.random.Generator, n_cells: int, *,
                 scales_cells: tuple[float, ...] = PATCH_SCALES_CELLS,
                 weights: tuple[float, ...] = PATCH_WEIGHTS) -> None:
        self.octaves = []
        for scale, weight in zip(scales_cells, weights, strict=True):
            w = _bspline_matrix(n_cells, scale)
            coarse = rng.standard_normal((w.shape[1], w.shape[1])).astype(np.float32)
            self.octaves.append((w, coarse * np.float32(weight)))

    def rows(self, r0: int, r1: int) -> NDArray[np.float32]:
        """Field values for rows r0..r1-1, all columns, shape (r1 - r0, n_cells)."""
        total = None
        for w, coarse in self.octaves:
            wy = w[r0:r1]
            used = np.unique(wy.indices)
            lo, hi = int(used.min()), int(used.max()) + 1
            partial = wy[:, lo:hi].toarray().astype(np.float32) @ coarse[lo:hi]  # (h, nc)
            strip = (w @ partial.T).T  # (h, n_cells): sparse (n_cells, nc) @ dense (nc, h)
            total = strip if total is None else total + strip
        return np.ascontiguousarray(total, dtype=np.float32)


def _thresholds(field: _SmoothField, n_cells: int, shares: list[float],
                rng: np.random.Generator) -> NDArray[np.float32]:
    """Field values that split the cells into classes with the given shares (from a sample)."""
    sample_rows = np.sort(rng.choice(n_cells, size=min(n_cells, 48), replace=False))
    sample = np.concatenate([field.rows(int(r), int(r) + 1).ravel() for r in sample_rows])
    return np.quantile(sample, np.cumsum(shares)[:-1]).astype(np.float32)


def _classify(values: NDArray[np.float32], edges: NDArray[np.float32], codes: list[int]
              ) -> NDArray[np.uint8]:
    """Class code of each value given ascending bin edges."""
    return np.asarray(codes, dtype=np.uint8)[np.searchsorted(edges, values)]


# --- rasters ---

def _raster_profile(n_cells: int, cell_m: float, nodata: int) -> dict:
    """Tiled, DEFLATE-compressed uint8 GeoTIFF profile for an N x N grid."""
    return dict(driver="GTiff", width=n_cells, height=n_cells, count=1, dtype="uint8", crs=CRS,
                transform=from_origin(WEST_M, NORTH_M, cell_m, cell_m), nodata=nodata,
                tiled=True, blockxsize=BLOCK, blockysize=BLOCK, compress="deflate",
                num_threads="all_cpus", bigtiff="if_safer")


def make_rasters(out_dir: str | Path, *, n_cells: int = 8000, cell_m: float = CELL_M,
                 rng_state: int = RNG_STATE, nodata_share: float = NODATA_SHARE
                 ) -> tuple[Path, Path]:
    """Write ``soil_groups.tif`` and ``land_cover.tif`` (N x N cells) into ``out_dir``.

    Soil codes 1-6 are A, B, C, D, B/D, C/D with 255 as nodata (``nodata_share`` of the cells,
    0.4 % by default, in small blobs); cover codes 1-8 are the cover classes in
    ``COVER_CLASSES``. Both rasters share one grid. Written in strips of ``BLOCK`` rows, so
    memory does not grow with ``n_cells``.

    Returns
    -------
    tuple of Path
        The soil and cover raster paths.
    """
    paths = InputPaths.in_folder(Path(out_dir))
    paths.folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(rng_state)
    soil_field, cover_field = _SmoothField(rng, n_cells), _SmoothField(rng, n_cells)
    gap_field = _SmoothField(rng, n_cells, scales_cells=(GAP_SCALE_CELLS,), weights=(1.0,))
    soil_edges = _thresholds(soil_field, n_cells, [s for _, s in SOIL_CLASSES.values()], rng)
    cover_edges = _thresholds(cover_field, n_cells, [s for _, s in COVER_CLASSES.values()], rng)
    gap_edge = _thresholds(gap_field, n_cells, [1 - nodata_share, nodata_share], rng)[0]
    with (
        rasterio.Env(GDAL_CACHEMAX=256),
        rasterio.open(paths.soil, "w", **_raster_profile(n_cells, cell_m, SOIL_NODATA)) as soil,
        rasterio.open(paths.cover, "w", **_raster_profile(n_cells, cell_m, COVER_NODATA)) as cover,
    ):
        for r0 in range(0, n_cells, BLOCK):
            r1 = min(r0 + BLOCK, n_cells)
            window = Window(0, r0, n_cells, r1 - r0)
            soil_codes = _classify(soil_field.rows(r0, r1), soil_edges, list(SOIL_CLASSES))
            soil_codes[gap_field.rows(r0, r1) > gap_edge] = SOIL_NODATA
            soil.write(soil_codes, 1, window=window)
            cover.write(_classify(cover_field.rows(r0, r1), cover_edges, list(COVER_CLASSES)), 1,
                        window=window)
        soil.update_tags(DATA="synthetic benchmark input", NODATA_SHARE=repr(nodata_share),
                         **{f"CODE_{c}": label for c, (label, _) in SOIL_CLASSES.items()})
        cover.update_tags(DATA="synthetic benchmark input",
                          **{f"CODE_{c}": label for c, (label, _) in COVER_CLASSES.items()})
    return paths.soil, paths.cover


# --- subcatchments ---

def _jittered_points(n_points: int, size_m: float, rng: np.random.Generator
                     ) -> NDArray[np.float64]:
    """``n_points`` points on a jittered square grid over a size_m square (local coordinates)."""
    per_side = int(np.ceil(np.sqrt(n_points)))
    spacing = size_m / per_side
    gx, gy = np.meshgrid(np.arange(per_side), np.arange(per_side))
    pts = (np.column_stack([gx.ravel(), gy.ravel()]) + 0.5
           + rng.uniform(-0.4, 0.4, size=(gx.size, 2))) * spacing
    keep = np.sort(rng.choice(len(pts), size=n_points, replace=False))
    return pts[keep]


def make_subcatchments(out_dir: str | Path, *, n_polygons: int = 10_000, n_cells: int = 8000,
                       cell_m: float = CELL_M, rng_state: int = RNG_STATE,
                       vertex_spacing_m: float | None = None, curved_edges: bool = False
                       ) -> Path:
    """Write ``subcatchments.gpkg`` (layer ``subcatchments``): Voronoi cells tiling the grid.

    Fields: ``subcatchment_code`` (``S000001`` ...), ``name``, ``loss_method`` (null for 96 %,
    ``horton`` or ``curve_number`` for 2 % each). The cells tile the raster extent less one
    cell at the edges, so every polygon lies inside the rasters. ``vertex_spacing_m`` adds
    vertices along every edge (shared edges stay shared) to mimic digitised boundaries;
    ``curved_edges`` then bends the plane smoothly (:func:`_bend`), so the straight Voronoi edges
    become curves and the cells still tile the frame.

    Returns
    -------
    Path
        The GeoPackage path.
    """
    paths = InputPaths.in_folder(Path(out_dir))
    paths.folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(rng_state + 1)
    size_m = n_cells * cell_m
    pts = _jittered_points(n_polygons, size_m, rng)
    frame = shapely.box(cell_m, cell_m, size_m - cell_m, size_m - cell_m)
    cells = shapely.voronoi_polygons(shapely.MultiPoint(pts), extend_to=shapely.box(
        -size_m, -size_m, 2 * size_m, 2 * size_m))
    geoms = shapely.set_precision(shapely.intersection(np.asarray(cells.geoms), frame), 0.01)
    if vertex_spacing_m:
        geoms = shapely.segmentize(geoms, vertex_spacing_m)
    if curved_edges:
        geoms = _bend(geoms, size_m, cell_m)
    centres = shapely.get_coordinates(shapely.point_on_surface(geoms))
    order = np.lexsort((centres[:, 0], -np.floor(centres[:, 1] / (size_m / np.sqrt(n_polygons)))))
    geoms = shapely.transform(geoms[order], lambda xy: xy + np.array([WEST_M, NORTH_M - size_m]))
    choice = rng.uniform(size=len(geoms))
    methods = np.where(choice < 0.02, "horton", np.where(choice < 0.04, "curve_number", None))
    frame_out = gpd.GeoDataFrame(
        {"subcatchment_code": [f"S{i + 1:06d}" for i in range(len(geoms))],
         "name": [f"Synthetic block {i + 1}" for i in range(len(geoms))],
         "loss_method": methods},
        geometry=geoms, crs=CRS)
    paths.subcatchments.unlink(missing_ok=True)
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": GPKG_DATE})
    frame_out.to_file(paths.subcatchments, layer="subcatchments", driver="GPKG", engine="pyogrio")
    return paths.subcatchments


def _bend(geoms: NDArray, size_m: float, cell_m: float) -> NDArray:
    """Move every vertex by a smooth displacement that vanishes on the frame.

    x moves by a sum of sines of y and y by a sum of sines of x (``BEND_WAVES``), faded out
    towards the frame over ``BEND_RAMP_M``. The map is one-to-one (its slopes stay well below
    1), and equal vertices move equally, so shared edges stay shared and the tiling holds.
    """
    def shift(along: NDArray, across: NDArray) -> NDArray:
        wave = sum(amp * np.sin(2 * np.pi * along / length) for length, amp in BEND_WAVES)
        fade = np.clip(np.minimum(across - cell_m, size_m - cell_m - across) / BEND_RAMP_M, 0, 1)
        return wave * fade

    return shapely.transform(geoms, lambda xy: xy + np.column_stack(
        [shift(xy[:, 1], xy[:, 0]), shift(xy[:, 0] + 0.37 * size_m, xy[:, 1])]))


# --- project file ---

def write_project_file(out_dir: str | Path, *, n_cells: int, n_polygons: int) -> Path:
    """Write ``gisrun.toml`` for the files in ``out_dir`` (same layout as the demo's)."""
    paths = InputPaths.in_folder(Path(out_dir))
    soil = "\n".join(f'"{c}" = "{label}"' for c, (label, _) in SOIL_CLASSES.items())
    cover = "\n".join(f'"{c}" = "{label}"' for c, (label, _) in COVER_CLASSES.items())
    paths.project.write_text(PROJECT_TEMPLATE.format(
        n_cells=n_cells, n_polygons=n_polygons, soil_codes=soil, cover_codes=cover),
        encoding="utf-8", newline="\n")
    return paths.project


PROJECT_TEMPLATE = """\
# Synthetic benchmark inputs written by benchmarks/make_inputs.py: invented data, for timing only.
# {n_cells} x {n_cells} cells, {n_polygons} subcatchments.

[project]
name = "benchmark {n_cells} cells {n_polygons} polygons"
units = "si"
output = "output/bench_runoff.gpkg"
time_step_min = 5

[subcatchments]
path = "subcatchments.gpkg"
layer = "subcatchments"
id_field = "subcatchment_code"
method_field = "loss_method"

[soil]
path = "soil_groups.tif"
classification = "hydrologic_soil_group"
dual_group_condition = "undrained"
initial_saturation = 0.3

[soil.codes]
{soil_codes}

[cover]
path = "land_cover.tif"

[cover.codes]
{cover_codes}

# Generous so that a run never stops on the scattered synthetic nodata blobs.
[nodata]
rule = "dominant"
max_fraction = 0.9

[method]
name = "green_ampt"
combine = "units"

[[storms]]
name = "nrcs_ii_24h_90mm"
kind = "nrcs_24h"
distribution = "II"
depth = 90
"""


def _rasters_match(paths: InputPaths, n_cells: int, cell_m: float, nodata_share: float) -> bool:
    """True when both rasters exist with the requested size, cell size and nodata share."""
    for path in (paths.soil, paths.cover):
        if not path.exists():
            return False
        with rasterio.open(path) as src:
            if src.width != n_cells or src.height != n_cells or src.res[0] != cell_m:
                return False
            if path == paths.soil and src.tags().get("NODATA_SHARE", repr(NODATA_SHARE)) != repr(
                    nodata_share):
                return False
    return True


def _polygons_match(paths: InputPaths, n_polygons: int) -> bool:
    """True when the subcatchment file exists with the requested number of polygons."""
    if not paths.subcatchments.exists():
        return False
    return pyogrio.read_info(paths.subcatchments, layer="subcatchments")["features"] == n_polygons


def make_inputs(out_dir: str | Path | None = None, *, n_cells: int = 8000,
                n_polygons: int = 10_000, cell_m: float = CELL_M,
                vertex_spacing_m: float | None = None, nodata_share: float = NODATA_SHARE,
                curved_edges: bool = False, overwrite: bool = False) -> InputPaths:
    """Make (or reuse) a full set of inputs: both rasters, the subcatchments, the project file.

    Files that already exist with the requested sizes are kept unless ``overwrite`` (the check
    is by raster size, soil nodata share and polygon count only, not by content).
    """
    paths = InputPaths.in_folder(Path(out_dir) if out_dir else default_out_dir(n_cells,
                                                                               n_polygons))
    if overwrite or not _rasters_match(paths, n_cells, cell_m, nodata_share):
        make_rasters(paths.folder, n_cells=n_cells, cell_m=cell_m, nodata_share=nodata_share)
    if overwrite or not _polygons_match(paths, n_polygons):
        make_subcatchments(paths.folder, n_polygons=n_polygons, n_cells=n_cells, cell_m=cell_m,
                           vertex_spacing_m=vertex_spacing_m, curved_edges=curved_edges)
    write_project_file(paths.folder, n_cells=n_cells, n_polygons=n_polygons)
    return paths


def _parse(argv: list[str] | None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=8000, help="raster side, cells (default 8000)")
    parser.add_argument("--polygons", type=int, default=10_000,
                        help="number of subcatchments (default 10000)")
    parser.add_argument("--out", type=Path, default=None,
                        help="output folder (default benchmarks/scratch/cells<N>_polygons<M>)")
    parser.add_argument("--cell-size-m", type=float, default=CELL_M, help="cell size, m (10)")
    parser.add_argument("--vertex-spacing-m", type=float, default=None,
                        help="add polygon vertices at this spacing, m (default: none added)")
    parser.add_argument("--edge-heavy", action="store_true",
                        help="the edge-heavy set: 8000 x 8000 cells, 100,000 curved polygons of "
                        "about 95 vertices, 3 %% soil nodata (ignores --cells, --polygons, "
                        "--vertex-spacing-m)")
    parser.add_argument("--overwrite", action="store_true", help="rewrite files that exist")
    return parser.parse_args(argv)


def main(argv: list[str] | None = None) -> int:
    """Command-line entry point: make the inputs and print what was written."""
    args = _parse(argv)
    start = time.perf_counter()
    if args.edge_heavy:
        paths = make_edge_heavy(args.out, overwrite=args.overwrite)
        args.cells, args.polygons = EDGE_HEAVY["n_cells"], EDGE_HEAVY["n_polygons"]
    else:
        paths = make_inputs(args.out, n_cells=args.cells, n_polygons=args.polygons,
                            cell_m=args.cell_size_m, vertex_spacing_m=args.vertex_spacing_m,
                            overwrite=args.overwrite)
    for path in (paths.soil, paths.cover, paths.subcatchments, paths.project):
        print(f"{path}  {path.stat().st_size / 1e6:9.2f} MB")
    print(f"{args.cells} x {args.cells} cells, {args.polygons} polygons in "
          f"{time.perf_counter() - start:.1f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
