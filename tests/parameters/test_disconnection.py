"""Disconnected shares per part; TR-55's composite curve number for unconnected impervious area."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from gisrun.parameters import assign_parameters
from gisrun.parameters.disconnection import (
    Disconnection,
    assign_disconnection,
    merge_sources,
    tr55_unconnected_cn,
)


def test_tr55_formula_against_its_published_form():
    """TR-55 (1986), ch. 2, "Unconnected impervious areas" (p. 2-4) and Figure 2-4:
    CNc = CNp + (Pimp/100)(98 - CNp)(1 - 0.5R), Pimp in percent, R = unconnected / total
    impervious. Its worked example (p. 2-4, from memory; the public copy of chapter 2 found,
    a text copy at vdocuments.site, did not show that page): a 1/2-acre lot, 20 % impervious,
    75 % of it unconnected, pervious CN 61 -> composite CN 66 from Figure 2-4, and 68 from
    Figure 2-3 if all of it were connected."""
    def published(cnp, pimp_percent, r):
        return cnp + (pimp_percent / 100.0) * (98.0 - cnp) * (1.0 - 0.5 * r)

    assert round(float(tr55_unconnected_cn(61.0, 0.20, 0.75))) == 66
    assert round(float(tr55_unconnected_cn(61.0, 0.20, 0.0))) == 68  # Figure 2-3, connected
    grid = np.array([(cnp, p, r) for cnp in (39.0, 61.0, 74.0, 80.0, 96.0)
                     for p in (0.0, 5.0, 12.5, 29.9) for r in (0.0, 0.3, 0.75, 1.0)])
    assert_allclose(tr55_unconnected_cn(grid[:, 0], grid[:, 1] / 100.0, grid[:, 2]),
                    published(grid[:, 0], grid[:, 1], grid[:, 2]), rtol=1e-15)
    # all unconnected halves the impervious area's effect (the figure's R = 1.0 line)
    assert float(tr55_unconnected_cn(61.0, 0.2, 1.0)) == pytest.approx(61 + 0.2 * 37 / 2)


def _units(share_by_cover=None, cover="residential_half_acre", soil="B", **kw):
    units = pd.DataFrame({"subcatchment_id": ["S1", "S2"], "soil_class": [soil, soil],
                          "cover_class": [cover, cover], "area_m2": [1000.0, 1000.0]})
    params, sources, _ = assign_parameters(units, classification="hydrologic_soil_group",
                                           initial_saturation=0.3, method=kw.pop("method",
                                                                                 "green_ampt"),
                                           compact_provenance=True)
    spec = Disconnection(by_cover=share_by_cover or {}, **kw)
    return params, sources, *assign_disconnection(params, spec)


def test_precedence_field_over_cover_over_project():
    by_sub = pd.Series({"S1": 0.9, "S2": np.nan})
    params, _, out, sources, _ = _units({"residential_half_acre": 0.4}, project_wide=0.1,
                                        by_subcatchment=by_sub, field_where="sub.gpkg:roofs")
    imp = out[out["surface"] == "impervious"].set_index("subcatchment_id")
    assert imp.loc["S1", "disconnected_fraction"] == 0.9
    assert imp.loc["S2", "disconnected_fraction"] == 0.4
    assert (out.loc[out["surface"] == "pervious", "disconnected_fraction"] == 0).all()
    rows = sources[sources["parameter"] == "disconnected_fraction"]
    assert set(rows["source"]) == {"sub.gpkg:roofs (per subcatchment)",
                                   "[impervious.disconnected_by_cover] residential_half_acre"}
    # the other columns are untouched
    pd.testing.assert_frame_equal(out.drop(columns="disconnected_fraction"), params)


def test_project_wide_share_and_soils_that_take_no_water():
    _, _, out, _, _ = _units(project_wide=0.3, soil="rock")
    assert (out["disconnected_fraction"] == 0).all()  # rock is impervious by the soil


def test_impervious_cover_has_nowhere_to_drain_and_stays_connected():
    _, _, out, _, notes = _units({"impervious": 1.0}, cover="impervious")
    assert (out["disconnected_fraction"] == 0).all()
    assert any("no pervious ground in their unit" in n and "S1" in n for n in notes)


def test_tr55_composite_for_curve_number_units_below_30_percent():
    """Residential 1/2 acre is 25 % impervious (TR-55 1986 Table 2-2a) with the pervious part
    as open space in good condition, CN 61 for group B: both parts take CNc."""
    _, sources, out, more, notes = _units({"residential_half_acre": 0.75},
                                          method="curve_number")
    expected = 61.0 + 0.25 * (98.0 - 61.0) * (1 - 0.5 * 0.75)
    assert_allclose(out["curve_number"], expected, rtol=1e-12)
    assert (out["disconnected_fraction"] == 0).all()  # nothing left to route
    assert not notes
    merged = merge_sources(sources, more)
    cn = merged[merged["parameter"] == "curve_number"]
    assert cn["unit_parts"].sum() == len(out)  # one source per part
    assert cn["source"].str.contains("Figure 2-4").all()


def test_tr55_not_applied_at_30_percent_or_more():
    """Commercial is 85 % impervious (TR-55 1986 Table 2-2a): outside Figure 2-4's limit, the
    share is kept for routing and a note names the subcatchments."""
    _, _, out, more, notes = _units({"commercial": 0.5}, cover="commercial",
                                    method="curve_number")
    assert (out.loc[out["surface"] == "impervious", "curve_number"] == 98.0).all()
    assert (out.loc[out["surface"] == "impervious", "disconnected_fraction"] == 0.5).all()
    assert any("30 %" in n and "S1, S2" in n for n in notes)
    assert not (more["parameter"] == "curve_number").any()


def test_tr55_not_applied_with_runon_to_the_subcatchment():
    _, _, out, _, notes = _units({"residential_half_acre": 0.75}, method="curve_number",
                                 runon_to="subcatchment")
    assert (out.loc[out["surface"] == "impervious", "curve_number"] == 98.0).all()
    assert any("runon_to = 'subcatchment'" in n for n in notes)
