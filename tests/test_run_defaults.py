"""Project-wide curve-number and Green-Ampt choices reach every unit, checked against formulas."""

import pytest
from bad_inputs_helpers import edit_toml, make_project

from gisrun import load_project, run
from gisrun.errors import ProjectFileError


def tr55_runoff_in(p_in, s_in, ratio):
    # NRCS TR-55 (1986) eq. 2-1 with Ia = ratio x S: Q = (P - Ia)^2 / (P - Ia + S)
    ia = ratio * s_in
    return (p_in - ia) ** 2 / (p_in - ia + s_in) if p_in > ia else 0.0


def five_inch_curve_number_project(tmp_path, extra=""):
    path = make_project(tmp_path / "p")
    edit_toml(path, 'name = "green_ampt"', 'name = "curve_number"' + extra)
    edit_toml(path, 'kind = "file"\npath = "storm.csv"',
              'kind = "uniform"\ndepth = 127.0\nduration_min = 60')  # P = 5 in
    return path


def runoff_in(path, sub_id):
    subs = run(path).storms[0].subcatchments.set_index("subcatchment_id")
    return subs.loc[sub_id, "runoff_depth_m"] / 0.0254


def test_antecedent_condition_three(tmp_path):
    path = five_inch_curve_number_project(tmp_path, "\nantecedent_condition = 3")
    # S2 is group B open space in good condition: CN(II) = 61 (TR-55 1986 Table 2-2a)
    # CN(III) = 23 CN(II) / (10 + 0.13 CN(II)) (Chow, Maidment & Mays 1988 eq. 5.5.5)
    cn3 = 23 * 61 / (10 + 0.13 * 61)
    assert runoff_in(path, "S2") == pytest.approx(tr55_runoff_in(5.0, 1000 / cn3 - 10, 0.2),
                                                  rel=1e-9)


def test_initial_abstraction_ratio_005(tmp_path):
    path = five_inch_curve_number_project(tmp_path, "\ninitial_abstraction_ratio = 0.05")
    # S(0.05) = 1.33 S(0.20)^1.15 in inches (Hawkins et al. 2002; Woodward et al. 2003)
    s005 = 1.33 * (1000 / 61 - 10) ** 1.15
    assert runoff_in(path, "S2") == pytest.approx(tr55_runoff_in(5.0, s005, 0.05), rel=1e-9)
    # the 0.05 basis differs from the 0.2 one (a wrong program that ignored the key would not)
    assert abs(runoff_in(path, "S2") - tr55_runoff_in(5.0, 1000 / 61 - 10, 0.2)) > 0.05


def test_initial_water_content_sets_the_moisture_deficit(tmp_path):
    path = make_project(tmp_path / "w")
    edit_toml(path, 'classification = "hydrologic_soil_group"',
              'classification = "hydrologic_soil_group"\ninitial_water_content = 0.25')
    params = run(path).parameters
    pervious = params[params["surface"] == "pervious"].set_index("soil_class")
    # moisture deficit = total porosity - initial water content (Chow et al. 1988 sec. 4.3);
    # total porosities of the groups' representative textures, Rawls, Brakensiek & Miller
    # (1983): sandy loam 0.453 (group A), silt loam 0.501 (group B) (from memory)
    assert pervious.loc["A", "moisture_deficit"] == pytest.approx(0.453 - 0.25)
    assert pervious.loc["B", "moisture_deficit"] == pytest.approx(0.501 - 0.25)


@pytest.mark.parametrize(("key", "match"), [
    ("antecedent_condition = 4", r"antecedent_condition.*use one of"),
    ("initial_abstraction_ratio = 0.1", r"initial_abstraction_ratio.*use one of"),
])
def test_bad_run_defaults_name_the_key(tmp_path, key, match):
    path = five_inch_curve_number_project(tmp_path, "\n" + key)
    with pytest.raises(ProjectFileError, match=match):
        load_project(path)


def test_water_content_and_saturation_together_is_an_error(tmp_path):
    path = make_project(tmp_path / "b")
    edit_toml(path, 'classification = "hydrologic_soil_group"',
              'classification = "hydrologic_soil_group"\ninitial_water_content = 0.2\n'
              'initial_saturation = 0.3')
    with pytest.raises(ProjectFileError, match="initial_water_content.*keep only one"):
        load_project(path)
