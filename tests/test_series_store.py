"""The excess series in a Parquet file beside the GeoPackage: the same table, far smaller.

The demo's last two storms are run with ``series = "geopackage"`` and ``"parquet"``, kept in
memory and streamed chunk by chunk; the Parquet file must hold exactly the GeoPackage's
``excess_series`` table and every other layer must be unchanged.
"""

import dataclasses
import os
import shutil
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq
import pyogrio
import pytest

import gisrun.workflow.stream as stream
from gisrun import load_project, run, write_outputs
from gisrun.cli.main import main
from gisrun.errors import OutputExistsError
from gisrun.io.series_file import SeriesFile
from gisrun.workflow.stream import run_and_write
from gisrun.write.extras import ExtrasOptions, write_extras

#: End-to-end, dask, memory, interrupt and fuzz tests: `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"
KEYS = ["storm", "subcatchment_id", "time_end_min"]
#: The issue's ceiling: bytes on disk per stored value of the series.
MAX_BYTES_PER_VALUE = 10.0


def demo(series: str, **changes):
    project = load_project(DEMO)
    return dataclasses.replace(project, series=series, storms=project.storms[-2:], **changes)


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """The same project written three ways: GeoPackage table, Parquet kept, Parquet streamed."""
    folder = tmp_path_factory.mktemp("series")
    out = {}
    for name, series in (("table", "geopackage"), ("parquet", "parquet")):
        out[name] = run_and_write(demo(series, memory_budget_mb=5.0),
                                  output=folder / f"{name}.gpkg")
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(stream, "KEEP_STEP_ARRAYS_BELOW", 0)  # as a run of a county would
        out["streamed"] = run_and_write(demo("parquet", memory_budget_mb=5.0),
                                        output=folder / "streamed.gpkg")
    return out


def layer(path, name):
    return pyogrio.read_dataframe(path, layer=name, read_geometry=False)


def sorted_series(frame):
    frame = frame.astype({"storm": str, "subcatchment_id": str})
    return frame.sort_values(KEYS, kind="stable").reset_index(drop=True)


def value_columns(frame):
    return [c for c in frame.columns if c not in KEYS]


@pytest.mark.parametrize("name", ["parquet", "streamed"])
def test_parquet_file_holds_exactly_the_geopackage_table(runs, name):
    _, table_path = runs["table"]
    result, path = runs[name]
    parquet = path.with_name(f"{path.stem}.series.parquet")
    assert result.series_file == parquet.name
    back = pd.read_parquet(parquet)  # the one call a user makes
    assert isinstance(back["subcatchment_id"].dtype, pd.CategoricalDtype)
    pd.testing.assert_frame_equal(sorted_series(back),
                                  sorted_series(layer(table_path, "excess_series")),
                                  check_exact=True, check_dtype=False)
    assert "excess_series" not in [n for n, _ in pyogrio.list_layers(path)]


@pytest.mark.parametrize("name", ["parquet", "streamed"])
def test_other_layers_unchanged_and_run_info_says_where_the_series_are(runs, name):
    _, table_path = runs["table"]
    result, path = runs[name]
    names = [n for n, _ in pyogrio.list_layers(table_path) if n != "excess_series"]
    assert sorted(names) == sorted(n for n, _ in pyogrio.list_layers(path))
    for n in names:
        if n in ("run_info", "unit_results", "unit_parameters", "ponding_rank_units"):
            continue  # run_info below; the streamed unit tables come in chunk order
        pd.testing.assert_frame_equal(layer(table_path, n), layer(path, n), check_exact=True)
    info = layer(path, "run_info").set_index("key")["value"]
    assert info["excess_series_file"] == f"{path.stem}.series.parquet"
    assert "pandas.read_parquet" in info["excess_series_format"]
    assert "excess_series_file" not in set(layer(table_path, "run_info")["key"])


def test_at_most_ten_bytes_per_value_and_far_below_the_geopackage(runs, tmp_path):
    _, path = runs["parquet"]
    parquet = path.with_name(f"{path.stem}.series.parquet")
    table = pd.read_parquet(parquet)
    per_value = parquet.stat().st_size / (len(table) * len(value_columns(table)))
    assert per_value <= MAX_BYTES_PER_VALUE
    # the same rows as a GeoPackage table alone (written the way the run writes tables)
    alone = tmp_path / "alone.gpkg"
    pyogrio.write_dataframe(table.astype({"storm": str, "subcatchment_id": str}), alone,
                            layer="excess_series", driver="GPKG", use_arrow=True)
    # uncompressed float64 would be about 2/3 of the table's size; the demo's file is a third
    assert parquet.stat().st_size * 2 < alone.stat().st_size


def test_one_row_group_per_chunk_and_storm_with_what_the_file_says_of_itself(runs):
    result, path = runs["streamed"]
    parquet = pq.ParquetFile(path.with_name(f"{path.stem}.series.parquet"))
    assert parquet.metadata.num_row_groups >= 2 * len(result.storms)  # several chunks (5 MB)
    meta = {k.decode(): v.decode() for k, v in parquet.schema_arrow.metadata.items()}
    assert meta["geopackage"] == path.name and meta["unit_system"] == "si"
    assert "licensed engineer" in meta["caution"]


def test_extras_name_the_file_and_copy_no_csv(runs):
    result, path = runs["parquet"]
    made = write_extras(result, path, options=ExtrasOptions(rasters=False, maps=False))
    assert made.excess_series is None
    assert not (made.folder / "excess_series.csv").exists()
    assert f"{path.stem}.series.parquet" in made.report.read_text(encoding="utf-8")


def test_notebook_writer_writes_the_same_pair(runs, tmp_path):
    _, parquet_gpkg = runs["parquet"]
    result = run(demo("parquet"))
    target = write_outputs(result, output=tmp_path / "nb.gpkg")
    back = pd.read_parquet(tmp_path / "nb.series.parquet")
    want = pd.read_parquet(parquet_gpkg.with_name(f"{parquet_gpkg.stem}.series.parquet"))
    pd.testing.assert_frame_equal(sorted_series(back), sorted_series(want), check_exact=True)
    info = layer(target, "run_info").set_index("key")["value"]
    assert info["excess_series_file"] == "nb.series.parquet"


def test_a_failed_run_leaves_no_series_file_nor_temporary(tmp_path, monkeypatch):
    written = []

    def fail_after_first(self, frame):
        written.append(len(frame))
        if len(written) > 1:
            raise RuntimeError("stopped in the middle")
        original(self, frame)

    original = SeriesFile.write
    monkeypatch.setattr(SeriesFile, "write", fail_after_first)
    with pytest.raises(RuntimeError, match="stopped in the middle"):
        run_and_write(demo("parquet", memory_budget_mb=5.0), output=tmp_path / "r.gpkg")
    assert len(written) == 2
    assert os.listdir(tmp_path) == []


def test_an_existing_series_file_is_kept_without_overwrite(tmp_path):
    old = tmp_path / "r.series.parquet"
    old.write_bytes(b"someone else's file")
    with pytest.raises(OutputExistsError, match="r.series.parquet"):
        run_and_write(demo("parquet"), output=tmp_path / "r.gpkg")
    assert old.read_bytes() == b"someone else's file"
    assert sorted(os.listdir(tmp_path)) == ["r.series.parquet"]


def test_check_says_where_the_series_go(tmp_path, capsys):
    assert main(["check", str(DEMO)]) == 0
    out = capsys.readouterr().out
    assert "table excess_series" in out and "demo_runoff.gpkg" in out
    folder = tmp_path / "demo"
    shutil.copytree(DEMO, folder, ignore=shutil.ignore_patterns("output"))
    project = folder / "gisrun.toml"
    text = project.read_text()
    assert "time_step_min = 5" in text
    project.write_text(text.replace("time_step_min = 5", 'time_step_min = 5\nseries = "parquet"'))
    assert main(["check", str(project)]) == 0
    assert 'pandas.read_parquet("demo_runoff.series.parquet")' in capsys.readouterr().out
