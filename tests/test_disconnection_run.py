"""Runs with disconnected impervious area: share 0 is today's run, compare_connected, TR-55."""

from __future__ import annotations

import numpy as np
import pandas as pd
from bad_inputs_helpers import make_project, write_subcatchments
from numpy.testing import assert_allclose

from gisrun.parameters.disconnection import tr55_unconnected_cn
from gisrun.present.layers import ponding_ranking
from gisrun.present.report import ReportFigures, build_report
from gisrun.workflow.check import check_project
from gisrun.workflow.pipeline import run

SUB_COLUMNS = ["subcatchment_id", "modelled_area_m2", "rain_depth_m", "infiltration_depth_m",
               "runoff_depth_m", "storage_depth_m", "runoff_volume_m3", "time_to_ponding_s",
               "runoff_start_s", "peak_excess_intensity_m_per_s", "impervious_fraction"]


def _project(folder, cover="residential_quarter_acre", method="green_ampt", impervious=None):
    make_project(folder)
    toml = folder / "gisrun.toml"
    text = toml.read_text().replace('"5" = "open_space_good"', f'"5" = "{cover}"')
    text = text.replace('name = "green_ampt"', f'name = "{method}"')
    if impervious is not None:
        text += "\n[impervious]\n" + impervious
    toml.write_text(text)
    return run(toml, keep_loss=True, cells=False)


def test_share_zero_gives_todays_result_exactly(tmp_path):
    """Acceptance: a stated share of 0 gives the run without disconnection, bit for bit."""
    plain = _project(tmp_path / "a")
    zero = _project(tmp_path / "b", impervious="disconnected_fraction = 0.0\n")
    for a, b in zip(plain.storms, zero.storms, strict=True):
        pd.testing.assert_frame_equal(a.subcatchments, b.subcatchments[a.subcatchments.columns])
        pd.testing.assert_frame_equal(a.units, b.units[a.units.columns])
        assert not b.subcatchments["runon_depth_m"].any()
    pd.testing.assert_frame_equal(plain.parameters,
                                  zero.parameters.drop(columns="disconnected_fraction"))


def test_compare_connected_and_the_report(tmp_path):
    """Half the roofs of quarter-acre lots (38 % impervious, TR-55 1986 Table 2-2a) onto the
    lawns: runoff falls, the connected figure is the plain run's, the report shows both."""
    plain = _project(tmp_path / "a")
    half = _project(tmp_path / "b", impervious="disconnected_fraction = 0.5\n"
                    "compare_connected = true\n")
    subs = half.storms[0].subcatchments
    assert_allclose(subs["connected_runoff_depth_m"],
                    plain.storms[0].subcatchments["runoff_depth_m"], rtol=1e-12)
    assert (subs["disconnection_difference_m"] < 0).all()
    assert (subs["runon_depth_m"] > 0).all()
    # rain = infiltration + runoff + storage over the whole subcatchment (checked in the run
    # to 1e-9 relative; the column is the remainder)
    assert (subs["mass_balance_error_m"].abs() <= 1e-9 * subs["rain_depth_m"]).all()
    html = build_report(half, ReportFigures(), ranking=ponding_ranking(half), caution="c")
    assert "Impervious area and disconnection" in html and "connected runoff volume" in html
    assert any("lumped parameters describe each subcatchment with every impervious area "
               "connected" in w for w in half.warnings)


def test_subcatchment_field_ranks_first_and_blank_falls_through(tmp_path):
    folder = tmp_path / "p"
    make_project(folder)
    write_subcatchments(folder / "sub.gpkg", roofs=[0.8, None])
    text = (folder / "gisrun.toml").read_text().replace('"5" = "open_space_good"',
                                                        '"5" = "residential_quarter_acre"')
    text = text.replace('id_field = "code"', 'id_field = "code"')
    (folder / "gisrun.toml").write_text(text + '\n[impervious]\ndisconnected_field = "roofs"\n'
                                        "[impervious.disconnected_by_cover]\n"
                                        "residential_quarter_acre = 0.0\n")
    result = run(folder / "gisrun.toml", keep_loss=True, cells=False)
    params = result.parameters
    imp = params[params["surface"] == "impervious"].groupby("subcatchment_id")
    assert_allclose(imp["disconnected_fraction"].max().to_numpy(), [0.8, 0.0])
    runon = result.storms[0].subcatchments.set_index("subcatchment_id")["runon_depth_m"]
    assert runon["S1"] > 0 and runon["S2"] == 0
    sources = result.parameter_sources
    rows = sources[sources["parameter"] == "disconnected_fraction"]
    assert rows["source"].str.contains("sub.gpkg:roofs").any()


def test_curve_number_units_take_tr55_composite(tmp_path):
    """Half-acre lots are 25 % impervious (TR-55 1986 Table 2-2a), below Figure 2-4's 30 %:
    with 60 % of it unconnected both parts run with CNc and nothing is routed."""
    result = _project(tmp_path / "p", cover="residential_half_acre", method="curve_number",
                      impervious="disconnected_fraction = 0.6\n")
    params = result.parameters
    # soils A and B of the tiny project: open space in good condition, CN 39 and 61 (Table 2-2a)
    for soil, cnp in (("A", 39.0), ("B", 61.0)):
        part = params[params["soil_class"] == soil]
        assert_allclose(part["curve_number"], tr55_unconnected_cn(cnp, 0.25, 0.6), rtol=1e-12)
    assert not result.storms[0].subcatchments["runon_depth_m"].any()
    assert result.parameter_sources["source"].str.contains("Figure 2-4").any()
    assert np.isfinite(result.storms[0].subcatchments["runoff_depth_m"]).all()


def test_check_reports_where_tr55_does_not_apply(tmp_path):
    """`gisrun check` runs the parameter step: the note naming the subcatchments outside
    Figure 2-4's limit (commercial, 85 % impervious, TR-55 1986 Table 2-2a) is among its notes."""
    folder = tmp_path / "p"
    make_project(folder)
    toml = folder / "gisrun.toml"
    text = toml.read_text().replace('"5" = "open_space_good"', '"5" = "commercial"')
    toml.write_text(text.replace('name = "green_ampt"', 'name = "curve_number"')
                    + "\n[impervious]\ndisconnected_fraction = 0.4\n")
    problems, notes, _ = check_project(folder)
    assert problems == []
    assert any("Figure 2-4 applies only below 30 %" in n and "S1, S2" in n for n in notes)
