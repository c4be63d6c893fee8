"""Parameter values given as fields of the subcatchment layer override the shipped tables."""

import pytest
from bad_inputs_helpers import edit_toml, make_project, write_subcatchments

from gisrun import load_project, run
from gisrun.errors import ProjectFileError


def curve_number_runoff_in(p_in, cn):
    # NRCS TR-55 (1986) eqs. 2-1 to 2-4: S = 1000/CN - 10, Ia = 0.2 S, Q = (P - Ia)^2 / (P - Ia + S)
    s = 1000.0 / cn - 10.0
    return (p_in - 0.2 * s) ** 2 / (p_in + 0.8 * s)


@pytest.fixture
def project(tmp_path):
    path = make_project(tmp_path / "p")
    # S1 carries its own curve number; S2 leaves the field empty and keeps the table's value
    write_subcatchments(tmp_path / "p" / "sub.gpkg", curve_number=[80.0, None])
    edit_toml(path, 'id_field = "code"', 'id_field = "code"\nparameter_fields = ["curve_number"]')
    edit_toml(path, 'name = "green_ampt"', 'name = "curve_number"')
    edit_toml(path, 'kind = "file"\npath = "storm.csv"',
              'kind = "uniform"\ndepth = 127.0\nduration_min = 60')  # 5 in
    return path


def test_layer_field_overrides_the_table_for_that_subcatchment_only(project):
    result = run(project)
    subs = result.storms[0].subcatchments.set_index("subcatchment_id")
    runoff_in = subs["runoff_depth_m"] / 0.0254
    # TR-55 (1986) Table 2-1 lists 2.89 in of runoff for P = 5.0 in and CN = 80 (from memory);
    # the equation gives 2.893 in
    assert runoff_in["S1"] == pytest.approx(curve_number_runoff_in(5.0, 80), rel=1e-9)
    assert runoff_in["S1"] == pytest.approx(2.89, abs=0.005)
    # S2 (group B, open space in good condition): TR-55 Table 2-2a gives CN 61
    assert runoff_in["S2"] == pytest.approx(curve_number_runoff_in(5.0, 61), rel=1e-9)
    sources = result.parameter_sources
    cn_sources = set(sources.loc[sources["parameter"] == "curve_number", "source"])
    assert any("id=S1" in text for text in cn_sources)  # the layer field is named as the source
    assert any("Table 2-2a" in text for text in cn_sources)  # S2 keeps TR-55


def test_parameter_fields_must_be_a_list(tmp_path):
    path = make_project(tmp_path / "q")
    edit_toml(path, 'id_field = "code"', 'id_field = "code"\nparameter_fields = "curve_number"')
    with pytest.raises(ProjectFileError, match=r"parameter_fields.*list of field names"):
        load_project(path)
