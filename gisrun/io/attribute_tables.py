"""Read a class raster's attribute table: a CSV, a GeoPackage table, or the raster's own.

Every reader returns the table as text cells (blank = not given) with one name
per row for messages; :func:`gisrun.parameters.class_keys.keyed_classes`
checks the contents.

The raster's own table is GDAL's raster attribute table in the raster's PAM
side file ``<raster>.aux.xml`` (``PAMDataset/PAMRasterBand/
GDALRasterAttributeTable``: ``FieldDefn`` elements with ``Name``, ``Type``
and ``Usage``, then ``Row`` elements of ``F`` cells). rasterio does not
expose these tables, so the XML is read here. A linearly binned table
(``Row0Min``/``BinSize``, no value column) gets its keys from the binning.
"""

from __future__ import annotations

import csv
import io
import xml.etree.ElementTree as ET
from pathlib import Path

import pandas as pd
import pyogrio
from pyogrio.errors import DataLayerError, DataSourceError

from ..errors import ParameterError

__all__ = ["RASTER_TABLE", "read_attribute_table", "raster_table_path"]

#: ``attributes = "raster"``: the raster's own attribute table.
RASTER_TABLE = "raster"
#: GDAL field usage of a column holding each row's raster value (GFU_MinMax).
_VALUE_USAGE = "5"


def raster_table_path(raster: Path) -> Path:
    """Where GDAL keeps a raster's attribute table (its PAM side file)."""
    return raster.with_name(raster.name + ".aux.xml")


def read_attribute_table(path: Path, *, layer: str | None = None, key: str | None = None,
                         band: int = 1) -> tuple[pd.DataFrame, list[str], str | None]:
    """Read an attribute table as text cells.

    Parameters
    ----------
    path : Path
        A CSV file, a GeoPackage (``layer`` names its table), or a raster's
        ``.aux.xml`` side file (see :func:`raster_table_path`).
    layer : str, optional
        The GeoPackage table.
    key : str, optional
        The key column asked for (a raster table without one uses its value column).
    band : int
        The raster band whose table is read.

    Returns
    -------
    frame : DataFrame
        Text cells, blank where not given.
    row_names : list of str
        ``"line <n>"`` (CSV), ``"row <n>"`` (GeoPackage, raster table).
    value_column : str or None
        A raster table's value column (usage GFU_MinMax), for when no key is named.

    Raises
    ------
    ParameterError
        Missing or unreadable file, layer or table; a header that repeats a column.
    """
    path = Path(path)
    if not path.exists():
        raise ParameterError(str(path), "does not exist", "check the attributes path in the "
                             "project file (relative to the project file)")
    if path.name.endswith(".aux.xml"):
        return _read_raster_table(path, band)
    if path.suffix.lower() == ".gpkg":
        frame = _read_geopackage(path, layer)
        return frame, [f"row {i + 1}" for i in range(len(frame))], None
    frame, names = _read_csv(path)
    return frame, names, None


def _read_csv(path: Path) -> tuple[pd.DataFrame, list[str]]:
    try:
        lines = path.read_text(encoding="utf-8-sig").splitlines()
    except UnicodeDecodeError:
        raise ParameterError(str(path), "is not UTF-8 text", "save the file as UTF-8 CSV"
                             ) from None
    except OSError as err:
        raise ParameterError(str(path), f"cannot be read ({err.strerror})",
                             "check that it is a readable file") from None
    numbered = [(n, line) for n, line in enumerate(lines, start=1)
                if line.strip() and not line.lstrip().startswith("#")]
    if len(numbered) < 2:
        raise ParameterError(str(path), "has no header and data rows",
                             "add a header row and a row per key")
    header = [f.strip() for f in next(csv.reader([numbered[0][1]]))]
    _check_header(header, f"{path}:line {numbered[0][0]}")
    for n, line in numbered[1:]:
        if len(next(csv.reader([line]))) != len(header):
            raise ParameterError(f"{path}:line {n}", "has a different number of fields than "
                                 f"the header ({len(header)})", "give every row the header's "
                                 "columns (commas)")
    text = "\n".join(line for _, line in numbered)
    frame = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False)
    return frame, [f"line {n}" for n, _ in numbered[1:]]


def _check_header(names: list[str], where: str) -> None:
    twice = next((f for f in names if names.count(f) > 1), None)
    if twice is not None:
        raise ParameterError(f"{where}:{twice}", "column appears twice in the header",
                             "keep one column of each name")


def _read_geopackage(path: Path, layer: str | None) -> pd.DataFrame:
    try:
        layers = [str(name) for name, _ in pyogrio.list_layers(path)]
    except DataSourceError as err:
        raise ParameterError(str(path), f"cannot be read ({err})",
                             "give a GeoPackage or a CSV file") from None
    if layer is None:
        if len(layers) != 1:
            raise ParameterError(str(path), f"holds {len(layers)} tables ({', '.join(layers)})",
                                 "name the attribute table with attributes_layer")
        layer = layers[0]
    try:
        frame = pyogrio.read_dataframe(path, layer=layer, read_geometry=False)
    except DataLayerError:
        raise ParameterError(f"{path}:{layer}", "is not a table of this GeoPackage "
                             f"(tables: {', '.join(layers)})", "fix attributes_layer") from None
    frame = pd.DataFrame(frame)
    return frame.astype(object).where(frame.notna(), "").astype(str)


def _read_raster_table(path: Path, band: int) -> tuple[pd.DataFrame, list[str], str | None]:
    try:
        root = ET.parse(path).getroot()
    except (ET.ParseError, OSError) as err:
        raise ParameterError(str(path), f"cannot be read as GDAL's side file ({err})",
                             "write the raster attribute table again (e.g. from a GIS)"
                             ) from None
    table = root.find(f"./PAMRasterBand[@band='{band}']/GDALRasterAttributeTable")
    if table is None:
        raise ParameterError(str(path), f"holds no raster attribute table for band {band}",
                             "attach the table to the raster, or give it as a CSV")
    fields = sorted(table.findall("FieldDefn"), key=lambda f: int(f.get("index", "0")))
    names = [(f.findtext("Name") or "").strip() for f in fields]
    _check_header(names, str(path))
    rows = [[(cell.text or "").strip() for cell in row.findall("F")]
            for row in sorted(table.findall("Row"), key=lambda r: int(r.get("index", "0")))]
    short = next((i for i, r in enumerate(rows) if len(r) != len(names)), None)
    if short is not None:
        raise ParameterError(f"{path}:row {short + 1}", f"has {len(rows[short])} cells for "
                             f"{len(names)} fields", "write the raster attribute table again")
    frame = pd.DataFrame(rows, columns=names, dtype=str)
    value = next((n for n, f in zip(names, fields, strict=True)
                  if (f.findtext("Usage") or "").strip() == _VALUE_USAGE), None)
    if value is None and table.get("Row0Min") is not None:
        start, size = float(table.get("Row0Min", "0")), float(table.get("BinSize", "1"))
        value = "value"
        frame.insert(0, value, [f"{start + i * size:.17g}" for i in range(len(frame))])
    return frame, [f"row {i + 1}" for i in range(len(frame))], value
