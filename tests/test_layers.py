"""Output layers: a storm's subcatchment table joined with coverage and soil shares."""

from __future__ import annotations

import dataclasses
from pathlib import Path
from types import SimpleNamespace

import pandas as pd
from numpy.testing import assert_allclose

import gisrun.present.layers as layers
from gisrun import load_project, run
from gisrun.aggregate import soil_shares
from gisrun.present.layers import layer_name, storm_layer_name, subcatchment_table

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


def test_subcatchment_table_adds_coverage_and_area_weighted_soil_shares():
    units = pd.DataFrame({"subcatchment_id": ["a", "a", "b"], "soil_class": ["A", "B/D", "A"],
                          "cover_class": ["grass", "grass", "grass"],
                          "area_m2": [30.0, 10.0, 5.0]})
    coverage = pd.DataFrame({"subcatchment_id": ["a", "b"], "area_m2": [40.0, 6.0],
                             "nodata_fraction": [0.0, 1 / 6]})
    storm = SimpleNamespace(subcatchments=pd.DataFrame(
        {"subcatchment_id": ["b", "a"], "area_m2": [5.0, 40.0], "runoff_depth_m": [0.01, 0.02]}),
        hyetograph=SimpleNamespace(reduction=None))
    result = SimpleNamespace(units=units, coverage=coverage)
    table = subcatchment_table(result, storm).set_index("subcatchment_id")
    # hand-computed: a is 30 of 40 m2 soil A and 10 of 40 m2 B/D; b is all A
    assert_allclose(table.loc["a", ["soil_A_fraction", "soil_B_D_fraction"]], [0.75, 0.25])
    assert_allclose(table.loc["b", ["soil_A_fraction", "soil_B_D_fraction"]], [1.0, 0.0])
    assert_allclose(table.loc["b", "area_m2_coverage"], 6.0)  # the polygon's, kept apart
    assert list(table.index) == ["b", "a"]  # the storm's row order is kept


def test_layer_names_are_geopackage_safe():
    assert storm_layer_name("10-yr / 24 h") == "runoff_10_yr_24_h"
    assert layer_name("2yr") == "l_2yr"  # an SQL name needs no quoting (common practice)


def test_the_soil_shares_are_made_once_for_every_storm_layer(monkeypatch):
    # Every storm's polygon layer and the subcatchment_results table carry the same soil shares
    # (they do not depend on the storm): made once per run's layers, not once per table.
    project = load_project(DEMO)
    result = run(dataclasses.replace(project, storms=project.storms[:2]))
    made = []
    monkeypatch.setattr(layers, "soil_shares", lambda *a: made.append(1) or soil_shares(*a))
    built = layers.build_layers(result)
    assert len(made) == 1
    for storm in result.storms:
        got = built[storm.layer_name].set_index("subcatchment_id")
        alone = layers.present_frame(subcatchment_table(result, storm), project.units)
        alone = alone.set_index("subcatchment_id").loc[got.index]
        assert got["soil_A_fraction"].tolist() == alone["soil_A_fraction"].tolist()
    assert len(made) == 3  # each table on its own (the calls above) makes its own
