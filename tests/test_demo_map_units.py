"""The demo's map-unit-key soil raster with its attribute table gives the typed-codes results.

``demo_catchment/gisrun_map_units.toml`` reads ``soil_map_units.tif`` (invented map-unit keys)
and ``soil_map_units.csv`` (a third of its groups left blank and derived by the NEH 630 Ch. 7
criteria); ``gisrun.toml`` reads the same map as typed group codes. Both are written by
``demo_catchment/make_demo.py``.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from gisrun import load_project, overlay_inputs, prepare_parameters, read_inputs, run
from gisrun.workflow.checksums import input_checksums

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


def _pair():
    return load_project(DEMO / "gisrun.toml"), load_project(DEMO / "gisrun_map_units.toml")


def test_demo_table_derives_groups_and_lists_what_it_gave():
    _, keyed = _pair()
    table = pd.read_csv(DEMO / "soil_map_units.csv", dtype=str, keep_default_na=False)
    assert keyed.soil.keys.derived_groups == (table["hydrologic_soil_group"] == "").sum() > 0
    assert "map_unit_name" in keyed.soil.keys.unused
    assert len(keyed.soil.codes) == len(table)
    # the table is an input like the raster: hashed for the run's checksums, never an output
    assert "soil_map_units.csv" in input_checksums(keyed)
    assert keyed.input_files()["soil attribute table"] == DEMO / "soil_map_units.csv"


def test_demo_keys_give_the_typed_units_and_parameters_exactly():
    typed, keyed = _pair()
    a_in, b_in = read_inputs(typed), read_inputs(keyed)
    a_units, a_cov, _ = overlay_inputs(typed, a_in)
    b_units, b_cov, _ = overlay_inputs(keyed, b_in)
    pd.testing.assert_frame_equal(a_units, b_units, check_exact=True)
    pd.testing.assert_frame_equal(a_cov, b_cov, check_exact=True)
    a_params = prepare_parameters(typed, a_in, a_units)[0]
    b_params = prepare_parameters(keyed, b_in, b_units)[0]
    pd.testing.assert_frame_equal(a_params, b_params, check_exact=True)


@pytest.mark.slow
def test_demo_keys_give_the_typed_results_exactly():
    typed, keyed = _pair()
    a, b = run(typed), run(keyed)
    for sa, sb in zip(a.storms, b.storms, strict=True):
        pd.testing.assert_frame_equal(sa.subcatchments, sb.subcatchments, check_exact=True)
        pd.testing.assert_frame_equal(sa.units, sb.units, check_exact=True)
