"""Hydrologic soil group from Ksat and depths against NRCS NEH Part 630 Ch. 7 (2009), Table 7-1.

Source of every figure below: NEH Part 630 Chapter 7, Hydrologic Soil Groups (January 2009),
Table 7-1, from memory (a public copy of the chapter was found but its table page could not be
read; see gisrun/parameters/hsg_criteria.py). Each check sits at a threshold and just beside
it, so a limit that is off, or inclusive on the wrong side, fails.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from gisrun.parameters.hsg_criteria import group_from_properties

UM = 1e-6  # 1 micrometre per second in m/s
NONE = math.nan
EPS = 1e-6  # relative nudge beside a threshold


def group(ksat_um: float, impermeable_cm: float = NONE, water_table_cm: float = NONE) -> str:
    return group_from_properties([ksat_um * UM], [impermeable_cm / 100.0],
                                 [water_table_cm / 100.0])[0]


# Table 7-1, impermeable layer at 50-100 cm (or water table at 60-100 cm): Ksat of the least
# transmissive layer > 40 um/s A; <= 40 and > 10 B; <= 10 and > 1 C; <= 1 D.
SHALLOW = [(40.0, "A", "B"), (10.0, "B", "C"), (1.0, "C", "D")]
# Table 7-1, impermeable layer and water table deeper than 100 cm: > 10 A; <= 10 and > 4 B;
# <= 4 and > 0.4 C; <= 0.4 D.
DEEP = [(10.0, "A", "B"), (4.0, "B", "C"), (0.4, "C", "D")]


@pytest.mark.parametrize(("limit", "above", "at_or_below"), SHALLOW)
@pytest.mark.parametrize(("impermeable_cm", "water_table_cm"),
                         [(50.0, NONE), (75.0, NONE), (100.0, NONE), (NONE, 60.0), (NONE, 100.0),
                          (150.0, 80.0)])
def test_shallow_row_thresholds(limit, above, at_or_below, impermeable_cm, water_table_cm):
    # Table 7-1, rows "depth to water impermeable layer 50 to 100 cm" and "depth to high water
    # table 60 to 100 cm" (NEH 630 Ch. 7, 2009; from memory)
    assert group(limit * (1 + EPS), impermeable_cm, water_table_cm) == above
    assert group(limit, impermeable_cm, water_table_cm) == at_or_below
    assert group(limit * (1 - EPS), impermeable_cm, water_table_cm) == at_or_below


@pytest.mark.parametrize(("limit", "above", "at_or_below"), DEEP)
@pytest.mark.parametrize(("impermeable_cm", "water_table_cm"),
                         [(NONE, NONE), (100.0 + 1e-6, NONE), (NONE, 101.0), (200.0, 150.0)])
def test_deep_row_thresholds(limit, above, at_or_below, impermeable_cm, water_table_cm):
    # Table 7-1, rows "depth to water impermeable layer > 100 cm" and "depth to high water
    # table > 100 cm" (NEH 630 Ch. 7, 2009; from memory)
    assert group(limit * (1 + EPS), impermeable_cm, water_table_cm) == above
    assert group(limit, impermeable_cm, water_table_cm) == at_or_below
    assert group(limit * (1 - EPS), impermeable_cm, water_table_cm) == at_or_below


def test_the_100_cm_boundary_switches_rows():
    # 20 um/s is B at 50-100 cm (<= 40, > 10) and A deeper than 100 cm (> 10): Table 7-1
    assert group(20.0, 100.0) == "B"
    assert group(20.0, 100.0 + 1e-6) == "A"
    assert group(20.0, NONE, 100.0) == "B"
    assert group(20.0, NONE, 100.0 + 1e-6) == "A"


@pytest.mark.parametrize("ksat_um", [0.0, 0.5, 5.0, 50.0, 500.0])
def test_impermeable_layer_shallower_than_50_cm_is_d(ksat_um):
    # Table 7-1: depth to water impermeable layer < 50 cm -> D, whatever the Ksat
    assert group(ksat_um, 50.0 * (1 - EPS)) == "D"
    assert group(ksat_um, 10.0, 30.0) == "D"
    assert group(NONE, 49.0) == "D"  # no Ksat needed


@pytest.mark.parametrize(("ksat_um", "impermeable_cm", "dual"), [
    # Table 7-1 note on dual groups: a water table < 60 cm that can be drained gives A/D, B/D or
    # C/D by the Ksat criteria of the drained soil; the first letter is the drained condition
    (10.0 * (1 + EPS), NONE, "A/D"), (10.0, NONE, "B/D"), (4.0 * (1 + EPS), NONE, "B/D"),
    (4.0, NONE, "C/D"), (0.4 * (1 + EPS), NONE, "C/D"), (0.4, NONE, "D"),
    (40.0 * (1 + EPS), 80.0, "A/D"), (40.0, 80.0, "B/D"), (10.0, 80.0, "C/D"), (1.0, 80.0, "D"),
])
def test_high_water_table_gives_dual_groups(ksat_um, impermeable_cm, dual):
    assert group(ksat_um, impermeable_cm, 60.0 * (1 - EPS)) == dual
    assert group(ksat_um, impermeable_cm, 20.0) == dual


def test_water_table_at_60_cm_is_not_dual():
    # Table 7-1: the 60-100 cm row starts at 60 cm; 60.0 itself uses the shallow thresholds
    assert group(50.0, NONE, 60.0) == "A"
    assert group(30.0, NONE, 60.0) == "B"


def test_unknown_ksat_gives_none_unless_the_layer_decides():
    out = group_from_properties([np.nan, np.nan, np.nan], [0.3, 0.8, np.nan],
                                [np.nan, np.nan, 0.3])
    assert out.tolist() == ["D", None, None]


def test_vectorised_over_soils_matches_one_by_one():
    rng = np.random.default_rng(7)
    ksat = rng.uniform(0.0, 60.0, 200) * UM
    imp = np.where(rng.random(200) < 0.3, np.nan, rng.uniform(0.2, 2.0, 200))
    table = np.where(rng.random(200) < 0.5, np.nan, rng.uniform(0.1, 2.0, 200))
    together = group_from_properties(ksat, imp, table).tolist()
    alone = [group_from_properties([k], [i], [t])[0] for k, i, t in zip(ksat, imp, table,
                                                                         strict=True)]
    assert together == alone
