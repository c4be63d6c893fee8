"""Every file GDAL reads for one dataset, so a checksum or a cache key covers all of them.

A dataset is often more than the file the project names: a shapefile's ``.dbf`` holds the
ids and its ``.prj`` the CRS, a VRT reads its source rasters, a GeoPackage in WAL journal
mode keeps committed rows in its ``-wal`` file until a checkpoint, and a GeoTIFF may carry
``.aux.xml`` or ``.ovr`` sidecars. Rasters are listed by GDAL itself (rasterio's
``DatasetReader.files``, GDAL's ``GetFileList``). pyogrio does not expose GDAL's file list
for vector datasets, so the vector formats whose files are known are listed here (the same
files GDAL's drivers list); for any other vector format the answer is ``None``: the files
cannot be told, and a cache keyed on them must not be used.
"""

from __future__ import annotations

from pathlib import Path

import rasterio
from rasterio.errors import RasterioIOError

__all__ = ["raster_files", "vector_files"]

#: Files a shapefile is made of besides the ``.shp`` (GDAL's shapefile driver reads them:
#: index, attributes, CRS, code page, spatial indexes, metadata).
_SHAPEFILE_PARTS = (".shx", ".dbf", ".prj", ".cpg", ".qix", ".sbn", ".sbx", ".shp.xml")
#: SQLite-based formats: the database plus its journals (a committed ``-wal`` holds rows).
_SQLITE = (".gpkg", ".sqlite", ".db")
_SQLITE_JOURNALS = ("-wal", "-journal")
#: Vector formats that are exactly one file.
_ONE_FILE = (".geojson", ".json", ".geojsonl", ".geojsons", ".fgb")


def raster_files(path: str | Path) -> list[Path] | None:
    """The files GDAL reads for a raster (the named file first), or None if it cannot tell.

    Files GDAL reads that are not on the local file system (``/vsicurl/`` and the like)
    cannot be hashed: None.
    """
    try:
        with rasterio.open(path) as src:
            listed = list(src.files)
    except RasterioIOError:
        return None
    if not listed:
        return None
    files = [Path(f) for f in listed]
    if not all(f.is_file() for f in files):
        return None
    return _named_first(Path(path), files)


def vector_files(path: str | Path) -> list[Path] | None:
    """The files GDAL reads for a vector dataset (the named file first), or None.

    None when the format is one whose files are not known here (a folder, GML with its
    ``.gfs``/``.xsd``, a database connection...).
    """
    path = Path(path)
    if not path.is_file():
        return None
    name = path.name.lower()
    if name.endswith(".shp"):
        stem = name[: -len(".shp")]
        wanted = {stem + part for part in _SHAPEFILE_PARTS}
        parts = sorted(p for p in path.parent.iterdir()
                       if p.name.lower() in wanted and p.is_file())
        return [path, *parts]
    if name.endswith(_SQLITE):
        journals = [Path(f"{path}{end}") for end in _SQLITE_JOURNALS]
        return [path, *(j for j in journals if j.is_file())]
    if name.endswith(_ONE_FILE):
        return [path]
    return None


def _named_first(named: Path, files: list[Path]) -> list[Path]:
    resolved = named.resolve()
    rest = [f for f in files if f.resolve() != resolved]
    return [named, *rest]
