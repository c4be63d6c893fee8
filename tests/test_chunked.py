"""Chunked runs: every subcatchment once, in order, and equal to the last bit on dask."""

import dataclasses
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from shapely.geometry import box

from gisrun import load_project, run
from gisrun.workflow.chunks import chunk_size_for_budget, plan_chunks

#: End-to-end, dask, memory, interrupt and fuzz tests: `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


def test_chunks_cover_every_row_once_and_are_compact():
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 1000, size=(500, 2))
    geoms = gpd.GeoSeries([box(x, y, x + 5, y + 5) for x, y in xy])
    chunks = plan_chunks(geoms, 50)
    assert len(chunks) == 10
    assert sorted(np.concatenate(chunks).tolist()) == list(range(500))
    # Hilbert chunks are compact: their bounding boxes are far smaller than random chunks'
    def mean_extent(groups):
        return np.mean([np.ptp(xy[g], axis=0).sum() for g in groups])
    random_groups = np.array_split(rng.permutation(500), 10)
    assert mean_extent(chunks) < 0.6 * mean_extent(random_groups)


def test_chunk_size_shrinks_with_budget_and_steps():
    assert chunk_size_for_budget(100, 288, 1) < chunk_size_for_budget(1000, 288, 1)
    assert chunk_size_for_budget(1000, 576, 1) < chunk_size_for_budget(1000, 288, 1)
    assert chunk_size_for_budget(1, 10**6, 9) == 16  # never below a small floor


@pytest.fixture(scope="module")
def small_chunk_project():
    project = load_project(DEMO)
    project = dataclasses.replace(project, memory_budget_mb=5.0)  # forces several chunks
    return dataclasses.replace(project, storms=project.storms[-1:])  # the short observed event


@pytest.fixture(scope="module")
def serial(small_chunk_project):
    return run(small_chunk_project)


def assert_identical(a, b):
    assert len(a.storms) == len(b.storms)
    for sa, sb in zip(a.storms, b.storms, strict=True):
        pd.testing.assert_frame_equal(sa.subcatchments, sb.subcatchments, check_exact=True)
        pd.testing.assert_frame_equal(sa.series, sb.series, check_exact=True)
    pd.testing.assert_frame_equal(a.units, b.units, check_exact=True)


def assert_same_values(a, b):
    """:func:`assert_identical` but for the id column's dtype (one chunk keeps it categorical)."""
    def plain(frame):
        return frame.astype({"subcatchment_id": str})

    for sa, sb in zip(a.storms, b.storms, strict=True):
        pd.testing.assert_frame_equal(plain(sa.subcatchments), plain(sb.subcatchments),
                                      check_exact=True)
        pd.testing.assert_frame_equal(plain(sa.series), plain(sb.series), check_exact=True)
        assert np.array_equal(sa.rain_per_step_m, sb.rain_per_step_m)
    pd.testing.assert_frame_equal(plain(a.units), plain(b.units), check_exact=True)


def test_serial_run_keeps_layer_order(serial, small_chunk_project):
    n_steps = len(serial.storms[0].rain_per_step_m)
    assert chunk_size_for_budget(small_chunk_project.memory_budget_mb, n_steps, 1) < 40
    ids = serial.subcatchments["subcatchment_id"].tolist()
    assert serial.storms[0].subcatchments["subcatchment_id"].tolist() == ids
    assert serial.coverage["subcatchment_id"].tolist() == ids
    assert pd.unique(serial.storms[0].series["subcatchment_id"]).tolist() == ids


def test_synchronous_dask_scheduler_equals_serial(small_chunk_project, serial):
    assert_identical(serial, run(small_chunk_project, scheduler="synchronous"))


def test_local_cluster_two_workers_equals_serial(small_chunk_project, serial):
    pytest.importorskip("dask.distributed")
    import concurrent.futures

    with concurrent.futures.ThreadPoolExecutor(1) as pool:
        future = pool.submit(run, small_chunk_project, workers=2)
        result = future.result(timeout=240)
    assert_identical(serial, result)


def test_areal_storms_by_chunks_and_on_dask_workers_equal_one_chunk():
    # A chunk makes its own columns of a rain grid and of a gauge set (sent to a dask worker
    # with only the cells and gauges it uses); a column does not depend on the chunk it is
    # made in, so several chunks, here or on workers, give one chunk's results exactly.
    pytest.importorskip("dask.distributed")
    import concurrent.futures

    project = load_project(DEMO)
    areal = tuple(s for s in project.storms if s["name"] in ("radar_event", "gauged_event"))
    one = dataclasses.replace(project, storms=areal, memory_budget_mb=5000.0)
    small = dataclasses.replace(one, memory_budget_mb=5.0)
    whole = run(one)
    assert_same_values(whole, run(small))
    with concurrent.futures.ThreadPoolExecutor(1) as pool:
        on_workers = pool.submit(run, small, workers=2).result(timeout=300)
    assert_same_values(whole, on_workers)
    for storm in on_workers.storms:  # the run's result still has every column, in layer order
        assert storm.rain_per_step_m.shape[1] == len(whole.subcatchments)
        assert storm.hyetograph.areal is not None


def test_series_sink_streams_without_keeping(small_chunk_project, serial):
    seen = []
    result = run(small_chunk_project, series_sink=lambda k, name, frame: seen.append(frame),
                 keep_loss=False)
    assert len(seen) > 1  # several chunks
    streamed = pd.concat(seen, ignore_index=True)
    assert len(streamed) == len(serial.storms[0].series)
    assert result.storms[0].series is None and result.storms[0].loss is None
    assert_allclose_by_id(streamed, serial.storms[0].series)


def assert_allclose_by_id(a, b):
    key = ["subcatchment_id", "time_end_s"]
    a = a.sort_values(key).reset_index(drop=True)
    b = b.sort_values(key).reset_index(drop=True)
    pd.testing.assert_frame_equal(a, b, check_exact=True)
