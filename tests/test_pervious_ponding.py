"""Issue 15 item 7: time to ponding describes pervious ground.

Impervious parts have no infiltration capacity to exceed: their time to ponding is null under
every loss method (it was 0.0 under Green-Ampt and Horton, and the time runoff starts under the
curve number), and the run summary counts subcatchments whose pervious ground ponds.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from bad_inputs_helpers import edit_toml, make_project, run_cli

from gisrun import run


@pytest.fixture
def commercial(tmp_path):
    # TR-55 (1986) Table 2-2a: commercial and business districts are 85 % impervious
    path = make_project(tmp_path / "p")
    edit_toml(path, '"5" = "open_space_good"', '"5" = "commercial"')
    return path


@pytest.mark.parametrize("method", ["green_ampt", "horton", "curve_number"])
def test_impervious_parts_have_no_time_to_ponding(commercial, method):
    edit_toml(commercial, 'name = "green_ampt"', f'name = "{method}"')
    result = run(commercial)
    units = result.storms[0].units
    impervious = units["surface"] == "impervious"
    assert impervious.any() and (~impervious).any()
    assert units.loc[impervious, "time_to_ponding_s"].isna().all()
    # their runoff still starts (the storm's 10 mm/h exceeds what impervious ground holds)
    assert (units.loc[impervious, "runoff_depth_m"] > 0).all()


def test_summary_counts_subcatchments_whose_pervious_ground_ponds(commercial, tmp_path, capsys):
    # 10 mm/h for an hour: with gisrun's shipped Green-Ampt values for groups A and B (Ks 10.9
    # and 6.5 mm/h, the suction term taking the rest) no pervious ground ponds, though the
    # impervious 85 % runs off from the start (the engines gave it time to ponding 0)
    code, out, err = run_cli(capsys, ["run", str(commercial.parent), "--json", "--no-extras",
                                      "--output", str(tmp_path / "r.gpkg")])
    assert code == 0, err
    storm = json.loads(out)["storms"][0]
    assert storm["subcatchments_ponding"] == 0
    assert storm["earliest_ponding_min"] is None
    # a storm that ponds the pervious ground: 100 mm/h for an hour
    (commercial.parent / "storm.csv").write_text(
        "time_min,intensity_mm_per_h\n0,0\n15,100\n30,100\n45,100\n60,100\n")
    code, out, err = run_cli(capsys, ["run", str(commercial.parent), "--json", "--no-extras",
                                      "--output", str(tmp_path / "r2.gpkg")])
    assert code == 0, err
    storm = json.loads(out)["storms"][0]
    result = run(commercial)
    units = result.storms[0].units
    pervious_ponds = units[units["surface"] == "pervious"].groupby("subcatchment_id")[
        "time_to_ponding_s"].min()
    assert storm["subcatchments_ponding"] == int(np.isfinite(pervious_ponds).sum()) > 0
