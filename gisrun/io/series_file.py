"""The compact store of the excess series: one Parquet file beside the GeoPackage.

A long table with the columns of the GeoPackage's ``excess_series`` table
(``storm``, ``subcatchment_id``, ``time_end_min``, depths and intensities in the
run's units), read back with one call of a standard library::

    import pandas as pd
    series = pd.read_parquet("runoff.series.parquet")

``storm`` and ``subcatchment_id`` are dictionary columns (pandas categoricals), the
values float64 exactly as the GeoPackage holds them (already rounded to
:data:`gisrun.units.SIGNIFICANT_DIGITS` significant digits, which is what lets them
compress). Each frame written is one row group (one chunk of subcatchments under one
storm), compressed with zstd; the key columns are dictionary-encoded, the values
stored plain. Measured on a 6000-subcatchment, 288-step benchmark run: 1.1 bytes per
value (the GeoPackage table: about 16), written in 0.5 s a million rows.

The file is written through :mod:`gisrun.io.files` like every output: built beside
its target under a temporary name and moved in only when complete (with the
GeoPackage, in the same :class:`~gisrun.io.commit.OutputSet`).
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

from .._version import __version__
from ..model import CAUTION
from ..project import Project

__all__ = ["SERIES_IN_GEOPACKAGE_BELOW", "SERIES_SUFFIX", "SeriesFile", "arrow_table",
           "series_path", "series_metadata", "series_store"]

#: ``[project] series = "auto"`` keeps the series in the GeoPackage below this many rows
#: (subcatchments x steps, summed over the storms; about 90 MB of GeoPackage at 90 bytes a row)
#: and writes the Parquet file from there up.
SERIES_IN_GEOPACKAGE_BELOW = 1_000_000

#: Ending of the series file's name: ``runoff.gpkg`` -> ``runoff.series.parquet``.
SERIES_SUFFIX = ".series.parquet"
#: zstd level: 3 (the library default) stored 1.10 bytes a value at 0.5 s a million rows on the
#: benchmark series; 6 stored 1.10 at twice the time; 1 stored 1.20.
_ZSTD_LEVEL = 3
#: Columns stored as dictionaries (few distinct values, repeated).
_KEY_COLUMNS = ("storm", "subcatchment_id")
#: Columns dictionary-encoded on disk besides the keys (the step end time repeats per
#: subcatchment); the values are stored plain, which compressed better than dictionaries.
_DICTIONARY_ENCODED = (*_KEY_COLUMNS, "time_end_min")


def series_store(choice: str, rows: int) -> str:
    """``"geopackage"`` or ``"parquet"``: the project's choice, or by size for ``"auto"``.

    Examples
    --------
    >>> series_store("auto", 999_999), series_store("auto", 1_000_000)
    ('geopackage', 'parquet')
    """
    if choice != "auto":
        return choice
    return "parquet" if rows >= SERIES_IN_GEOPACKAGE_BELOW else "geopackage"


def series_path(gpkg: str | Path) -> Path:
    """The series file of a GeoPackage: ``<folder>/<stem>.series.parquet``."""
    gpkg = Path(gpkg)
    return gpkg.with_name(f"{gpkg.stem}{SERIES_SUFFIX}")


def series_metadata(project: Project, geopackage: str | Path) -> dict[str, str]:
    """What the series file says about itself (kept in its schema's metadata)."""
    return {"gisrun_version": __version__, "geopackage": Path(geopackage).name,
            "unit_system": project.units.name,
            "time_step_min": f"{project.time_step_s / 60:g}", "caution": CAUTION}


class SeriesFile:
    """Write excess-series frames into one Parquet file, one row group per frame.

    The schema is taken from the first frame (key columns as dictionaries of
    text); later frames must have the same columns. ``metadata`` (text keys and
    values) is stored in the file's schema. Nothing is written until the first
    frame; :meth:`close` writes an empty table of the key columns if no frame came.
    """

    def __init__(self, path: str | Path, metadata: Mapping[str, str] | None = None) -> None:
        self.path = Path(path)
        self.metadata = {str(k): str(v) for k, v in (metadata or {}).items()}
        self.rows = 0
        self._schema: pa.Schema | None = None
        self._writer: pq.ParquetWriter | None = None

    def write(self, frame: pd.DataFrame) -> None:
        """Append ``frame`` as one row group."""
        table = arrow_table(frame)
        if self._schema is None:
            self._schema = _schema(table.schema, self.metadata)
            self._writer = _open(self.path, self._schema)
        table = table.select(self._schema.names).cast(self._schema)
        self._writer.write_table(table, row_group_size=max(len(table), 1))
        self.rows += len(table)

    def close(self) -> None:
        """Finish the file (its footer); the file is complete only after this."""
        if self._writer is None:
            fields = [pa.field(name, pa.dictionary(pa.int32(), pa.string()))
                      for name in _KEY_COLUMNS]
            self._schema = _schema(pa.schema(fields), self.metadata)
            self._writer = _open(self.path, self._schema)
        self._writer.close()

    def __enter__(self) -> SeriesFile:
        return self

    def __exit__(self, kind: object, *_: object) -> None:
        if kind is None:
            self.close()
        elif self._writer is not None:  # the caller removes the unfinished temporary
            self._writer.close()


def arrow_table(frame: pd.DataFrame) -> pa.Table:
    """``frame`` as an Arrow table: ``pa.Table.from_pandas``'s columns, without its metadata.

    Column by column without pandas' conversion machinery, which took about three quarters of
    the time of handing a storm's series rows to the writer: numbers as they are (their
    buffers shared; NaN as null, as pandas' conversion does, only where a column has one),
    categoricals as dictionaries of their codes and categories, other columns through Arrow's
    pandas conversion of that column.
    """
    columns = {}
    for name in frame.columns:
        column = frame[name]
        if isinstance(column.dtype, pd.CategoricalDtype):
            codes = column.cat.codes.to_numpy()
            missing = codes < 0
            columns[name] = pa.DictionaryArray.from_arrays(
                codes, pa.array(column.cat.categories, from_pandas=True),
                mask=missing if missing.any() else None, ordered=column.cat.ordered)
            continue
        values = column.to_numpy()
        plain = values.dtype.kind in "iub" or (values.dtype.kind == "f"
                                                and not np.isnan(values).any())
        columns[name] = pa.array(values) if plain else pa.array(column, from_pandas=True)
    return pa.table(columns)


def _schema(found: pa.Schema, metadata: Mapping[str, str]) -> pa.Schema:
    """Key columns as dictionaries of text, text columns as plain strings, our metadata."""
    fields = []
    for field in found:
        if field.name in _KEY_COLUMNS:
            field = field.with_type(pa.dictionary(pa.int32(), pa.string()))
        elif pa.types.is_large_string(field.type):
            field = field.with_type(pa.string())
        fields.append(field)
    return pa.schema(fields, metadata=dict(metadata))


def _open(path: Path, schema: pa.Schema) -> pq.ParquetWriter:
    encoded = [name for name in _DICTIONARY_ENCODED if name in schema.names]
    return pq.ParquetWriter(path, schema, compression="zstd", compression_level=_ZSTD_LEVEL,
                            use_dictionary=encoded)
