"""Model-input tables: the lumped parameter layer, its wide CSVs, units and round trips."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyogrio
import pytest
from numpy.testing import assert_allclose
from pandas.testing import assert_frame_equal

from gisrun import run, write_outputs
from gisrun.engine import ENGINES
from gisrun.io.geopackage import write_csv
from gisrun.parameters.equivalent import table_parameters
from gisrun.present.model_inputs import (
    excess_series_table,
    lumped_layer,
    lumped_wide,
    parameter_name,
    wide_column,
)
from gisrun.units import SI, US


@pytest.fixture(scope="module")
def tiny_run(tmp_path_factory):
    from test_cellgrid import tiny_project

    folder = tmp_path_factory.mktemp("export")
    return run(tiny_project(folder / "p", rain_scale=(1.0, 1.5))), folder


def test_layer_converts_each_parameter_by_its_declared_unit(tiny_run):
    result, _ = tiny_run
    si, us = lumped_layer(result.lumped_parameters, SI), lumped_layer(result.lumped_parameters, US)
    raw = result.lumped_parameters
    ks = raw["parameter"].astype(str) == "ks_m_per_s"
    assert (si.loc[ks, "unit"] == "mm/h").all() and (us.loc[ks, "unit"] == "in/h").all()
    # presented values carry 6 significant digits (gisrun.units.SIGNIFICANT_DIGITS)
    assert_allclose(si.loc[ks, "value"], raw.loc[ks, "value"] * 3.6e6, rtol=5e-6)  # m/s -> mm/h
    assert_allclose(us.loc[ks, "value"], raw.loc[ks, "value"] * 3600 / 0.0254, rtol=5e-6)
    storage = raw["parameter"].astype(str) == "depression_storage_m"
    assert_allclose(si.loc[storage, "value"], raw.loc[storage, "value"] * 1000, rtol=5e-6)
    assert_allclose(us["runoff_depth_in"], raw["runoff_depth_m"] / 0.0254, rtol=5e-6)
    assert set(si["parameter"]) >= {"impervious_fraction", "ks", "suction_head"}


def test_rates_per_second_are_given_per_hour():
    frame = pd.DataFrame({"subcatchment_id": ["S"], "loss_method": ["horton"],
                          "basis": ["area_weighted"], "storm": ["s"], "surface": ["pervious"],
                          "parameter": ["horton_recovery_per_s"], "value": [0.04 / 3600],
                          "runoff_depth_m": [0.01], "lumped_runoff_depth_m": [0.01],
                          "lumped_difference_m": [0.0], "note": [""]})
    row = lumped_layer(frame, SI).iloc[0]
    assert row["parameter"] == "horton_recovery" and row["unit"] == "1/h"
    assert row["value"] == pytest.approx(0.04)


def test_wide_columns_follow_the_parameter_registry(tiny_run):
    result, _ = tiny_run
    layer = lumped_layer(result.lumped_parameters, SI)
    wide = lumped_wide(layer, "green_ampt")
    expected = [wide_column(surface, "impervious_fraction" if p is None
                            else parameter_name(p.column), "-" if p is None else unit)
                for (surface, p), unit in zip(
                    table_parameters("green_ampt"),
                    ["-", "mm/h", "mm", "-", "mm", "mm"], strict=True)]
    assert list(wide.columns[3:3 + len(expected)]) == expected == [
        "impervious_fraction", "ks_mm_per_h", "suction_head_mm", "moisture_deficit",
        "depression_storage_mm", "impervious_depression_storage_mm"]
    # one row per subcatchment, basis and storm; the long table's values
    sets = layer[layer["parameter"] == "ks"]
    assert len(wide) == len(sets)
    assert_allclose(wide["ks_mm_per_h"], sets["value"], equal_nan=True)
    assert_allclose(wide["lumped_difference_mm"], sets["lumped_difference_mm"])


def test_every_method_declares_one_equivalent_parameter():
    for name, module in ENGINES.items():
        solved = [p for p in module.PARAMETERS if p.equivalent]
        assert len(solved) == 1, name
        rows = table_parameters(name)
        assert rows[0] == ("whole", None)
        assert ("pervious", solved[0]) in rows


def test_csv_and_geopackage_round_trip(tiny_run):
    result, folder = tiny_run
    layer = lumped_layer(result.lumped_parameters, SI)
    wide = lumped_wide(layer, "green_ampt")
    back = pd.read_csv(write_csv(folder / "lumped_green_ampt.csv", wide),
                       dtype={"subcatchment_id": str, "note": object})
    back["note"] = back["note"].where(back["note"].notna(), "")
    assert_frame_equal(back, wide, check_dtype=False, rtol=1e-12)
    gpkg = write_outputs(result, output=folder / "out.gpkg")
    table = pyogrio.read_dataframe(gpkg, layer="lumped_parameters", read_geometry=False)
    table["note"] = table["note"].where(table["note"].notna(), "")
    assert_frame_equal(table, layer, check_dtype=False, rtol=1e-12)
    assert "model_inputs" not in {name for name, _ in pyogrio.list_layers(gpkg)}


def test_excess_series_round_trip_and_sums_to_runoff(tiny_run):
    result, folder = tiny_run
    series = excess_series_table(result.storms, SI)
    back = pd.read_csv(write_csv(folder / "excess.csv", series))
    assert_frame_equal(back, series, check_dtype=False, rtol=1e-12)
    sums = back.groupby("subcatchment_id")["excess_mm"].sum()
    subs = result.storms[0].subcatchments.set_index("subcatchment_id")
    # each presented step carries 6 significant digits (gisrun.units.SIGNIFICANT_DIGITS)
    assert_allclose(sums.loc[subs.index], subs["runoff_depth_m"] * 1000, rtol=1e-5)
    step_min = result.project.time_step_s / 60
    assert_allclose(back["excess_intensity_mm_per_h"], back["excess_mm"] / step_min * 60,
                    rtol=1e-5)
    assert np.isfinite(back["excess_mm"]).all()
