"""``[soil]`` / ``[cover]`` with an attribute table instead of a typed code table.

``attributes = "FILE"`` (a CSV, or a GeoPackage with ``attributes_layer``) or
``attributes = "raster"`` (the raster's own table, GDAL's ``.aux.xml`` side
file), ``attributes_key`` (the key column; default ``key``, or a raster
table's value column) and ``unlisted_keys`` (``error`` or ``nodata``). The
table is read and checked here, when the project is loaded, so every part of
a run sees the classes as a code table (:attr:`gisrun.project.SoilSource.codes`).
"""

from __future__ import annotations

from pathlib import Path

from ..io.attribute_tables import RASTER_TABLE, raster_table_path, read_attribute_table
from ..options import UNLISTED_KEY_RULES
from ..parameters.class_keys import KeyedClasses, keyed_classes
from .reader import TableReader

__all__ = ["ATTRIBUTE_KEYS", "KeyedSource", "keyed_source"]

#: The keys of ``[soil]`` and ``[cover]`` that describe an attribute table.
ATTRIBUTE_KEYS = ("attributes", "attributes_layer", "attributes_key", "unlisted_keys")
#: Default key column of a CSV or GeoPackage table.
DEFAULT_KEY = "key"

KeyedSource = tuple[dict[int, str], KeyedClasses | None, Path | None, str]


def keyed_source(section: TableReader, kind: str, classification: str = "hydrologic_soil_group"
                 ) -> KeyedSource:
    """(codes, keyed classes, table path, unlisted-key rule) of a ``[soil]``/``[cover]`` table.

    Without ``attributes`` the codes are the typed ``[<kind>.codes]`` table.
    """
    if "attributes" not in section.data:
        for key in ATTRIBUTE_KEYS[1:]:
            if key in section.data:
                section.fail(key, "is given without attributes", "add attributes = \"FILE\" "
                             "or remove it")
        return section.codes(kind), None, None, UNLISTED_KEY_RULES.default
    if "codes" in section.data:
        section.fail("codes", "is given together with attributes",
                     "keep one: the typed code table or the attribute table")
    name = section.string("attributes")
    path = (raster_table_path(section.path("path")) if name.lower() == RASTER_TABLE
            else section.path("attributes"))
    layer = section.string("attributes_layer", required=False)
    key = section.string("attributes_key", required=False)
    frame, rows, value_column = read_attribute_table(path, layer=layer, key=key)
    where = path.name + (f":{layer}" if layer else "")
    keyed = keyed_classes(frame, key=key or value_column or DEFAULT_KEY, kind=kind, where=where,
                          row_names=rows, classification=classification)
    return keyed.codes, keyed, path, section.choice("unlisted_keys", UNLISTED_KEY_RULES)
