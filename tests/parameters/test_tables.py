"""Shipped tables against their publications, and their conversion to SI.

Reference values were recalled from the publications named beside them, without
the text at hand ("from memory") unless stated otherwise.
"""

import pytest
from numpy.testing import assert_allclose

from gisrun.parameters import list_tables
from gisrun.parameters import tables as T

CM_PER_H = 0.01 / 3600.0  # m/s
IN_PER_H = 0.0254 / 3600.0  # m/s (1 in = 0.0254 m exactly)


def test_every_table_names_its_source_and_units():
    shipped = list_tables()
    assert [t.name for t in shipped] == [
        "green_ampt_texture", "hsg_conductivity", "horton_hsg", "hsg_defaults",
        "cover_curve_numbers", "green_ampt_texture_ranges"]
    for table in shipped:
        assert any(line.startswith("source:") for line in table.source_lines), table.name
        assert any(line.startswith("units:") for line in table.source_lines), table.name
        assert len(table.frame) > 0 and table.title


# Rawls, Brakensiek & Miller (1983) as reprinted in Chow, Maidment & Mays (1988)
# Table 4.3.1 (from memory): texture, total porosity, effective porosity,
# suction head (cm), conductivity (cm/h).
RAWLS_1983 = [
    ("sand", 0.437, 0.417, 4.95, 11.78),
    ("loamy sand", 0.437, 0.401, 6.13, 2.99),
    ("sandy loam", 0.453, 0.412, 11.01, 1.09),
    ("loam", 0.463, 0.434, 8.89, 0.34),
    ("silt loam", 0.501, 0.486, 16.68, 0.65),
    ("sandy clay loam", 0.398, 0.330, 21.85, 0.15),
    ("clay loam", 0.464, 0.390, 20.88, 0.10),  # some reprints: 0.309 (see the test below)
    ("silty clay loam", 0.471, 0.432, 27.30, 0.10),
    ("sandy clay", 0.430, 0.321, 23.90, 0.06),
    ("silty clay", 0.479, 0.423, 29.22, 0.05),
    ("clay", 0.475, 0.385, 31.63, 0.03),
]


@pytest.mark.parametrize(("texture", "n", "theta_e", "psi_cm", "k_cm_h"), RAWLS_1983)
def test_green_ampt_values_as_published_and_in_si(texture, n, theta_e, psi_cm, k_cm_h):
    ga = T.green_ampt_by_texture().loc[texture]
    assert ga["total_porosity"] == pytest.approx(n)
    assert ga["effective_porosity"] == pytest.approx(theta_e)
    assert ga["suction_head_m"] == pytest.approx(psi_cm / 100.0)  # cm -> m
    assert ga["ks_m_per_s"] == pytest.approx(k_cm_h * CM_PER_H)  # cm/h -> m/s


# Residual water content by texture, Rawls, Brakensiek & Saxton (1982), Trans. ASAE 25(5),
# 1316-1320, Table 2 (from memory). The effective porosity of Rawls et al. (1983) is the total
# porosity minus the residual water content, so each row must agree to rounding.
RESIDUAL_WATER_CONTENT = {
    "sand": 0.020, "loamy sand": 0.035, "sandy loam": 0.041, "loam": 0.027, "silt loam": 0.015,
    "sandy clay loam": 0.068, "clay loam": 0.075, "silty clay loam": 0.040, "sandy clay": 0.109,
    "silty clay": 0.056, "clay": 0.090,
}


@pytest.mark.parametrize("texture", sorted(RESIDUAL_WATER_CONTENT))
def test_effective_porosity_is_total_porosity_minus_residual_water(texture):
    ga = T.green_ampt_by_texture().loc[texture]
    expected = ga["total_porosity"] - RESIDUAL_WATER_CONTENT[texture]
    assert ga["effective_porosity"] == pytest.approx(expected, abs=0.003)


def test_green_ampt_spot_values_in_si():
    ga = T.green_ampt_by_texture()
    # Chow et al. (1988) Table 4.3.1 (from memory): silt loam K = 0.65 cm/h = 1.806e-6 m/s
    assert_allclose(ga.at["silt loam", "ks_m_per_s"], 1.8056e-6, rtol=1e-4)
    # sand K = 11.78 cm/h = 3.272e-5 m/s; clay K = 0.03 cm/h = 8.33e-8 m/s
    assert_allclose(ga.at["sand", "ks_m_per_s"], 3.2722e-5, rtol=1e-4)
    assert_allclose(ga.at["clay", "ks_m_per_s"], 8.333e-8, rtol=1e-3)
    # silt loam suction 16.68 cm = 0.1668 m
    assert_allclose(ga.at["silt loam", "suction_head_m"], 0.1668)
    assert len(ga) == 11  # the publication's 11 classes (no silt)


def test_texture_groups_follow_tr55_appendix_a():
    # NRCS TR-55 (1986) Appendix A, disturbed soils (after Brakensiek and Rawls 1983):
    # A = sand, loamy sand, sandy loam; B = silt loam, loam; C = sandy clay loam;
    # D = clay loam, silty clay loam, sandy clay, silty clay, clay.
    groups = T.green_ampt_by_texture()["hydrologic_soil_group"]
    expected = {"sand": "A", "loamy sand": "A", "sandy loam": "A", "loam": "B",
                "silt loam": "B", "sandy clay loam": "C", "clay loam": "D",
                "silty clay loam": "D", "sandy clay": "D", "silty clay": "D", "clay": "D"}
    assert groups.to_dict() == expected


def test_minimum_infiltration_ranges():
    hsg = T.hsg_conductivity()
    # NRCS TR-55 (1986) Appendix A: A > 0.30, B 0.15-0.30, C 0.05-0.15, D 0-0.05 in/h
    assert_allclose(hsg["min_infiltration_low_m_per_s"], [0.30 * IN_PER_H, 0.15 * IN_PER_H,
                                                          0.05 * IN_PER_H, 0.0])
    assert_allclose(hsg["min_infiltration_high_m_per_s"].iloc[1:],
                    [0.30 * IN_PER_H, 0.15 * IN_PER_H, 0.05 * IN_PER_H])
    # midpoints: B (0.15 + 0.30) / 2 = 0.225 in/h
    assert_allclose(hsg.at["B", "min_infiltration_mid_m_per_s"], 0.225 * IN_PER_H)


def test_conductivity_class_limits_neh_630_table_7_1():
    hsg = T.hsg_conductivity()
    # NRCS NEH 630 Ch. 7 (2009) Table 7-1 (from memory), impermeable layer 50-100 cm:
    # A > 40 um/s, B 10-40, C 1-10, D <= 1 um/s; deeper than 100 cm: A > 10, B 4-10,
    # C 0.4-4, D <= 0.4 um/s.
    assert_allclose(hsg["ksat_low_m_per_s_layer_50_100cm"], [40e-6, 10e-6, 1e-6, 0.0])
    assert_allclose(hsg["ksat_high_m_per_s_layer_below_100cm"].iloc[1:], [10e-6, 4e-6, 0.4e-6])
    # classes tile the axis: each group's upper limit is the next better group's lower
    for col in ("50_100cm", "below_100cm"):
        lows = hsg[f"ksat_low_m_per_s_layer_{col}"].to_numpy()
        highs = hsg[f"ksat_high_m_per_s_layer_{col}"].to_numpy()
        assert_allclose(highs[1:], lows[:-1])


def test_representative_textures_sit_in_their_group():
    # Our documented choice (common practice): the representative texture is listed
    # for its group in TR-55 (1986) App. A and its Rawls K lies in the group's
    # minimum infiltration range.
    ga, hsg, rep = T.green_ampt_by_texture(), T.hsg_conductivity(), T.group_defaults()
    for group, texture in rep["representative_texture"].items():
        assert ga.at[texture, "hydrologic_soil_group"] == group
        k = ga.at[texture, "ks_m_per_s"]
        assert k >= hsg.at[group, "min_infiltration_low_m_per_s"]
        assert k <= hsg.at[group, "min_infiltration_high_m_per_s"]


def test_horton_table_in_si():
    horton = T.horton_by_group()
    # Akan (1993) representative f0 (from memory): sandy 5, loam 3, clay 1 in/h (A, B, D)
    assert_allclose(horton.loc[["A", "B", "D"], "horton_f0_m_per_s"],
                    [5 * IN_PER_H, 3 * IN_PER_H, 1 * IN_PER_H])
    # decay 4.14 1/h (Akan 1993, from memory) in 1/s
    assert_allclose(horton["horton_decay_per_s"], 4.14 / 3600.0)
    # fc is the midpoint of the TR-55 (1986) App. A minimum infiltration range
    midpoints = T.hsg_conductivity()["min_infiltration_mid_m_per_s"]
    assert_allclose(horton["horton_fc_m_per_s"], midpoints)
    assert (horton["horton_f0_m_per_s"] > horton["horton_fc_m_per_s"]).all()
    # recovery: a rate per hour, gisrun's choice (no publication), halving from A to D
    assert_allclose(horton["horton_recovery_per_s"] * 3600.0, [0.08, 0.04, 0.02, 0.01])


def test_horton_table_states_recovery_as_a_rate_of_our_own_choice():
    table = T.read_shipped_table("horton_hsg")
    assert "recovery_per_h" in table.frame.columns
    text = " ".join(table.source_lines).lower()
    assert "gisrun's choice" in text and "drying" not in text


# NRCS TR-55 (1986) Table 2-2a (from memory): cover, impervious %, CN A/B/C/D
TR55_2_2A = [
    ("open_space_poor", 0, (68, 79, 86, 89)),
    ("open_space_fair", 0, (49, 69, 79, 84)),
    ("open_space_good", 0, (39, 61, 74, 80)),
    ("impervious", 100, (98, 98, 98, 98)),
    ("paved_street_with_storm_sewers", 100, (98, 98, 98, 98)),
    ("gravel_road", 0, (76, 85, 89, 91)),
    ("commercial", 85, (89, 92, 94, 95)),
    ("industrial", 72, (81, 88, 91, 93)),
    ("residential_eighth_acre", 65, (77, 85, 90, 92)),
    ("residential_quarter_acre", 38, (61, 75, 83, 87)),
    ("residential_third_acre", 30, (57, 72, 81, 86)),
    ("residential_half_acre", 25, (54, 70, 80, 85)),
    ("residential_one_acre", 20, (51, 68, 79, 84)),
    ("residential_two_acre", 12, (46, 65, 77, 82)),
    ("newly_graded", 0, (77, 86, 91, 94)),
    # TR-55 (1986) Table 2-2b (from memory): row crops, straight row, good
    ("row_crops_good", 0, (67, 78, 85, 89)),
    # TR-55 (1986) Table 2-2c (from memory)
    ("pasture_good", 0, (39, 61, 74, 80)),
    ("meadow", 0, (30, 58, 71, 78)),
    ("woods_fair", 0, (36, 60, 73, 79)),
    ("woods_good", 0, (30, 55, 70, 77)),
]


@pytest.mark.parametrize(("cover", "imp_pct", "cns"), TR55_2_2A)
def test_curve_numbers_as_published(cover, imp_pct, cns):
    row = T.cover_table().loc[cover]
    assert [row[f"cn_{g}"] for g in "ABCD"] == list(cns)
    assert row["impervious_fraction"] == pytest.approx(imp_pct / 100.0)


def test_tr55_urban_composites_are_open_space_good_plus_98():
    # TR-55 (1986) Table 2-2a footnote: urban CNs were built from connected impervious
    # area at CN 98 and pervious area as open space in good condition. Recomputing
    # f x 98 + (1 - f) x pervious CN must give the table's CN within 1.
    cover = T.cover_table()
    urban = cover[(cover["impervious_fraction"] > 0) & (cover["impervious_fraction"] < 1)]
    assert len(urban) >= 9
    for name, row in urban.iterrows():
        f = row["impervious_fraction"]
        for g in "ABCD":
            recomputed = f * 98 + (1 - f) * row[f"pervious_cn_{g}"]
            assert abs(recomputed - row[f"cn_{g}"]) <= 1.0, (name, g, recomputed)


def test_pervious_only_classes_keep_their_own_cn():
    cover = T.cover_table()
    pervious_only = cover[cover["impervious_fraction"] == 0]
    for g in "ABCD":
        assert_allclose(pervious_only[f"pervious_cn_{g}"], pervious_only[f"cn_{g}"])
    # curve numbers rise from group A to D on every class (TR-55 1986 Tables 2-2a-c)
    cns = cover[[f"cn_{g}" for g in "ABCD"]].to_numpy()
    assert (cns[:, 1:] >= cns[:, :-1]).all()


def test_depression_storage_in_metres():
    cover = T.cover_table()
    # common practice: grass about 5 mm, woods about 7.5 mm (entered in mm)
    assert cover.at["open_space_good", "pervious_depression_storage_m"] == pytest.approx(0.005)
    assert cover.at["woods_good", "pervious_depression_storage_m"] == pytest.approx(0.0075)
    assert T.DEFAULT_IMPERVIOUS_DEPRESSION_STORAGE_M == pytest.approx(0.0015)
