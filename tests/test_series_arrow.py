"""The series writer's frame-to-Arrow conversion against pyarrow's own pandas conversion.

The series file must be the file pyarrow's ``Table.from_pandas`` would give: same column
types (before and after the cast to the file's schema), same values, NaN stored as null.
"""

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

from gisrun.io.series_file import SeriesFile, arrow_table


def frame(n=50, seed=3):
    rng = np.random.default_rng(seed)
    codes = rng.integers(-1, 3, n).astype(np.int8)  # -1: a missing category
    values = rng.random(n)
    values[::7] = np.nan
    return pd.DataFrame({
        "storm": pd.Categorical.from_codes(np.zeros(n, dtype=np.int8), categories=["a's"]),
        "subcatchment_id": pd.Categorical.from_codes(codes, categories=["S1", "S10", "s2"]),
        "ordered": pd.Categorical.from_codes(np.abs(codes), categories=["lo", "mid", "hi"],
                                             ordered=True),
        "time_end_min": np.arange(n) * 5.0,
        "with_nan_mm": values,
        "count": rng.integers(0, 9, n),
        "flag": rng.random(n) > 0.5,
        "text": np.array(["x", None, "yz", "w", "v"] * (n // 5), dtype=object),
    })


def test_arrow_table_is_pyarrows_conversion():
    f = frame()
    want = pa.Table.from_pandas(f, preserve_index=False).replace_schema_metadata(None)
    got = arrow_table(f)
    assert got.schema == want.schema
    assert got.equals(want)
    assert got.column("with_nan_mm").null_count == int(np.isnan(f["with_nan_mm"]).sum()) > 0
    assert got.column("subcatchment_id").null_count == int((f["subcatchment_id"].isna()).sum())


def test_series_file_holds_the_frames(tmp_path):
    frames = [frame(50, 3), frame(40, 4)]
    with SeriesFile(tmp_path / "s.parquet", {"k": "v"}) as out:
        for f in frames:
            out.write(f)
    back = pq.read_table(tmp_path / "s.parquet")
    want = pa.concat_tables([pa.Table.from_pandas(f, preserve_index=False) for f in frames],
                            promote_options="permissive")
    assert back.num_rows == 90 and pq.ParquetFile(tmp_path / "s.parquet").num_row_groups == 2
    for name in ("time_end_min", "with_nan_mm", "count", "flag", "text"):
        assert back.column(name).to_pylist() == want.column(name).to_pylist()
    assert back.column("subcatchment_id").to_pylist() == want.column(
        "subcatchment_id").to_pylist()
    assert back.schema.metadata[b"k"] == b"v"
