"""Compare two gisrun outputs exactly: every GeoPackage layer and the Parquet series file.

Used by ``bench_run.py --workers`` to check a run on a dask cluster against the same run in one
process. Exact means: the same layers, the same columns in the same order, the same number of
rows, and in every row (matched by rowid, so also in the same order) every value of the same
SQLite type and equal (``IS NOT``, so two NULLs are equal; blobs byte for byte, geometry
included). The comparison runs inside SQLite (both files attached to one connection), so it
does not load the layers into Python. ``run_info`` is compared without its ``started_utc`` row
(the clock time the run started). The series files are compared with pyarrow, schema (with its
metadata) and then every column, in aligned slices of batches, so memory stays small.

Command line (two outputs of the same project)::

    python benchmarks/compare_outputs.py one/bench_output.gpkg dask/bench_output.gpkg
"""

from __future__ import annotations

import sqlite3
import sys
from collections.abc import Iterator
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq

__all__ = ["compare_geopackages", "compare_parquet", "compare_outputs"]

#: Rows of ``run_info`` that differ between two runs of the same project by nature.
RUN_SPECIFIC_KEYS = ("started_utc",)
BATCH_ROWS = 1 << 20


def _layers(db: sqlite3.Connection, schema: str) -> list[str]:
    rows = db.execute(f"SELECT table_name FROM {schema}.gpkg_contents ORDER BY table_name")
    return [r[0] for r in rows]


def _columns(db: sqlite3.Connection, schema: str, table: str) -> list[tuple[str, str]]:
    return [(r[1], r[2]) for r in db.execute(f'PRAGMA {schema}.table_info("{table}")')]


def _count(db: sqlite3.Connection, schema: str, table: str, where: str) -> int:
    return db.execute(f'SELECT count(*) FROM {schema}."{table}" {where}').fetchone()[0]


def _compare_layer(db: sqlite3.Connection, table: str) -> str | None:
    """None when the layer is identical in ``a`` and ``b``, else the first difference."""
    cols = _columns(db, "a", table)
    if cols != _columns(db, "b", table):
        return f"{table}: columns differ: {cols} / {_columns(db, 'b', table)}"
    where = ""
    if table == "run_info":
        keys = ", ".join(f"'{k}'" for k in RUN_SPECIFIC_KEYS)
        where = f"WHERE key NOT IN ({keys})"
    n_a, n_b = _count(db, "a", table, where), _count(db, "b", table, where)
    if n_a != n_b:
        return f"{table}: {n_a} / {n_b} rows"
    names = [f'"{c}"' for c, _ in cols]
    differ = " OR ".join(f"x.{c} IS NOT y.{c} OR typeof(x.{c}) != typeof(y.{c})" for c in names)
    scope = f"AND x.key NOT IN ({keys})" if table == "run_info" else ""
    row = db.execute(f'SELECT x.rowid FROM a."{table}" x LEFT JOIN b."{table}" y '
                     f"ON x.rowid = y.rowid WHERE (y.rowid IS NULL OR {differ}) {scope} "
                     "ORDER BY x.rowid LIMIT 1").fetchone()
    if row is None:
        return None
    got_a = db.execute(f'SELECT * FROM a."{table}" WHERE rowid = ?', row).fetchone()
    got_b = db.execute(f'SELECT * FROM b."{table}" WHERE rowid = ?', row).fetchone()
    if got_b is None:
        return f"{table}: rowid {row[0]} missing from the second"
    first = next(i for i, (u, v) in enumerate(zip(got_a, got_b, strict=True))
                 if u != v or type(u) is not type(v))
    return (f"{table}: first difference at rowid {row[0]}, column {cols[first][0]}: "
            f"{got_a[first]!r} / {got_b[first]!r}")


def compare_geopackages(a: Path, b: Path) -> tuple[list[str], list[str]]:
    """(layers compared, differences) between two GeoPackages; no differences: identical."""
    db = sqlite3.connect("file::memory:", uri=True)
    try:
        db.execute("ATTACH DATABASE ? AS a", (f"file:{Path(a).resolve()}?mode=ro",))
        db.execute("ATTACH DATABASE ? AS b", (f"file:{Path(b).resolve()}?mode=ro",))
        layers_a, layers_b = _layers(db, "a"), _layers(db, "b")
        if layers_a != layers_b:
            return layers_a, [f"layers differ: {layers_a} / {layers_b}"]
        found = [_compare_layer(db, t) for t in layers_a]
        return layers_a, [d for d in found if d is not None]
    finally:
        db.close()


def _slices(path: Path) -> Iterator[pa.RecordBatch]:
    yield from pq.ParquetFile(path).iter_batches(batch_size=BATCH_ROWS)


def compare_parquet(a: Path, b: Path) -> str | None:
    """None when the two Parquet files hold the same schema and values, else the first difference.

    Batches need not line up (row groups may differ); they are cut into aligned slices.
    """
    fa, fb = pq.ParquetFile(a), pq.ParquetFile(b)
    if not fa.schema_arrow.equals(fb.schema_arrow, check_metadata=True):
        return f"series schema differs: {fa.schema_arrow} / {fb.schema_arrow}"
    if fa.metadata.num_rows != fb.metadata.num_rows:
        return f"series: {fa.metadata.num_rows} / {fb.metadata.num_rows} rows"
    it_a, it_b = _slices(a), _slices(b)
    left_a = left_b = None
    offset = 0
    while True:
        left_a = left_a if left_a is not None and len(left_a) else next(it_a, None)
        left_b = left_b if left_b is not None and len(left_b) else next(it_b, None)
        if left_a is None or left_b is None:
            return None if left_a is None and left_b is None else "series: lengths differ"
        n = min(len(left_a), len(left_b))
        sa, sb = left_a.slice(0, n), left_b.slice(0, n)
        found = None if sa.equals(sb) else _first_parquet_difference(sa, sb, offset)
        if found:
            return found
        left_a, left_b, offset = left_a.slice(n), left_b.slice(n), offset + n


def _first_parquet_difference(sa: pa.RecordBatch, sb: pa.RecordBatch, offset: int
                              ) -> str | None:
    """The first differing value, None when the slices differ only by NaN in the same places."""
    for name in sa.schema.names:
        ca, cb = sa.column(name), sb.column(name)
        if not ca.equals(cb):
            va, vb = ca.to_pylist(), cb.to_pylist()
            i = next((k for k, (u, v) in enumerate(zip(va, vb, strict=True)) if u != v
                      and not (u != u and v != v)), None)  # NaN in both places is equal
            if i is not None:
                return f"series: first difference in column {name}, row {offset + i}: " \
                       f"{va[i]!r} / {vb[i]!r}"
    return None


def compare_outputs(a: Path, b: Path) -> tuple[list[str], list[str]]:
    """(what was compared, differences) for two run outputs: GeoPackage and series file."""
    layers, differences = compare_geopackages(a, b)
    series_a, series_b = a.with_suffix(".series.parquet"), b.with_suffix(".series.parquet")
    if series_a.exists() != series_b.exists():
        differences.append(f"series file in one output only: {series_a} / {series_b}")
    elif series_a.exists():
        layers = [*layers, series_a.name]
        found = compare_parquet(series_a, series_b)
        if found:
            differences.append(found)
    return layers, differences


def main(argv: list[str] | None = None) -> int:
    a, b = (Path(p) for p in (argv or sys.argv[1:]))
    compared, differences = compare_outputs(a, b)
    print(f"compared: {', '.join(compared)}")
    print("identical" if not differences else "\n".join(differences))
    return 0 if not differences else 1


if __name__ == "__main__":
    raise SystemExit(main())
