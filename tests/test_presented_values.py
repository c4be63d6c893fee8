"""Presented values: rounded to stated significant digits, decay constants per hour (issue 15,
item 13). Invented test data from :mod:`bad_inputs_helpers`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyogrio
import pytest
from bad_inputs_helpers import edit_toml, make_project

from gisrun import run, write_outputs
from gisrun.parameters.tables import horton_by_group
from gisrun.units import SIGNIFICANT_DIGITS, US, present_frame, round_significant, to_si


def test_float_noise_is_rounded_away():
    # issue 15 item 13: 0.2 entered as a decimal came back as 0.19999999999999998, and
    # 48,557.87 m2 (an invented area) as 11.99891012472315 acre
    acres = to_si(11.99891012472315, "acre")
    out = present_frame(pd.DataFrame({"initial_abstraction_ratio": [0.19999999999999998],
                                      "area_m2": [acres]}), US)
    assert out["initial_abstraction_ratio"].tolist() == [0.2]
    assert out["area_acre"].tolist() == [11.9989]
    assert repr(float(out["area_acre"].iloc[0])) == "11.9989"


@pytest.mark.parametrize(("value", "expected"), [
    (123456789.0, 123457000.0), (0.000123456789, 0.000123457), (-2.5000000001, -2.5),
    (1.3877787807814457e-14, 1.38778e-14), (0.0, 0.0), (7.0, 7.0),
])
def test_round_significant(value, expected):
    assert SIGNIFICANT_DIGITS == 6
    assert round_significant([value])[0] == expected


def test_nan_and_inf_stay():
    out = round_significant([np.nan, np.inf, -np.inf])
    assert np.isnan(out[0]) and out[1] == np.inf and out[2] == -np.inf


def test_horton_decay_and_recovery_come_out_per_hour(tmp_path):
    # issue 15 item 13: entered per hour (horton_hsg.csv decay_per_h), written per second
    project = make_project(tmp_path / "p")
    edit_toml(project, 'name = "green_ampt"', 'name = "horton"')
    result = run(project)
    gpkg = write_outputs(result, output=tmp_path / "out.gpkg")
    params = pyogrio.read_dataframe(gpkg, layer="unit_parameters", read_geometry=False)
    assert "horton_decay_per_h" in params and "horton_decay_per_s" not in params
    pervious = params[params["surface"] == "pervious"].set_index("soil_class")
    table = horton_by_group()
    for group in ("A", "B"):
        assert pervious.loc[group, "horton_decay_per_h"] == pytest.approx(
            table.loc[group, "horton_decay_per_s"] * 3600.0)
        assert pervious.loc[group, "horton_recovery_per_h"] == pytest.approx(
            table.loc[group, "horton_recovery_per_s"] * 3600.0, rel=1e-5)
    lumped = pyogrio.read_dataframe(gpkg, layer="lumped_parameters", read_geometry=False)
    decay = lumped[lumped["parameter"] == "horton_decay"]
    assert len(decay) and (decay["unit"] == "1/h").all()


def test_written_layers_hold_rounded_values_and_the_run_keeps_si_unrounded(tmp_path):
    # issue 15 item 13: every float in every written layer has at most 6 significant digits;
    # the in-memory result (SI) is not rounded
    project = make_project(tmp_path / "p")
    result = run(project)
    gpkg = write_outputs(result, output=tmp_path / "out.gpkg")
    for name, _ in pyogrio.list_layers(gpkg):
        frame = pyogrio.read_dataframe(gpkg, layer=name, read_geometry=False)
        for column in frame.columns:
            if frame[column].dtype == np.float64:
                values = frame[column].to_numpy()
                assert np.array_equal(values, round_significant(values), equal_nan=True), \
                    (name, column)
    areas = result.coverage["area_m2"].to_numpy()
    assert not np.array_equal(areas / 3.0, round_significant(areas / 3.0))  # SI: full precision
