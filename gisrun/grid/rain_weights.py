"""Area weights of rain-grid cells over subcatchments: exact, once, as a sparse matrix.

A gridded rainfall product gives each subcatchment the area-weighted mean of the rain cells
over its polygon. :func:`rain_grid_weights` computes the weights once, with the exact cell
coverage of :func:`gisrun.grid.coverage.cell_coverage`, and stores them as a
``scipy.sparse`` CSR matrix (subcatchments x the grid cells that any subcatchment touches).
The areal rain of a block of steps is then one sparse product
(:func:`gisrun.storm.gridded.grid_areal_depth`).

The polygons go to the rain grid's CRS (densified first, so that a straight edge in their
own CRS stays close to its true image), then to grid coordinates:

- projected grid: column and row are affine in x and y, so a cell's covered fraction is its
  share of the cell's planar area;
- geographic (longitude-latitude) grid: cells shrink towards the poles. Rows are placed by
  the authalic function ``q(latitude)`` of the grid's ellipsoid instead of by latitude: on the
  ellipsoid the area element is ``a**2 / 2 * dlambda * dq`` (Snyder 1987), so within each row
  the row coordinate, linear in ``q``, is linear in true area, and a covered fraction is the
  exact share of the cell's ellipsoidal area. Each fraction is then weighted by its cell's
  ellipsoidal area, ``a**2 / 2 * dlambda * (q(north) - q(south))``.

A subcatchment with more than :data:`OUTSIDE_TOLERANCE` of its area beyond the grid stops
with an error naming it.

References
----------
Snyder, J. P. (1987). Map Projections: A Working Manual. USGS Professional Paper 1395,
eq. 3-12, p. 16 (the authalic function ``q``; equation number and page confirmed in public
copies that cite it), and ch. 10, the ellipsoidal cylindrical equal-area projection ``y = a k0
q / 2`` (equation number from memory: eq. 10-15); the tests check ``q`` against pyproj's
``cea`` projection.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Protocol

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
import shapely.affinity
from numpy.typing import NDArray
from pyproj import CRS, Transformer
from scipy import sparse

from ..errors import CRSError, StormError
from .coverage import CellCoverage, cell_coverage

__all__ = ["RainGridGeometry", "RainGridWeights", "rain_grid_weights", "authalic_q",
           "row_cell_areas_m2", "OUTSIDE_TOLERANCE", "DENSIFY_PIECES"]

#: Largest share of a subcatchment's area that may lie beyond the rain grid (slivers from
#: reprojection at a grid edge); more stops the run.
OUTSIDE_TOLERANCE = 1e-6
#: Pieces per bounding-box side that polygon edges are cut into before reprojection to the
#: rain grid's CRS (common practice; the same count as :mod:`gisrun.crs`).
DENSIFY_PIECES = 64
#: Polygons per call of :func:`cell_coverage` (bounds the coverage arrays' memory).
POLYGONS_PER_BLOCK = 20_000


class RainGridGeometry(Protocol):
    """Where a rain grid's cells are (see ``gisrun.io.rain_grid.RainStack``)."""

    crs: CRS
    transform: Any
    width: int
    height: int
    where: str


@dataclass(frozen=True, eq=False)
class RainGridWeights:
    """Each subcatchment's weights of the rain-grid cells (rows add up to 1).

    Attributes
    ----------
    subcatchment_ids : tuple of str
        The subcatchment of each matrix row.
    cells : ndarray of int64
        The grid cell of each matrix column, as ``row * width + column``.
    matrix : scipy.sparse.csr_array
        Shape ``(subcatchments, cells)``: the share of each cell in each subcatchment's areal
        rain (its covered area over the subcatchment's area on the grid).
    where : str
        The rain grid, for messages.
    """

    subcatchment_ids: tuple[str, ...]
    cells: NDArray[np.int64]
    matrix: sparse.csr_array
    where: str
    grid_width: int

    def table(self) -> pd.DataFrame:
        """The weights as a long table.

        Columns ``source_id`` (the cell, ``"r<row>_c<column>"`` of the grid as stored),
        ``subcatchment_id``, ``weight``, ``cell_row``, ``cell_column``.
        """
        coo = self.matrix.tocoo()
        width = self.grid_width
        cell = self.cells[coo.col]
        row, col = cell // width, cell % width
        return pd.DataFrame({
            "source_id": [f"r{r}_c{c}" for r, c in zip(row.tolist(), col.tolist(), strict=True)],
            "subcatchment_id": np.asarray(self.subcatchment_ids, dtype=object)[coo.row],
            "weight": coo.data.astype(np.float64),
            "cell_row": row, "cell_column": col})



def rain_grid_weights(geoms: gpd.GeoSeries, ids: Any, grid: RainGridGeometry
                      ) -> RainGridWeights:
    """Exact area weights of ``grid``'s cells over each polygon.

    Parameters
    ----------
    geoms : geopandas.GeoSeries
        Subcatchment polygons with a CRS.
    ids : array_like of str
        Subcatchment id of each polygon (for messages and the weights table).
    grid : RainGridGeometry
        The rain grid: CRS, north-up or south-up affine transform (no rotation), size.

    Returns
    -------
    RainGridWeights

    Raises
    ------
    StormError
        If more than :data:`OUTSIDE_TOLERANCE` of a subcatchment lies beyond the grid.
    CRSError
        If the subcatchments have no CRS or the grid's transform is rotated.
    """
    ids = tuple(str(i) for i in np.asarray(ids, dtype=object))
    px = polygons_on_grid(geoms, grid)
    poly_parts, cell_parts, area_parts = [], [], []
    for b0 in range(0, len(px), POLYGONS_PER_BLOCK):
        cov = cell_coverage(px[b0:b0 + POLYGONS_PER_BLOCK])
        poly, row, col, frac = _covered_cells(cov)
        area = frac * _row_areas(grid, row)
        inside = (row >= 0) & (row < grid.height) & (col >= 0) & (col < grid.width)
        _check_inside(ids, b0, poly, inside, area, grid)
        poly_parts.append(poly[inside] + b0)
        cell_parts.append(row[inside] * grid.width + col[inside])
        area_parts.append(area[inside])
    return _weights_matrix(ids, np.concatenate(poly_parts), np.concatenate(cell_parts),
                           np.concatenate(area_parts), grid)


def polygons_on_grid(geoms: gpd.GeoSeries, grid: RainGridGeometry) -> NDArray[Any]:
    """The polygons in the grid's (column, row) coordinates (rows by true area if geographic)."""
    if geoms.crs is None:
        raise CRSError("subcatchments", "have no CRS", "state the layer's CRS in the project file")
    t = grid.transform
    if t.b != 0 or t.d != 0:
        raise CRSError(grid.where, "has a rotated grid", "give a grid whose rows run east-west")
    shapes = np.asarray(geoms, dtype=object)
    src = CRS.from_user_input(geoms.crs)
    if not src.equals(grid.crs) or grid.crs.is_geographic:  # edges curve in (lon, q) too
        shapes = _reprojected(shapes, src, grid.crs)
    if not grid.crs.is_geographic:
        return shapely.transform(shapes, lambda xy: np.column_stack(
            ((xy[:, 0] - t.c) / t.a, (xy[:, 1] - t.f) / t.e)))
    q_edges = _row_edges_q(grid)
    west, east = sorted((t.c, t.c + t.a * grid.width))
    coords, index = shapely.get_coordinates(shapes, return_index=True)
    lon = _over_the_grid(coords[:, 0], index, len(shapes), west, east)
    on_grid = np.column_stack(((lon - t.c) / t.a,
                               _row_of_q(authalic_q(coords[:, 1], grid.crs), q_edges)))
    shapes = shapely.set_coordinates(shapes.copy(), on_grid)
    if abs(east - west - 360.0) <= 1e-9 * 360.0:  # a grid round the globe: its edges meet
        shapes = _wrapped(shapes, grid.width)
    return shapes


def _over_the_grid(lon: NDArray[np.float64], index: NDArray[np.intp], n: int, west: float,
                   east: float) -> NDArray[np.float64]:
    """Each polygon's longitudes in one piece, moved by whole turns to lie over the grid.

    A polygon written across the 180th meridian (179.9 and -179.9) spans more than half the
    globe as numbers; its western longitudes go one turn east. Then each polygon goes by the
    whole turns that bring the middle of its longitudes nearest the middle of the grid's
    (a grid from 0 to 360 takes polygons written from -180 to 180, and the other way round).
    """
    low, high = _spans(lon, index, n)
    lon = np.where((high - low > 180.0)[index] & (lon < 0.0), lon + 360.0, lon)
    low, high = _spans(lon, index, n)
    turns = np.round(((west + east) / 2.0 - (low + high) / 2.0) / 360.0)
    return lon + 360.0 * turns[index]


def _spans(lon: NDArray[np.float64], index: NDArray[np.intp], n: int
           ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    low, high = np.full(n, np.inf), np.full(n, -np.inf)
    np.minimum.at(low, index, lon)
    np.maximum.at(high, index, lon)
    return np.where(np.isfinite(low), low, 0.0), np.where(np.isfinite(high), high, 0.0)


def _wrapped(shapes: NDArray[Any], width: int) -> NDArray[Any]:
    """Parts of polygons beyond a round-the-globe grid's east or west edge, brought round.

    In grid columns a turn is ``width``: the part past the east edge goes ``width`` west (and
    the other way), so a polygon across the grid's seam covers cells at both edges.
    """
    b = shapely.bounds(shapes)
    for i in np.flatnonzero((b[:, 0] < 0) | (b[:, 2] > width)):
        pieces = [shapely.affinity.translate(
            shapely.intersection(shapes[i], shapely.box(k * width, b[i, 1] - 1, (k + 1) * width,
                                                        b[i, 3] + 1)), -k * width)
            for k in (-1, 0, 1)]
        shapes[i] = shapely.union_all(pieces)
    return shapes


def _reprojected(shapes: NDArray[Any], src: CRS, dst: CRS) -> NDArray[Any]:
    b = shapely.bounds(shapes)
    side = np.nanmax(np.column_stack([b[:, 2] - b[:, 0], b[:, 3] - b[:, 1]]), axis=1)
    step = np.where(np.isfinite(side) & (side > 0), side / DENSIFY_PIECES, 1.0)
    dense = shapely.segmentize(shapes, step)
    move = Transformer.from_crs(src, dst, always_xy=True)
    return shapely.transform(dense, lambda xy: np.column_stack(move.transform(xy[:, 0],
                                                                              xy[:, 1])))


def authalic_q(lat_deg: NDArray[np.float64], crs: CRS) -> NDArray[np.float64]:
    """The authalic function ``q`` of latitude on ``crs``'s ellipsoid (Snyder 1987, eq. 3-12).

    ``q = (1 - e2) [sin(phi) / (1 - e2 sin2(phi)) - 1 / (2 e) ln((1 - e sin(phi)) / (1 + e
    sin(phi)))]``; ``2 sin(phi)`` on a sphere. The ellipsoidal area between two parallels over
    ``dlambda`` radians of longitude is ``a**2 / 2 * dlambda * (q2 - q1)``.

    Examples
    --------
    >>> round(float(authalic_q(np.array([90.0]), CRS("EPSG:4326"))[0]), 10)  # pole, WGS 84
    1.9955310875
    """
    geod = crs.get_geod()
    s = np.sin(np.radians(np.asarray(lat_deg, dtype=np.float64)))
    e2 = float(geod.es)
    if e2 == 0.0:
        return 2.0 * s
    e = np.sqrt(e2)
    return (1 - e2) * (s / (1 - e2 * s * s) - np.log((1 - e * s) / (1 + e * s)) / (2 * e))


def row_cell_areas_m2(grid: RainGridGeometry) -> NDArray[np.float64]:
    """Ground area of one cell in each row of the grid, m2.

    Geographic grid: ``a**2 / 2 * dlambda * |q(north) - q(south)|`` on its ellipsoid;
    projected grid: the planar cell area times the square of the CRS's linear unit.
    """
    t = grid.transform
    if not grid.crs.is_geographic:
        unit = float(grid.crs.axis_info[0].unit_conversion_factor)
        return np.full(grid.height, abs(t.a * t.e) * unit * unit)
    a = float(grid.crs.get_geod().a)
    return a * a / 2 * np.radians(abs(t.a)) * np.abs(np.diff(_row_edges_q(grid)))


def _row_edges_q(grid: RainGridGeometry) -> NDArray[np.float64]:
    t = grid.transform
    return authalic_q(t.f + t.e * np.arange(grid.height + 1, dtype=np.float64), grid.crs)


def _row_of_q(q: NDArray[np.float64], q_edges: NDArray[np.float64]) -> NDArray[np.float64]:
    """Row coordinate, linear in ``q`` within each row; extended linearly beyond the grid."""
    rows = np.arange(q_edges.size, dtype=np.float64)
    up = q_edges[-1] > q_edges[0]
    xp, fp = (q_edges, rows) if up else (q_edges[::-1], rows[::-1])
    out = np.interp(q, xp, fp)
    lo, hi = q < xp[0], q > xp[-1]
    out[lo] = fp[0] + (q[lo] - xp[0]) * (fp[1] - fp[0]) / (xp[1] - xp[0])
    out[hi] = fp[-1] + (q[hi] - xp[-1]) * (fp[-1] - fp[-2]) / (xp[-1] - xp[-2])
    return out


def _covered_cells(cov: CellCoverage) -> tuple[NDArray[Any], ...]:
    """(polygon, row, column, covered fraction) of every cell, edge cells and interior runs."""
    n = cov.run_stop - cov.run_start
    owner = np.repeat(np.arange(n.size), n)
    col = np.arange(owner.size) + np.repeat(cov.run_start - (np.cumsum(n) - n), n)
    return (np.concatenate([cov.poly, cov.run_poly[owner]]),
            np.concatenate([cov.row, cov.run_row[owner]]),
            np.concatenate([cov.col, col]),
            np.concatenate([cov.fraction, cov.run_weight[owner]]))


def _row_areas(grid: RainGridGeometry, row: NDArray[np.int64]) -> NDArray[np.float64]:
    areas = row_cell_areas_m2(grid)
    return areas[np.clip(row, 0, grid.height - 1)]


def _check_inside(ids: tuple[str, ...], first: int, poly: NDArray[Any], inside: NDArray[Any],
                  area: NDArray[np.float64], grid: RainGridGeometry) -> None:
    outside = ~inside
    if not outside.any():
        return
    n = int(poly.max()) + 1
    total = np.bincount(poly, np.abs(area), minlength=n)
    out = np.bincount(poly[outside], np.abs(area[outside]), minlength=n)
    share = np.divide(out, total, out=np.ones(n), where=total > 0)
    bad = np.flatnonzero(share > OUTSIDE_TOLERANCE)
    if bad.size:
        names = ", ".join(repr(ids[first + i]) for i in bad[:3]) + (" ..." if bad.size > 3 else "")
        raise StormError(grid.where, f"does not cover subcatchment {names} ({share[bad[0]]:.1%} "
                         f"of {ids[first + bad[0]]!r} lies beyond the grid; {bad.size} "
                         "subcatchment(s) in all)",
                         "give a rain grid that covers every subcatchment")


def _weights_matrix(ids: tuple[str, ...], poly: NDArray[Any], cell: NDArray[Any],
                    area: NDArray[np.float64], grid: RainGridGeometry) -> RainGridWeights:
    keep = area > 0
    poly, cell, area = poly[keep], cell[keep], area[keep]
    total = np.bincount(poly, area, minlength=len(ids))
    if np.any(total <= 0):
        first = ids[int(np.argmax(total <= 0))]
        raise StormError(grid.where, f"covers no area of subcatchment {first!r}",
                         "give a rain grid that covers every subcatchment")
    used, column = np.unique(cell, return_inverse=True)
    matrix = sparse.csr_array((area / total[poly], (poly, column)),
                              shape=(len(ids), used.size))
    matrix.sum_duplicates()
    return RainGridWeights(ids, used.astype(np.int64), matrix, grid.where, int(grid.width))
