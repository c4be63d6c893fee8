"""A chunk runs its storms one after the other and holds one storm's step arrays at a time.

Reference: the chunk budget's own assumption (``workflow.chunks.chunk_size_for_budget`` counts
one storm's engine arrays, ``(steps, units)``, at a time: common practice for a streamed run,
whose memory must not grow with the number of storms).
"""

from __future__ import annotations

import dataclasses
import gc
import weakref
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import gisrun.workflow.chunks as chunks_module
from gisrun import load_project, run

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


@pytest.fixture(scope="module")
def three_storms():
    project = load_project(DEMO)
    short = project.storms[-1]  # the short observed event
    storms = tuple(dict(short, name=f"{short['name']}_{k}") for k in range(3))
    return dataclasses.replace(project, storms=storms)


def test_each_storms_step_arrays_are_let_go_before_the_next_storm_runs(three_storms,
                                                                         monkeypatch):
    seen: list[weakref.ref] = []
    alive_at_call: list[int] = []
    original = chunks_module.run_storm

    def watched(*args, **kwargs):
        gc.collect()
        alive_at_call.append(sum(ref() is not None for ref in seen))
        result = original(*args, **kwargs)
        seen.append(weakref.ref(result.loss))
        return result

    monkeypatch.setattr(chunks_module, "run_storm", watched)
    streamed = run(three_storms, keep_loss=False, cells=False)
    assert len(alive_at_call) >= 3 and alive_at_call == [0] * len(alive_at_call)
    assert all(s.loss is None for s in streamed.storms)
    # The same tables as a run that keeps every storm's step arrays.
    kept = run(three_storms, keep_loss=True, cells=False)
    for a, b in zip(streamed.storms, kept.storms, strict=True):
        pd.testing.assert_frame_equal(a.subcatchments, b.subcatchments, check_exact=True)
        assert b.loss is not None and np.isfinite(b.loss.excess_m).all()
