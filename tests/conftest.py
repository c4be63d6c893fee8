"""Shared fixtures: tiny GeoTIFF and vector files with hand-computable answers.

Other test modules may add fixtures here; keep each one small and written
into ``tmp_path``.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
import pytest
import rasterio
from rasterio.transform import from_origin


def write_geotiff(path: Path, codes: np.ndarray, *, origin: tuple[float, float] = (0.0, 100.0),
                  cell: float | tuple[float, float] = 10.0, crs: str | None = "EPSG:32617",
                  nodata: float | None = None, transform: Any = None) -> Path:
    """Write a one-band GeoTIFF; row 0 is the northern row, starting at ``origin`` (x, y)."""
    cx, cy = (cell, cell) if np.isscalar(cell) else cell
    t = transform if transform is not None else from_origin(origin[0], origin[1], cx, cy)
    profile = {"driver": "GTiff", "height": codes.shape[0], "width": codes.shape[1], "count": 1,
               "dtype": codes.dtype, "transform": t, "nodata": nodata}
    if crs is not None:
        profile["crs"] = crs
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(codes, 1)
    return path


def write_polygons(path: Path, geoms: Sequence[Any], *, crs: str | None = "EPSG:32617",
                   layer: str | None = "subcatchments", driver: str | None = None,
                   **fields: Sequence[Any]) -> Path:
    """Write polygons and attribute columns to any vector format pyogrio writes."""
    gdf = gpd.GeoDataFrame(dict(fields), geometry=list(geoms), crs=crs)
    kwargs = {"layer": layer} if layer is not None else {}
    gdf.to_file(path, driver=driver, engine="pyogrio", **kwargs)
    return path


@pytest.fixture
def geotiff(tmp_path: Path) -> Callable[..., Path]:
    """Factory: ``geotiff(codes, name="soil.tif", **write_geotiff options)`` -> path."""
    def make(codes: np.ndarray, name: str = "soil.tif", **kwargs: Any) -> Path:
        return write_geotiff(tmp_path / name, np.asarray(codes), **kwargs)
    return make


@pytest.fixture
def polygon_file(tmp_path: Path) -> Callable[..., Path]:
    """Factory: ``polygon_file(geoms, name="sub.gpkg", id=[...], ...)`` -> path."""
    def make(geoms: Sequence[Any], name: str = "sub.gpkg", **kwargs: Any) -> Path:
        return write_polygons(tmp_path / name, geoms, **kwargs)
    return make


@pytest.fixture
def half_and_half_soil(geotiff: Callable[..., Path]) -> Path:
    """10 x 10 cells of 10 m from (0, 0) to (100, 100): code 1 in columns 0-4, code 2 in 5-9.

    A full-height polygon over x 0-25 m has class-1 area 25 m x 100 m = 2500 m2
    (the half-covered edge cells count half).
    """
    codes = np.ones((10, 10), dtype=np.uint8)
    codes[:, 5:] = 2
    return geotiff(codes, "half_and_half.tif")
