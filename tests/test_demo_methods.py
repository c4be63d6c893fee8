"""The demo runs with every loss method as the run default (per-subcatchment choices kept)."""

import dataclasses
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from gisrun import load_project, run
from gisrun.engine import ENGINES

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


@pytest.fixture(scope="module")
def demo():
    project = load_project(DEMO)
    return dataclasses.replace(project, storms=project.storms[-1:])  # the short observed event


@pytest.mark.parametrize("method", sorted(ENGINES))
def test_demo_runs_with_each_method(demo, method):
    result = run(dataclasses.replace(demo, method=method))
    subs = result.storms[0].subcatchments
    assert len(subs) == 85
    fates = subs["infiltration_depth_m"] + subs["runoff_depth_m"] + subs["storage_depth_m"]
    assert_allclose(fates, subs["rain_depth_m"], rtol=1e-9)
    assert (subs["runoff_depth_m"] >= 0).all()
    assert (subs["runoff_depth_m"] > 0).mean() > 0.5  # a 30 mm burst runs off the town
    assert (subs["runoff_depth_m"] < subs["rain_depth_m"]).all()
    methods = result.parameters.groupby("subcatchment_id")["loss_method"].first()
    # the run default applies except where the layer's loss_method field chooses another
    assert (methods == method).sum() >= 77
    assert set(methods) <= {method, "horton", "curve_number"}
    assert np.isfinite(subs["runoff_coefficient"]).all()
