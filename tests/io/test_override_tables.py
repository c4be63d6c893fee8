"""Reading a user's parameter override CSV: units in column names, SI out, errors."""

import pandas as pd
import pytest
from numpy.testing import assert_allclose

from gisrun.errors import ParameterError
from gisrun.io.tables import read_parameter_overrides
from gisrun.parameters import assign_parameters


def write(tmp_path, text, name="my_parameters.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_published_units_are_converted_to_si(tmp_path):
    path = write(tmp_path, (
        "# measured in the park\n"
        "soil_class,cover_class,ks_mm_per_h,suction_head_cm,depression_storage_in,"
        "horton_decay_per_h,horton_f0_in_per_h\n"
        "\n"
        "B,open_space_good,36,10,0.1,3.6,2\n"))
    table = read_parameter_overrides(path)
    row = table.iloc[0]
    assert_allclose(row["ks_m_per_s"], 1e-5)  # 36 mm/h = 36e-3 m / 3600 s
    assert_allclose(row["suction_head_m"], 0.10)
    assert_allclose(row["depression_storage_m"], 0.00254)  # 1 in = 25.4 mm exactly
    assert_allclose(row["horton_decay_per_s"], 1e-3)
    assert_allclose(row["horton_f0_m_per_s"], 2 * 0.0254 / 3600)
    assert row["override_source"] == f"{path}:line 4"
    assert row["subcatchment_id"] is None and row["surface"] is None


def test_si_columns_pass_unchanged_and_blank_cells_set_nothing(tmp_path):
    path = write(tmp_path, "subcatchment_id,ks_m_per_s,curve_number,loss_method\n"
                           "S1,2e-6,,\nS2,,72,Curve_Number\n")
    table = read_parameter_overrides(path)
    assert_allclose(table["ks_m_per_s"].iloc[0], 2e-6)
    assert pd.isna(table["ks_m_per_s"].iloc[1]) and pd.isna(table["curve_number"].iloc[0])
    assert list(table["loss_method"]) == [None, "curve_number"]


def test_file_overrides_flow_into_assignment_with_provenance(tmp_path):
    path = write(tmp_path, "soil_class,ks_in_per_h\nA,0.5\n")
    units = pd.DataFrame({"subcatchment_id": ["S1"], "soil_class": ["A"],
                          "cover_class": ["meadow"], "area_m2": [10.0]})
    params, prov, _ = assign_parameters(
        units, classification="hydrologic_soil_group", initial_saturation=0.2,
        method="green_ampt", overrides=read_parameter_overrides(path))
    assert_allclose(params["ks_m_per_s"].iloc[0], 0.5 * 0.0254 / 3600)
    ks_source = prov.loc[prov["parameter"] == "ks_m_per_s", "source"].iloc[0]
    assert ks_source == f"{path}:line 2"


@pytest.mark.parametrize(("text", "pattern"), [
    ("soil_class,ks_mm_per_h\nA,fast\n", r"my_parameters.csv:line 2:ks_mm_per_h: value 'fast'"),
    ("soil_class,ks_mm_per_h\nA,-3\n", r"my_parameters.csv:line 2:ks_mm_per_h.*greater than 0"),
    ("soil_class,ks_mm_per_h\nA,0\n", r"line 2:ks_mm_per_h.*greater than 0"),
    ("soil_class,effective_porosity\nA,1.3\n", r"line 2:effective_porosity.*porosity"),
    ("soil_class,suction_head_mm\n# note\nA,10\nA,20\n", r"line 4: has the same keys as line 3"),
    ("soil_class,ks_mm_per_h,ks_in_per_h\nA,1,2\n", r"ks_in_per_h: gives the same parameter"),
    ("soil_class,conductivity\nA,1\n",
     r"my_parameters.csv:conductivity: is not a parameter column"),
    ("soil_class,surface,curve_number\nA,roof,90\n", r"line 2:surface: value 'roof'"),
    ("ks_mm_per_h\n3\n", r"line 2: has no subcatchment_id, soil_class or cover_class"),
    ("soil_class,loss_method\nA,greenampt\n", r"line 2:loss_method.*did you mean 'green_ampt'"),
    ("soil_class,ks_mm_per_h\nA,1,2\n", r"line 2: has a different number of fields"),
    ("# only a comment\n", r"my_parameters.csv: has no header and data rows"),
])
def test_bad_files_name_file_line_and_column(tmp_path, text, pattern):
    path = write(tmp_path, text)
    with pytest.raises(ParameterError, match=pattern) as info:
        read_parameter_overrides(path)
    assert "\n" not in str(info.value)


def test_missing_file(tmp_path):
    with pytest.raises(ParameterError, match=r"nope.csv: does not exist"):
        read_parameter_overrides(tmp_path / "nope.csv")


def test_excel_bom_is_accepted(tmp_path):
    path = tmp_path / "bom.csv"
    path.write_bytes("\ufeffcover_class,curve_number\nmeadow,65\n".encode())
    assert read_parameter_overrides(path)["curve_number"].iloc[0] == 65
