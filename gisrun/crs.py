"""One CRS funnel and one area rule.

Every coordinate reference system that enters gisrun goes through
:func:`checked_crs`, and every polygon area in square metres comes from
:func:`polygon_area_m2`: planar area times the square of the CRS's linear unit
for a projected CRS, geodesic area on the CRS's ellipsoid for a geographic
one (never planar area in degrees).

Examples
--------
>>> import geopandas as gpd
>>> from shapely.geometry import box
>>> gs = gpd.GeoSeries([box(0, 0, 100, 50)], crs="EPSG:32617")
>>> polygon_area_m2(gs).tolist()
[5000.0]
>>> feet = gpd.GeoSeries([box(0, 0, 1000, 1000)], crs="EPSG:2236")  # US survey feet
>>> round(float(polygon_area_m2(feet)[0]))
92903
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray
from pyproj import CRS
from pyproj.exceptions import CRSError as _PyprojCRSError

from .errors import CRSError

__all__ = [
    "checked_crs",
    "polygon_area_m2",
    "linear_unit_m",
    "geodesic_cell_area_m2",
]


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


def polygon_area_m2(geoms: object) -> NDArray[np.float64]:
    """Area of each polygon in square metres, decided by its CRS.

    Parameters
    ----------
    geoms : geopandas.GeoSeries
        Polygons with a CRS.

    Returns
    -------
    ndarray of float64
        Projected CRS: planar area times the x-axis unit factor squared.
        Geographic CRS: geodesic area on the CRS's ellipsoid (pyproj ``Geod``).

    Raises
    ------
    CRSError
        If the series has no CRS.
    """
    crs = getattr(geoms, "crs", None)
    if crs is None:
        raise CRSError("polygons", "have no CRS", "set a CRS before computing areas")
    crs = CRS.from_user_input(crs)
    if crs.is_geographic:  # never planar area in degrees
        geod = crs.get_geod()
        return np.abs(np.array([geod.geometry_area_perimeter(g)[0] if g is not None else 0.0
                                for g in geoms], dtype=np.float64))
    return np.asarray(geoms.area, dtype=np.float64) * linear_unit_m(crs) ** 2


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
