"""One CRS funnel and one ground-area rule.

Every coordinate reference system that enters gisrun goes through
:func:`checked_crs`, and every polygon area in square metres comes from
:func:`ground_areas` (or :func:`polygon_area_m2`, its areas alone). Areas are
ground areas:

- geographic CRS: geodesic area on the CRS's ellipsoid (pyproj ``Geod``; never
  planar area in degrees);
- projected CRS: planar area times the square of the CRS's linear unit where
  the projection's areal scale error over the polygon is within
  :data:`AREA_SCALE_TOLERANCE` (0.1 %), measured with pyproj's
  ``Proj.get_factors`` at a 3 x 3 grid of points over the polygon's bounding
  box; otherwise geodesic area of the polygon (edges densified in the
  projection, then taken to the CRS's own longitude and latitude).

So a 200 m square near 40 N has 40,000 m2 whether it is given in UTM, in a US
survey-feet state plane CRS, in longitude-latitude or in Web Mercator (whose
planar area there is about 1.7 times the ground area).

Examples
--------
>>> import geopandas as gpd
>>> from shapely.geometry import box
>>> gs = gpd.GeoSeries([box(500_000, 4_400_000, 500_100, 4_400_050)], crs="EPSG:32617")
>>> polygon_area_m2(gs).tolist()  # on the central meridian: planar (areal scale 0.9992)
[5000.0]
>>> feet = gpd.GeoSeries([box(656_000, 700_000, 657_000, 701_000)], crs="EPSG:2236")
>>> round(float(polygon_area_m2(feet)[0]))  # US survey feet
92903
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import shapely
from numpy.typing import NDArray
from pyproj import CRS, Proj, Transformer
from pyproj.exceptions import CRSError as _PyprojCRSError

from .errors import CRSError

__all__ = [
    "AREA_SCALE_TOLERANCE",
    "GroundAreas",
    "checked_crs",
    "ground_areas",
    "polygon_area_m2",
    "linear_unit_m",
    "geodesic_cell_area_m2",
    "is_web_mercator",
]

#: Largest areal scale error of a projection over a polygon for which its planar area is
#: taken as the ground area (0.1 %); above it the area is geodesic.
AREA_SCALE_TOLERANCE = 1e-3
#: Pieces per bounding-box side that a polygon's edges are cut into before a geodesic area
#: (a straight edge in the projection is not a geodesic; common practice).
_DENSIFY_PIECES = 64


def checked_crs(crs_like: object, where: str, *, stated: object = None) -> CRS:
    """Normalise a CRS once, or stop if there is none.

    Parameters
    ----------
    crs_like : object
        The CRS found in the data (anything ``pyproj.CRS.from_user_input``
        accepts, a rasterio CRS, or ``None``).
    where : str
        File or layer the CRS belongs to, used in error messages.
    stated : object, optional
        The CRS the user stated, used only when ``crs_like`` is ``None``.

    Returns
    -------
    pyproj.CRS

    Raises
    ------
    CRSError
        If there is no CRS and none is stated, or the CRS cannot be understood.
    """
    if crs_like is None and stated is None:
        raise CRSError(where, "has no CRS", "state the layer's CRS in the project file (crs = ...)")
    given = crs_like if crs_like is not None else stated
    if hasattr(given, "to_wkt") and not isinstance(given, CRS):
        given = given.to_wkt()  # rasterio and other CRS objects
    try:
        return CRS.from_user_input(given)
    except _PyprojCRSError as err:
        raise CRSError(where, f"CRS {given!r} is not understood ({err})",
                       "give an EPSG code such as 'EPSG:32617' or a WKT string") from None


def linear_unit_m(crs: CRS) -> float:
    """Return the length of one unit of a projected CRS's x axis in metres."""
    return float(crs.axis_info[0].unit_conversion_factor)


@dataclass(frozen=True)
class GroundAreas:
    """Ground area of each polygon and how it was measured."""

    #: Ground area, m2.
    area_m2: NDArray[np.float64]
    #: True where the area is geodesic (pyproj ``Geod``), False where planar.
    ellipsoidal: NDArray[np.bool_]
    #: Largest ``|areal scale - 1|`` of the projection over each polygon (NaN: geographic
    #: CRS, or no scale known).
    scale_error: NDArray[np.float64]

    @property
    def method(self) -> NDArray[np.object_]:
        """``"ellipsoidal"`` or ``"planar"`` per polygon."""
        return np.where(self.ellipsoidal, "ellipsoidal", "planar").astype(object)


def ground_areas(geoms: Any) -> GroundAreas:
    """Ground area of each polygon in square metres, by the rule in this module's docstring.

    Parameters
    ----------
    geoms : geopandas.GeoSeries
        Polygons with a CRS.

    Returns
    -------
    GroundAreas

    Raises
    ------
    CRSError
        If the series has no CRS.
    """
    crs = getattr(geoms, "crs", None)
    if crs is None:
        raise CRSError("polygons", "have no CRS", "set a CRS before computing areas")
    crs = CRS.from_user_input(crs)
    shapes = np.asarray(geoms, dtype=object)
    n = shapes.size
    if crs.is_geographic:  # never planar area in degrees
        return GroundAreas(_geodesic_m2(crs, shapes), np.ones(n, bool), np.full(n, np.nan))
    planar = np.asarray(shapely.area(shapes), dtype=np.float64) * linear_unit_m(crs) ** 2
    error = _areal_scale_error(crs, shapes)
    ellipsoidal = ~(error <= AREA_SCALE_TOLERANCE)  # NaN (unknown scale): geodesic
    if crs.geodetic_crs is None or crs.get_geod() is None:  # no datum: planar is all there is
        return GroundAreas(planar, np.zeros(n, bool), error)
    area = planar.copy()
    if ellipsoidal.any():
        area[ellipsoidal] = _projected_geodesic_m2(crs, shapes[ellipsoidal])
    return GroundAreas(area, ellipsoidal, error)


def polygon_area_m2(geoms: Any) -> NDArray[np.float64]:
    """Ground area of each polygon in square metres (:func:`ground_areas`, areas only).

    Raises
    ------
    CRSError
        If the series has no CRS.
    """
    return ground_areas(geoms).area_m2


def is_web_mercator(crs: CRS) -> bool:
    """True for the web-map ("Pseudo") Mercator, whose areas grow as 1/cos^2(latitude)."""
    crs = CRS.from_user_input(crs)
    operation = crs.coordinate_operation
    return crs.is_projected and operation is not None and (
        "pseudo mercator" in operation.method_name.lower() or crs.to_epsg() in (3857, 3785))


def _geodesic_m2(crs: CRS, lonlat: NDArray[np.object_]) -> NDArray[np.float64]:
    """Geodesic area of longitude-latitude polygons on ``crs``'s ellipsoid (pyproj ``Geod``)."""
    geod = crs.get_geod()
    return np.abs(np.array([geod.geometry_area_perimeter(g)[0] if g is not None else 0.0
                            for g in lonlat], dtype=np.float64))


def _areal_scale_error(crs: CRS, shapes: NDArray[np.object_]) -> NDArray[np.float64]:
    """Largest ``|areal scale - 1|`` at a 3 x 3 grid of points over each bounding box.

    Uses pyproj's ``Proj.get_factors`` (PROJ's projection factors); NaN where
    they cannot be had (no datum, points the projection cannot invert).
    """
    n = shapes.size
    if n == 0 or crs.geodetic_crs is None:
        return np.full(n, np.nan)
    b = shapely.bounds(shapes)  # xmin, ymin, xmax, ymax (NaN for empty)
    f = np.array([0.0, 0.5, 1.0])
    xs = (b[:, 0:1] + (b[:, 2:3] - b[:, 0:1]) * f[None, :])[:, :, None] * np.ones(3)
    ys = (b[:, 1:2] + (b[:, 3:4] - b[:, 1:2]) * f[None, :])[:, None, :] * np.ones((3, 1))
    to_lonlat = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
    lon, lat = to_lonlat.transform(xs.ravel(), ys.ravel(), errcheck=False)
    try:
        scale = np.asarray(Proj(crs).get_factors(lon, lat, errcheck=False).areal_scale, float)
    except Exception:  # noqa: BLE001 - a CRS PROJ cannot give factors for: measure on the ground
        return np.full(n, np.nan)
    error = np.abs(scale.reshape(n, 9) - 1.0)
    return np.where(np.isfinite(error).all(axis=1), error.max(axis=1), np.nan)


def _projected_geodesic_m2(crs: CRS, shapes: NDArray[np.object_]) -> NDArray[np.float64]:
    """Geodesic area of projected polygons: densified, taken to longitude-latitude, measured."""
    b = shapely.bounds(shapes)
    side = np.nanmax(np.column_stack([b[:, 2] - b[:, 0], b[:, 3] - b[:, 1]]), axis=1)
    step = np.where(np.isfinite(side) & (side > 0), side / _DENSIFY_PIECES, 1.0)
    dense = shapely.segmentize(shapes, step)
    to_lonlat = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
    lonlat = shapely.transform(dense, lambda xy: np.column_stack(
        to_lonlat.transform(xy[:, 0], xy[:, 1])))
    return _geodesic_m2(crs, lonlat)


def geodesic_cell_area_m2(crs: CRS, west: float, east: float,
                          north: NDArray[np.float64], south: NDArray[np.float64]
                          ) -> NDArray[np.float64]:
    """Geodesic area of longitude-latitude cells spanning ``west``-``east`` per row.

    Parameters
    ----------
    crs : pyproj.CRS
        A geographic CRS (its ellipsoid is used).
    west, east : float
        Longitude bounds of one cell, degrees.
    north, south : ndarray
        Latitude bounds of each row's cells, degrees.

    Returns
    -------
    ndarray of float64
        Area of one cell in each row, m2.
    """
    geod = crs.get_geod()
    out = np.empty(len(north), dtype=np.float64)
    for i, (n, s) in enumerate(zip(north, south, strict=True)):
        area, _ = geod.polygon_area_perimeter([west, east, east, west], [s, s, n, n])
        out[i] = abs(area)
    return out
