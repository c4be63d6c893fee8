"""Add layers to a user's GeoPackage in place, in one SQLite transaction.

The layers are built in a temporary GeoPackage beside the user's file; at the
end :func:`merge_layers` opens the user's file with SQLite, takes its write lock
(``BEGIN IMMEDIATE``: waits for another program's write transaction to end, and
holds off other writers until the commit), replaces or adds gisrun's layers and
commits. SQLite's atomic commit is the anchor: other programs that hold the file
open (in WAL or rollback-journal mode) keep every row they committed, before or
during the run; the file is never replaced, so hard links and open handles stay
valid; an interrupted or failed merge is rolled back by SQLite.

A layer is its table, its R-tree index (a virtual table), its indexes and
triggers, and its rows in the GeoPackage's system tables (``gpkg_contents``,
``gpkg_geometry_columns``, ``gpkg_extensions``, ``gpkg_ogr_contents``,
``gpkg_data_columns``); all of them are copied. Rows are copied before the
triggers are created, since GDAL's R-tree triggers call functions that only GDAL
provides.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable, Iterable
from contextlib import closing
from pathlib import Path

from ..errors import OutputError

__all__ = ["LOCK_WAIT_S", "merge_layers", "layer_names"]

#: How long to wait for another program's write transaction on the user's GeoPackage.
LOCK_WAIT_S = 30.0

#: System tables with one row per layer (keyed by ``table_name``).
_PER_LAYER = ("gpkg_contents", "gpkg_geometry_columns", "gpkg_extensions", "gpkg_ogr_contents",
              "gpkg_data_columns", "gpkg_metadata_reference")


def layer_names(db: sqlite3.Connection, schema: str = "main") -> list[str]:
    """Layer names listed in a GeoPackage's ``gpkg_contents``."""
    return [str(row[0]) for row in
            db.execute(f"SELECT table_name FROM {schema}.gpkg_contents")]  # noqa: S608


def merge_layers(source: Path, target: Path, names: Iterable[str],
                 check: Callable[[list[str]], None], *, wait_s: float | None = None) -> None:
    """Copy layers ``names`` from GeoPackage ``source`` into ``target`` in one transaction.

    ``check(current_layer_names)`` runs inside the transaction, on the layers
    the target has now, and raises to refuse (a layer of the same name that
    appeared during the run). A layer of the same name is replaced.

    Raises
    ------
    OutputError
        Another program holds a write transaction longer than :data:`LOCK_WAIT_S`,
        or the file cannot be written (disk full, read-only).
    """
    where, fix = str(target), "finish or close the edit in the other program, then run again"
    try:
        with closing(sqlite3.connect(target.resolve().as_uri(), uri=True, isolation_level=None,
                                     timeout=LOCK_WAIT_S if wait_s is None else wait_s)) as db:
            db.execute("ATTACH DATABASE ? AS src", (f"{source.resolve().as_uri()}?mode=ro",))
            db.execute("BEGIN IMMEDIATE")
            try:
                check(layer_names(db))
                copied = set(layer_names(db, "src"))
                for name in names:
                    if name in copied:
                        _replace_layer(db, name, where)
                db.execute("COMMIT")
            except BaseException:
                if db.in_transaction:
                    db.execute("ROLLBACK")
                raise
    except sqlite3.OperationalError as err:
        if "locked" in str(err) or "busy" in str(err):
            raise OutputError(where, "is being written by another program (the database is "
                              "locked); nothing was added", fix) from None
        raise OutputError(where, f"could not be written ({err})",
                          "check free disk space and permissions, then run again") from None
    except sqlite3.Error as err:
        raise OutputError(where, f"could not be written ({err})",
                          "check that the GeoPackage is not damaged, then run again") from None


def _q(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _has_table(db: sqlite3.Connection, schema: str, table: str) -> bool:
    return db.execute(f"SELECT 1 FROM {schema}.sqlite_master WHERE type = 'table' "  # noqa: S608
                      "AND name = ?", (table,)).fetchone() is not None


def _rtrees(db: sqlite3.Connection, schema: str, name: str) -> list[str]:
    if not _has_table(db, schema, "gpkg_extensions"):
        return []
    rows = db.execute(f"SELECT table_name, column_name FROM {schema}.gpkg_extensions "  # noqa: S608
                      "WHERE lower(table_name) = lower(?) AND extension_name = "
                      "'gpkg_rtree_index'", (name,))
    return [f"rtree_{t}_{c}" for t, c in rows]


def _replace_layer(db: sqlite3.Connection, name: str, where: str) -> None:
    _drop_layer(db, name)
    objects = db.execute("SELECT type, name, sql FROM src.sqlite_master WHERE tbl_name = ? "
                         "AND sql IS NOT NULL ORDER BY type = 'trigger', type = 'index'",
                         (name,)).fetchall()
    for kind, _, sql in objects:
        if kind == "table":
            db.execute(sql)
            db.execute(f"INSERT INTO main.{_q(name)} SELECT * FROM src.{_q(name)}")  # noqa: S608
    for rtree in _rtrees(db, "src", name):
        sql = db.execute("SELECT sql FROM src.sqlite_master WHERE name = ?", (rtree,)).fetchone()
        db.execute(sql[0])
        db.execute(f"INSERT INTO main.{_q(rtree)} SELECT * FROM src.{_q(rtree)}")  # noqa: S608
    _copy_srs(db, name, where)
    for table in _PER_LAYER:
        if _has_table(db, "src", table):
            if not _has_table(db, "main", table):
                db.execute(db.execute("SELECT sql FROM src.sqlite_master WHERE name = ?",
                                      (table,)).fetchone()[0])
            _copy_rows(db, table, name)
    for kind, _, sql in objects:
        if kind in ("index", "trigger"):
            db.execute(sql)


def _drop_layer(db: sqlite3.Connection, name: str) -> None:
    """Remove a layer (any case of its name) and its rows in the system tables."""
    for rtree in _rtrees(db, "main", name):
        db.execute(f"DROP TABLE IF EXISTS main.{_q(rtree)}")
    tables = db.execute("SELECT name FROM main.sqlite_master WHERE type = 'table' "
                        "AND lower(name) = lower(?)", (name,)).fetchall()
    for (table,) in tables:
        db.execute(f"DROP TABLE main.{_q(table)}")
    for table in _PER_LAYER:
        if _has_table(db, "main", table):
            db.execute(f"DELETE FROM main.{table} WHERE lower(table_name) = lower(?)",  # noqa: S608
                       (name,))


def _copy_rows(db: sqlite3.Connection, table: str, name: str) -> None:
    _copy_rows_where(db, table, "table_name", name)


def _copy_srs(db: sqlite3.Connection, name: str, where: str) -> None:
    """Make sure the layer's CRS row is in the target, with the same meaning."""
    srs = db.execute("SELECT s.* FROM src.gpkg_spatial_ref_sys s JOIN src.gpkg_contents c "
                     "ON c.srs_id = s.srs_id WHERE c.table_name = ?", (name,)).fetchone()
    if srs is None:
        return
    cols = [r[1] for r in db.execute("PRAGMA src.table_info(gpkg_spatial_ref_sys)")]
    row = dict(zip(cols, srs, strict=True))
    have = db.execute("SELECT organization, organization_coordsys_id, definition FROM "
                      "main.gpkg_spatial_ref_sys WHERE srs_id = ?", (row["srs_id"],)).fetchone()
    if have is None:
        _copy_rows_where(db, "gpkg_spatial_ref_sys", "srs_id", row["srs_id"])
    elif have != (row["organization"], row["organization_coordsys_id"], row["definition"]):
        raise OutputError(f"{where}:{name}", f"CRS id {row['srs_id']} of the GeoPackage was "
                          "changed by another program during the run; nothing was added",
                          "run again")


def _copy_rows_where(db: sqlite3.Connection, table: str, key: str, value: object) -> None:
    main_cols = [r[1] for r in db.execute(f"PRAGMA main.table_info({table})")]
    src_cols = {r[1] for r in db.execute(f"PRAGMA src.table_info({table})")}
    cols = ", ".join(_q(c) for c in main_cols if c in src_cols)
    db.execute(f"INSERT INTO main.{table} ({cols}) SELECT {cols} FROM src.{table} "  # noqa: S608
               f"WHERE {_q(key)} = ?", (value,))
