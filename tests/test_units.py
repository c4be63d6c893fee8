import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from gisrun.errors import InputError
from gisrun.units import SI, US, from_si, present_frame, to_si, unit_system


def test_inch_and_acre_are_exact():
    # 1 in = 25.4 mm exactly (international yard and pound agreement, 1959)
    assert to_si(1.0, "in") == pytest.approx(0.0254, rel=0, abs=1e-15)
    # 1 acre = 43,560 ft2 = 4046.8564224 m2 (exact by definition)
    assert to_si(1.0, "acre") == pytest.approx(4046.8564224, rel=1e-12)


def test_rate_round_trip():
    values = np.array([0.0, 0.65, 11.78])  # cm/h
    assert_allclose(from_si(to_si(values, "cm_per_h"), "cm_per_h"), values, rtol=1e-14)
    # 1 in/h = 25.4 mm/h (definition of the inch)
    assert from_si(to_si(1.0, "in_per_h"), "mm_per_h") == pytest.approx(25.4, rel=1e-12)


def test_time_and_per_time_factors_are_inverse():
    # a day is 86,400 s; a decay constant of 2 per hour is 2 / 3600 per second (definitions)
    assert to_si(1.0, "d") == 86400.0
    assert to_si(2.0, "per_h") == pytest.approx(2.0 / 3600.0, rel=1e-15)
    for time, per in (("s", "per_s"), ("min", "per_min"), ("h", "per_h"), ("d", "per_day")):
        assert to_si(1.0, time) * to_si(1.0, per) == pytest.approx(1.0, rel=1e-15)


def test_unknown_unit_and_system_are_input_errors():
    with pytest.raises(InputError, match="furlong"):
        to_si(1.0, "furlong")
    with pytest.raises(InputError, match="imperial"):
        unit_system("imperial")


def test_present_frame_converts_by_suffix_and_keeps_other_rates():
    frame = pd.DataFrame({
        "subcatchment_id": ["a"],
        "runoff_depth_m": [0.0254],
        "peak_excess_intensity_m_per_s": [0.0254 / 3600],
        "area_m2": [4046.8564224],
        "runoff_volume_m3": [0.3048**3],
        "time_to_ponding_s": [90.0],
        "horton_decay_per_s": [0.001],
        "runoff_coefficient": [0.5],
    })
    out = present_frame(frame, US)
    assert list(out.columns) == [
        "subcatchment_id", "runoff_depth_in", "peak_excess_intensity_in_per_h", "area_acre",
        "runoff_volume_ft3", "time_to_ponding_min", "horton_decay_per_h", "runoff_coefficient",
    ]
    assert_allclose(out.iloc[0, 1:5].to_numpy(dtype=float), 1.0, rtol=1e-12)
    assert out["time_to_ponding_min"].iloc[0] == pytest.approx(1.5)
    # decay constants are entered per hour and shown per hour (issue 15 item 13): 0.001/s x 3600
    assert out["horton_decay_per_h"].iloc[0] == pytest.approx(3.6)
    si = present_frame(frame, SI)
    assert si["runoff_depth_mm"].iloc[0] == pytest.approx(25.4)
    assert si["peak_excess_intensity_mm_per_h"].iloc[0] == pytest.approx(25.4)
