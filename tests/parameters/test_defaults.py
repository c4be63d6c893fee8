"""Shipped values come from each parameter's declared default rule."""

import dataclasses
import io

import pandas as pd
import pytest

import gisrun.parameters.defaults as defaults
from gisrun.engine import PARAMETERS
from gisrun.errors import ParameterError
from gisrun.parameters import assign_parameters
from gisrun.parameters import tables as T

MM_PER_H = 0.001 / 3600.0  # m/s


def _units():
    return pd.DataFrame({"subcatchment_id": ["S1", "S1"], "soil_class": ["A", "C"],
                         "cover_class": ["unspecified", "unspecified"], "area_m2": [1.0, 2.0]})


def _assign(**kw):
    return assign_parameters(_units(), classification="hydrologic_soil_group",
                             initial_saturation=0.3, method="phi_index", **kw)


def test_a_table_default_needs_only_the_table(monkeypatch):
    """A parameter declared ``default="table:<name>"`` reads its column, converted to SI."""
    text = ("hydrologic_soil_group,phi_index_mm_per_h\nA,7.5\nB,5\nC,2.5\nD,1\n")
    table = T.ShippedTable("extra", "A made-up rate by group", ["title: made up"],
                           pd.read_csv(io.StringIO(text)))
    monkeypatch.setattr(defaults, "read_shipped_table", lambda name: table)
    declared = dataclasses.replace(PARAMETERS["phi_index_m_per_s"], default="table:extra")
    monkeypatch.setitem(PARAMETERS, "phi_index_m_per_s", declared)
    params, provenance, _ = _assign()
    pervious = params[params["surface"] == "pervious"].set_index("soil_class")
    assert pervious.loc["A", "phi_index_m_per_s"] == pytest.approx(7.5 * MM_PER_H, rel=1e-12)
    assert pervious.loc["C", "phi_index_m_per_s"] == pytest.approx(2.5 * MM_PER_H, rel=1e-12)
    sources = provenance[provenance["parameter"] == "phi_index_m_per_s"]["source"]
    assert sources.str.contains("A made-up rate by group").all()


def test_a_table_without_the_parameter_column_is_named(monkeypatch):
    table = T.ShippedTable("extra", "t", [], pd.DataFrame({"hydrologic_soil_group": ["A"],
                                                            "other_mm": [1.0]}))
    monkeypatch.setattr(defaults, "read_shipped_table", lambda name: table)
    declared = dataclasses.replace(PARAMETERS["phi_index_m_per_s"], default="table:extra")
    monkeypatch.setitem(PARAMETERS, "phi_index_m_per_s", declared)
    with pytest.raises(ParameterError, match="parameter table extra: has no single"):
        _assign()


def test_shipped_defaults_follow_the_declarations():
    """Group A phi-index: midpoint of 0.30-0.45 in/h, TR-55 (1986) App. A (from memory)."""
    params, provenance, _ = _assign()
    a = params[(params["surface"] == "pervious") & (params["soil_class"] == "A")].iloc[0]
    assert a["phi_index_m_per_s"] == pytest.approx(0.375 * 0.0254 / 3600.0, rel=1e-12)
    imp = params[params["surface"] == "impervious"]
    assert imp.empty  # "unspecified" cover is fully pervious
