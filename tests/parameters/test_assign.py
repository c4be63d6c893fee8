"""Assignment of unit parameters: splitting, groups, precedence, validation."""

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from gisrun.errors import ParameterError
from gisrun.parameters import assign_parameters, composite_parameters

CM_PER_H = 0.01 / 3600.0
IN_PER_H = 0.0254 / 3600.0


def units(*rows):
    return pd.DataFrame(rows, columns=["subcatchment_id", "soil_class", "cover_class", "area_m2"])


def assign(table, **kw):
    kw.setdefault("classification", "hydrologic_soil_group")
    kw.setdefault("initial_saturation", 0.25)
    kw.setdefault("method", "green_ampt")
    return assign_parameters(table, **kw)


def part(params, surface, **keys):
    sel = params["surface"] == surface
    for key, value in keys.items():
        sel &= params[key] == value
    assert sel.sum() == 1
    return params[sel].iloc[0]


def source(provenance, parameter, surface="pervious", **keys):
    sel = (provenance["parameter"] == parameter) & (provenance["surface"] == surface)
    for key, value in keys.items():
        sel &= provenance[key] == value
    assert sel.sum() == 1
    return provenance.loc[sel, "source"].iloc[0]


def test_split_by_impervious_fraction_keeps_area():
    # TR-55 (1986) Table 2-2a: 1/4 acre lots are 38 % impervious
    p, _, _ = assign(units(("S1", "B", "residential_quarter_acre", 1000.0)))
    assert_allclose(part(p, "pervious")["area_m2"], 620.0)
    assert_allclose(part(p, "impervious")["area_m2"], 380.0)
    assert_allclose(p["area_m2"].sum(), 1000.0)


def test_pervious_part_gets_soil_and_pervious_cn():
    table = units(("S1", "B", "residential_quarter_acre", 1000.0))
    p, _, _ = assign(table, initial_saturation=0.25)
    perv = part(p, "pervious")
    # group B representative texture silt loam (common practice): Rawls et al. (1983),
    # Chow et al. (1988) Table 4.3.1 (from memory): K 0.65 cm/h, psi 16.68 cm, theta_e 0.486
    assert_allclose(perv["ks_m_per_s"], 0.65 * CM_PER_H)
    assert_allclose(perv["suction_head_m"], 0.1668)
    assert_allclose(perv["moisture_deficit"], 0.486 * (1 - 0.25))
    # TR-55 (1986) Table 2-2a footnote: pervious urban area = open space good, B -> 61
    assert perv["curve_number"] == 61
    # constant loss / phi default: midpoint of TR-55 App. A range for B, 0.225 in/h
    assert_allclose(perv["constant_loss_m_per_s"], 0.225 * IN_PER_H)
    assert_allclose(perv["phi_index_m_per_s"], 0.225 * IN_PER_H)
    # initial loss = depression storage (5 mm, common practice) + group B 7.5 mm
    assert_allclose(perv["initial_loss_m"], 0.0125)
    assert perv["initial_abstraction_ratio"] == 0.2 and perv["antecedent_condition"] == 2
    assert perv["hydrologic_soil_group"] == "B"


def test_impervious_part_takes_no_water():
    p, _, _ = assign(units(("S1", "C", "commercial", 100.0)),
                     impervious_depression_storage_m=0.002)
    imp = part(p, "impervious")
    for col in ("ks_m_per_s", "horton_f0_m_per_s", "horton_fc_m_per_s",
                "constant_loss_m_per_s", "phi_index_m_per_s"):
        assert imp[col] == 0.0
    assert imp["curve_number"] == 98  # TR-55 (1986) Table 2-2a
    assert imp["depression_storage_m"] == 0.002
    assert_allclose(imp["area_m2"], 85.0)  # TR-55 (1986): commercial 85 % impervious


def test_zero_area_parts_are_dropped_and_unspecified_cover_is_open_space_good():
    p, prov, _ = assign(units(("S1", "A", "impervious", 50.0), ("S1", "D", "unspecified", 50.0),
                              ("S2", "B", "meadow", 0.0)))
    assert list(p["surface"]) == ["impervious", "pervious"]
    # open space, good condition, group D: CN 80 (TR-55 1986 Table 2-2a)
    assert part(p, "pervious")["curve_number"] == 80
    assert "cover unspecified" in source(prov, "curve_number", soil_class="D")


@pytest.mark.parametrize("soil", ["water", "rock"])
def test_water_and_rock_behave_as_impervious(soil):
    p, _, _ = assign(units(("S1", soil, "open_space_good", 10.0)))
    assert list(p["surface"]) == ["impervious"]
    assert p["curve_number"].iloc[0] == 98 and p["ks_m_per_s"].iloc[0] == 0.0


@pytest.mark.parametrize(("condition", "group", "cn"),
                         [("drained", "B", 61), ("undrained", "D", 80)])
def test_dual_groups(condition, group, cn):
    # NRCS NEH 630 Ch. 7 (2009): dual groups are the first letter when drained, D when not;
    # open space good B = 61, D = 80 (TR-55 1986 Table 2-2a)
    p, prov, _ = assign(units(("S1", "B/D", "open_space_good", 10.0)),
                        dual_group_condition=condition)
    assert p["hydrologic_soil_group"].iloc[0] == group
    assert p["curve_number"].iloc[0] == cn
    assert "NEH 630" in source(prov, "curve_number")


def test_texture_classification_uses_rawls_values_and_texture_group():
    table = units(("S1", "clay", "woods_good", 10.0), ("S1", "sand", "woods_good", 10.0))
    p, prov, warns = assign(table, classification="texture")
    clay, sand = part(p, "pervious", soil_class="clay"), part(p, "pervious", soil_class="sand")
    assert_allclose(clay["ks_m_per_s"], 0.03 * CM_PER_H)  # Chow et al. 1988 Table 4.3.1
    assert_allclose(sand["ks_m_per_s"], 11.78 * CM_PER_H)
    # TR-55 (1986) App. A: clay -> D, sand -> A; woods good D 77, A 30 (Table 2-2c)
    assert (clay["curve_number"], sand["curve_number"]) == (77, 30)
    assert "TR-55 (1986) App. A" in source(prov, "curve_number", soil_class="clay")
    assert warns == []


def test_silt_texture_uses_silt_loam_with_a_warning():
    p, _, warns = assign(units(("S1", "silt", "meadow", 10.0)), classification="texture")
    assert_allclose(p["suction_head_m"].iloc[0], 0.1668)
    assert len(warns) == 1 and "silt" in str(warns[0])


def test_per_subcatchment_method_overrides_default():
    attrs = pd.DataFrame({"subcatchment_id": ["S2"], "loss_method": ["Horton"]})
    p, prov, _ = assign(units(("S1", "A", "commercial", 10.0), ("S2", "A", "commercial", 10.0)),
                        method="curve_number", subcatchment_attributes=attrs)
    assert set(p.loc[p["subcatchment_id"] == "S1", "loss_method"]) == {"curve_number"}
    assert set(p.loc[p["subcatchment_id"] == "S2", "loss_method"]) == {"horton"}  # both parts
    s2_source = source(prov, "loss_method", "impervious", subcatchment_id="S2")
    assert "subcatchment attribute" in s2_source


def test_override_precedence_and_provenance():
    table = units(("S1", "B", "meadow", 10.0), ("S2", "B", "meadow", 10.0),
                  ("S3", "B", "meadow", 10.0), ("S4", "B", "woods_good", 10.0),
                  ("S5", "C", "woods_good", 10.0))
    overrides = pd.DataFrame({
        "subcatchment_id": [None, None, None, "S2", None],
        "soil_class": ["B", None, "B", None, None],
        "cover_class": [None, "meadow", "meadow", None, "woods_good"],
        "ks_mm_per_h": [1.0, 2.0, 3.0, 4.0, None],
        "depression_storage_mm": [None, 9.0, None, None, 8.0],
    })
    attrs = pd.DataFrame({"subcatchment_id": ["S3"], "ks_mm_per_h": [5.0]})
    p, prov, _ = assign(table, overrides=overrides, subcatchment_attributes=attrs)
    ks = p.set_index("subcatchment_id")["ks_m_per_s"] * 1000 * 3600  # back to mm/h
    # S1: soil+cover row (3) beats soil-alone (1) and cover-alone (2)
    # S2: subcatchment row (4) beats soil+cover; S3: attribute (5) beats all
    # S4: soil-alone row (1) applies (woods); S5: no ks row -> shipped group C value
    assert_allclose(ks[["S1", "S2", "S3", "S4"]], [3.0, 4.0, 5.0, 1.0])
    assert_allclose(ks["S5"], 0.15 * 10)  # sandy clay loam 0.15 cm/h (Rawls 1983)
    assert source(prov, "ks_m_per_s", subcatchment_id="S1") == "overrides:row 3"
    assert source(prov, "ks_m_per_s", subcatchment_id="S2") == "overrides:row 4"
    assert "subcatchment attribute" in source(prov, "ks_m_per_s", subcatchment_id="S3")
    assert "Rawls" in source(prov, "ks_m_per_s", subcatchment_id="S5")
    # cover-alone depression storage; initial loss re-derived from it (+ group B 7.5 mm)
    s1 = part(p, "pervious", subcatchment_id="S1")
    assert_allclose([s1["depression_storage_m"], s1["initial_loss_m"]], [0.009, 0.0165])
    assert "overrides:row 2" in source(prov, "initial_loss_m", subcatchment_id="S1")


def test_effective_porosity_override_rederives_deficit():
    overrides = pd.DataFrame({"soil_class": ["A"], "effective_porosity": [0.3]})
    p, prov, _ = assign(units(("S1", "A", "meadow", 1.0)), overrides=overrides,
                        initial_saturation=0.5)
    assert_allclose(p["moisture_deficit"].iloc[0], 0.15)
    assert "overrides:row 1" in source(prov, "moisture_deficit")


def test_override_on_impervious_surface():
    overrides = pd.DataFrame({"cover_class": ["impervious"], "surface": ["impervious"],
                              "depression_storage_mm": [3.0]})
    p, _, _ = assign(units(("S1", "A", "impervious", 1.0), ("S1", "A", "commercial", 1.0)),
                     overrides=overrides)
    ds = p.set_index("cover_class")["depression_storage_m"]
    assert_allclose(ds["impervious"], 0.003)
    assert_allclose(part(p, "impervious", cover_class="commercial")["depression_storage_m"], 0.0015)


def test_unused_override_row_warns():
    overrides = pd.DataFrame({"subcatchment_id": ["S9"], "curve_number": [70]})
    _, _, warns = assign(units(("S1", "A", "meadow", 1.0)), overrides=overrides)
    assert [str(w) for w in warns] == [
        "overrides:row 1 (subcatchment_id=S9): matches no unit; it was not used"]


def test_composite_curve_number_is_area_weighted():
    p, _, _ = assign(units(("S1", "C", "residential_quarter_acre", 1000.0)))
    comp = composite_parameters(p)
    # TR-55 (1986): 0.38 x 98 + 0.62 x 74 = 83.12, published 83 for 1/4 acre C
    assert_allclose(comp["curve_number"].iloc[0], 83.12)
    assert abs(comp["curve_number"].iloc[0] - 83) <= 1
    # ks arithmetic over the whole area, impervious at 0 (common practice, our choice)
    perv = part(p, "pervious")
    assert_allclose(comp["ks_m_per_s"].iloc[0], 0.62 * perv["ks_m_per_s"])
    assert_allclose(comp["suction_head_m"].iloc[0], perv["suction_head_m"])  # pervious only
    assert_allclose(comp["impervious_fraction"].iloc[0], 0.38)
    assert_allclose(comp["area_m2"].iloc[0], 1000.0)


def test_composite_refuses_mixed_methods():
    attrs = pd.DataFrame({"subcatchment_id": ["S1"], "loss_method": ["horton"]})
    overrides = pd.DataFrame({"subcatchment_id": ["S1"], "cover_class": ["meadow"],
                              "loss_method": ["phi_index"]})
    p, _, _ = assign(units(("S1", "A", "meadow", 1.0), ("S1", "A", "woods_good", 1.0)),
                     overrides=overrides)
    with pytest.raises(ParameterError, match="subcatchment S1.*loss_method"):
        composite_parameters(p)
    p, _, _ = assign(units(("S1", "A", "meadow", 1.0)), overrides=overrides,
                     subcatchment_attributes=attrs)
    assert composite_parameters(p)["loss_method"].iloc[0] == "horton"


# --- validation: every error names the culprit -------------------------------------

def test_unknown_soil_class_names_it_and_suggests():
    with pytest.raises(ParameterError, match=r"soil class 'B/E'.*did you mean 'B/D'.*A, B, C, D"):
        assign(units(("S1", "B/E", "meadow", 1.0)))


def test_unknown_texture_names_it():
    with pytest.raises(ParameterError, match=r"'silty lome'.*did you mean 'silt loam'"):
        assign(units(("S1", "silty lome", "meadow", 1.0)), classification="texture")


def test_texture_label_under_group_classification_is_refused():
    with pytest.raises(ParameterError, match="'loam'"):
        assign(units(("S1", "loam", "meadow", 1.0)))


def test_unknown_cover_class_names_it_and_suggests():
    with pytest.raises(ParameterError, match=r"cover class 'woods_god'.*did you mean 'woods_good'"):
        assign(units(("S1", "A", "woods_god", 1.0)))


@pytest.mark.parametrize("value", [-0.1, 1.2, float("nan")])
def test_initial_saturation_outside_0_1(value):
    with pytest.raises(ParameterError, match="initial_saturation"):
        assign(units(("S1", "A", "meadow", 1.0)), initial_saturation=value)


def test_bad_options_and_areas():
    with pytest.raises(ParameterError, match="dual_group_condition.*'wet'"):
        assign(units(("S1", "A", "meadow", 1.0)), dual_group_condition="wet")
    with pytest.raises(ParameterError, match="classification.*'usda'"):
        assign(units(("S1", "A", "meadow", 1.0)), classification="usda")
    with pytest.raises(ParameterError, match="'green_amp'.*did you mean 'green_ampt'"):
        assign(units(("S1", "A", "meadow", 1.0)), method="green_amp")
    with pytest.raises(ParameterError, match="row 2:area_m2"):
        assign(units(("S1", "A", "meadow", 1.0), ("S1", "B", "meadow", -5.0)))


@pytest.mark.parametrize(("column", "value", "pattern"), [
    ("ks_mm_per_h", 0.0, "row 1:ks_mm_per_h.*greater than 0"),
    ("ks_m_per_s", -1e-6, "ks_m_per_s.*greater than 0"),
    ("effective_porosity", 1.4, "effective_porosity.*porosity"),
    ("total_porosity", 0.0, "total_porosity.*porosity"),
    ("moisture_deficit", -0.1, "moisture_deficit.*0 and 1"),
    ("curve_number", 101, "curve_number.*100"),
])
def test_override_values_out_of_range(column, value, pattern):
    overrides = pd.DataFrame({"soil_class": ["A"], column: [value]})
    with pytest.raises(ParameterError, match=pattern):
        assign(units(("S1", "A", "meadow", 1.0)), overrides=overrides)


def test_moisture_deficit_above_porosity_names_the_unit():
    # sandy loam (group A representative) total porosity 0.453 (Rawls et al. 1983)
    overrides = pd.DataFrame({"soil_class": ["A"], "moisture_deficit": [0.6]})
    culprit = r"subcatchment S1, soil A, cover meadow: moisture_deficit"
    with pytest.raises(ParameterError, match=culprit):
        assign(units(("S1", "A", "meadow", 1.0)), overrides=overrides)


def test_override_names_unknown_labels_and_columns():
    with pytest.raises(ParameterError, match=r"row 1:soil_class.*'Q'"):
        assign(units(("S1", "A", "meadow", 1.0)),
               overrides=pd.DataFrame({"soil_class": ["Q"], "curve_number": [70]}))
    with pytest.raises(ParameterError, match=r"ks_mm_per_hour.*did you mean 'ks_mm_per_h'"):
        assign(units(("S1", "A", "meadow", 1.0)),
               overrides=pd.DataFrame({"soil_class": ["A"], "ks_mm_per_hour": [3.0]}))


def test_shared_work_equals_unit_by_unit_assignment():
    # Parameters are worked out once per distinct soil x cover x surface (and per subcatchment
    # only where an override or attribute names it). Reference: the same units assigned one
    # subcatchment at a time, where no sharing across subcatchments can happen.
    rng = np.random.default_rng(7)
    soils, covers = ["A", "B", "C", "D", "B/D"], ["meadow", "commercial", "woods_good",
                                                  "residential_quarter_acre", "unspecified"]
    table = units(*[(f"S{rng.integers(12)}", soils[rng.integers(5)], covers[rng.integers(5)],
                     float(rng.uniform(1, 100))) for _ in range(200)])
    overrides = pd.DataFrame({"subcatchment_id": ["S3", None], "soil_class": [None, "C"],
                              "cover_class": [None, "meadow"], "ks_mm_per_h": [4.0, 0.7]})
    attrs = pd.DataFrame({"subcatchment_id": ["S5", "S9"], "curve_number": [77.0, None],
                          "loss_method": [None, "horton"]})
    kw = dict(overrides=overrides, subcatchment_attributes=attrs, initial_water_content=0.2)
    whole, prov, _ = assign(table, **kw)
    parts = [assign(group, **kw) for _, group in table.groupby("subcatchment_id", sort=False)]
    by_sub = pd.concat([p for p, _, _ in parts])
    key = ["subcatchment_id", "soil_class", "cover_class", "surface", "area_m2"]
    a = whole.sort_values(key, kind="stable").reset_index(drop=True)
    b = by_sub.sort_values(key, kind="stable").reset_index(drop=True)
    pd.testing.assert_frame_equal(a, b)
    assert set(whole.loc[whole["subcatchment_id"] == "S9", "loss_method"]) == {"horton"}
    # the compact provenance counts the same unit parts as the per-part one
    compact = assign(table, compact_provenance=True, **kw).provenance
    counted = (prov.groupby(["parameter", "source", "soil_class", "cover_class", "surface"])
               .size().rename("unit_parts").reset_index())
    pd.testing.assert_frame_equal(compact, counted, check_dtype=False)
    assert compact["unit_parts"].sum() == len(whole) * prov["parameter"].nunique()


def test_attribute_id_with_spaces_still_names_only_its_subcatchment():
    # attribute ids are matched after stripping spaces; the shared work must see them the
    # same way, or " S2" would be spread over S1..S3 (same soil and cover) or lost.
    # TR-55 (1986) Table 2-2c: meadow, group B -> CN 58
    table = units(("S1", "B", "meadow", 1.0), ("S2", "B", "meadow", 2.0),
                  ("S3", "B", "meadow", 3.0))
    for given in ("S2 ", " S2"):
        attrs = pd.DataFrame({"subcatchment_id": [given], "curve_number": [77.0]})
        p, _, _ = assign(table, subcatchment_attributes=attrs, method="curve_number")
        assert p.set_index("subcatchment_id")["curve_number"].to_dict() == {
            "S1": 58.0, "S2": 77.0, "S3": 58.0}


def test_attributes_without_an_id_column_are_a_one_line_error():
    attrs = pd.DataFrame({"curve_number": [77.0]})
    with pytest.raises(ParameterError, match="subcatchment attributes.*subcatchment_id column"):
        assign(units(("S1", "B", "meadow", 1.0)), subcatchment_attributes=attrs)
