"""The uncertainty layers name their parameters without a unit, in either unit system."""

from __future__ import annotations

import re

import numpy as np
import pytest
from numpy.testing import assert_allclose
from test_cellgrid import tiny_project

from gisrun import run
from gisrun.present.bands import bands_layer, ranges_layer, sensitivity_layer


@pytest.fixture(scope="module")
def us_run(tmp_path_factory):
    toml = tiny_project(tmp_path_factory.mktemp("bands") / "p")
    toml.write_text(toml.read_text().replace('units = "si"', 'units = "us"')
                    .replace("depth = 60", "depth = 2.4") + "\n[uncertainty]\nsamples = 4\n")
    return run(toml)


def test_parameters_are_named_without_an_si_unit_in_a_us_run(us_run):
    """Defect: a US run's parameter_sensitivity, runoff_bands and uncertainty_ranges layers
    named the parameters by their SI column inside (ks_m_per_s, suction_head_m), a unit that
    no value of the run's output is in. They now use the unit-free names of the
    lumped_parameters layer (ks, suction_head), and the depths are in inches."""
    sens, bands, draws = (sensitivity_layer(us_run), bands_layer(us_run), ranges_layer(us_run))
    si_suffix = re.compile(r"_(m|m_per_s|per_s|m2|m3|s)$")
    named = [*sens["parameter"], *bands["most_influential_parameter"].dropna(),
             *draws["parameter"], *(d.split("|")[0] for d in draws["draw"])]
    assert named and not [n for n in named if si_suffix.search(str(n))]
    assert "ks" in set(sens["parameter"]) and "suction_head" in set(sens["parameter"])
    assert {"runoff_depth_in", "runoff_depth_swing_in"} <= set(sens.columns)
    # the inches are the run's metres / 0.0254 (NIST SP 811 App. B), to the 6 digits shown
    inner = us_run.uncertainty.sensitivity
    assert_allclose(sens["runoff_depth_in"].to_numpy(),
                    inner["runoff_depth_m"].to_numpy() / 0.0254, rtol=1e-5)
    assert np.all(sens["parameter_description"].notna())
