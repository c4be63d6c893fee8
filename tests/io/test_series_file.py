"""The Parquet series file: what goes in comes back from one pandas call, row group by frame."""

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest

from gisrun.io.series_file import (
    SERIES_IN_GEOPACKAGE_BELOW,
    SeriesFile,
    series_path,
    series_store,
)


def frame(storm: str, ids: list[str], steps: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    n = len(ids) * steps
    return pd.DataFrame({
        "storm": storm,
        "subcatchment_id": np.repeat(ids, steps),
        "time_end_min": np.tile(np.arange(1, steps + 1) * 5.0, len(ids)),
        "excess_mm": np.round(rng.gamma(0.5, 2.0, n), 4),
    })


def test_frames_come_back_exactly_one_row_group_each(tmp_path):
    parts = [frame("2 yr", ["A-1", "B-2"], 7, 1), frame("100 yr", ["A-1", "C-3"], 7, 2),
             frame("2 yr", ["C-3"], 7, 3)]
    path = tmp_path / "s.parquet"
    with SeriesFile(path, {"unit_system": "si"}) as store:
        for part in parts:
            store.write(part)
    back = pd.read_parquet(path)
    want = pd.concat(parts, ignore_index=True)
    assert isinstance(back["storm"].dtype, pd.CategoricalDtype)
    assert isinstance(back["subcatchment_id"].dtype, pd.CategoricalDtype)
    pd.testing.assert_frame_equal(back.astype({"storm": str, "subcatchment_id": str}), want,
                                  check_exact=True, check_dtype=False)
    meta = pq.ParquetFile(path)
    assert meta.metadata.num_row_groups == 3
    assert meta.schema_arrow.metadata[b"unit_system"] == b"si"


def test_no_frame_still_makes_a_readable_empty_file(tmp_path):
    path = tmp_path / "s.parquet"
    SeriesFile(path).close()
    back = pd.read_parquet(path)
    assert list(back.columns) == ["storm", "subcatchment_id"] and back.empty


def test_a_frame_with_other_columns_is_refused(tmp_path):
    with pytest.raises(KeyError), SeriesFile(tmp_path / "s.parquet") as store:
        store.write(frame("a", ["x"], 3, 1))
        store.write(frame("a", ["y"], 3, 1).rename(columns={"excess_mm": "excess_in"}))


def test_store_by_size_and_by_choice(tmp_path):
    assert series_store("auto", SERIES_IN_GEOPACKAGE_BELOW - 1) == "geopackage"
    assert series_store("auto", SERIES_IN_GEOPACKAGE_BELOW) == "parquet"
    assert series_store("geopackage", 10 * SERIES_IN_GEOPACKAGE_BELOW) == "geopackage"
    assert series_store("parquet", 1) == "parquet"
    out = tmp_path / "out"
    assert series_path(out / "runoff.gpkg") == out / "runoff.series.parquet"
