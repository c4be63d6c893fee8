"""run_losses: registry, per-unit methods, de-duplication, input checks, result type."""

from __future__ import annotations

import numpy as np
import pytest
from engine_helpers import unit_frame
from numpy.testing import assert_array_equal

from gisrun.engine import (
    ENGINES,
    LossResult,
    green_ampt,
    method_name,
    run_losses,
    unique_parameter_sets,
)
from gisrun.errors import ParameterError, StormError

RAIN = np.array([0.0, 0.002, 0.006, 0.009, 0.004, 0.001, 0.0, 0.0])


def test_registry_modules_have_the_common_shape():
    assert set(ENGINES) == {"green_ampt", "horton", "curve_number", "constant_loss", "phi_index"}
    for name, module in ENGINES.items():
        assert module.NAME == name
        for attr in ("Params", "State", "initial_state", "step"):
            assert hasattr(module, attr)
        assert module.__doc__ and "References" in module.__doc__


def test_per_unit_methods_scatter_back_in_row_order():
    names = ["horton", "green_ampt", "curve_number", "green_ampt", "phi_index", "constant_loss"]
    units = unit_frame(6, loss_method=names)
    mixed = run_losses(units, RAIN, 600.0)
    assert mixed.methods == tuple(names)
    for j, name in enumerate(names):
        alone = run_losses(units.iloc[[j]], RAIN, 600.0, method=name)
        assert_array_equal(mixed.excess_m[:, j], alone.excess_m[:, 0])
        assert_array_equal(mixed.infil_m[:, j], alone.infil_m[:, 0])
    assert_array_equal(mixed.rain_m, np.repeat(RAIN[:, None], 6, axis=1))


def test_method_argument_overrides_the_column_and_names_are_normalised():
    units = unit_frame(2, loss_method=["horton", "phi_index"])
    res = run_losses(units, RAIN, 600.0, method="Green-Ampt")
    assert res.methods == ("green_ampt", "green_ampt")


def test_unknown_method_suggests_the_nearest_name():
    with pytest.raises(ParameterError, match="did you mean 'green_ampt'"):
        run_losses(unit_frame(1), RAIN, 600.0, method="green_amp")
    units = unit_frame(3, loss_method=["horton", "horten", "horton"])
    with pytest.raises(ParameterError, match=r"loss_method:row 1.*did you mean 'horton'"):
        run_losses(units, RAIN, 600.0)
    with pytest.raises(ParameterError, match="loss_method"):
        run_losses(unit_frame(1), RAIN, 600.0)  # no column, no method


def test_deduplicated_run_equals_the_full_run():
    rng = np.random.default_rng(5)
    units = unit_frame(40, ks_m_per_s=rng.choice([1e-6, 3e-6, 8e-6], 40),
                       depression_storage_m=rng.choice([0.0, 0.002], 40))
    rain = np.repeat(RAIN[:, None], 40, axis=1) * rng.choice([1.0, 2.0], 40)
    first, inverse = unique_parameter_sets(green_ampt.Params.from_frame(units), rain)
    assert first.size <= 12 and inverse.size == 40
    a = run_losses(units, rain, 600.0, method="green_ampt", deduplicate=True)
    b = run_losses(units, rain, 600.0, method="green_ampt", deduplicate=False)
    for field in ("infil_m", "excess_m", "capacity_m_per_s", "storage_m", "time_to_ponding_s"):
        assert_array_equal(getattr(a, field), getattr(b, field))


def test_deduplicated_mixed_methods_land_in_their_own_columns():
    # each method's units are a subset of the columns; repeated parameter sets inside a
    # method are simulated once and spread back to those columns only
    rng = np.random.default_rng(11)
    names = rng.choice(["green_ampt", "horton", "curve_number"], 60)
    units = unit_frame(60, loss_method=list(names), ks_m_per_s=rng.choice([1e-6, 4e-6], 60),
                       curve_number=rng.choice([61.0, 80.0], 60))
    a = run_losses(units, RAIN, 600.0, deduplicate=True)
    b = run_losses(units, RAIN, 600.0, deduplicate=False)
    for field in ("infil_m", "excess_m", "capacity_m_per_s", "storage_m", "time_to_ponding_s"):
        assert_array_equal(getattr(a, field), getattr(b, field))
    assert len(np.unique(a.excess_m, axis=1).T) < 60  # duplicates were there to share


def test_rain_per_unit_and_shared_rain_agree():
    units = unit_frame(3)
    shared = run_losses(units, RAIN, 600.0, method="horton")
    per_unit = run_losses(units, np.repeat(RAIN[:, None], 3, axis=1), 600.0, method="horton")
    assert_array_equal(shared.excess_m, per_unit.excess_m)


@pytest.mark.parametrize("rain", [np.array([0.001, -0.001]), np.array([0.001, np.nan]),
                                  np.zeros((3, 2)), np.zeros(0)])
def test_bad_rain_is_a_storm_error(rain):
    with pytest.raises(StormError, match="rain_m"):
        run_losses(unit_frame(3), rain, 600.0, method="phi_index")


def test_bad_parameter_names_column_and_row():
    units = unit_frame(3, ks_m_per_s=[1e-6, -1e-6, 1e-6])
    with pytest.raises(ParameterError, match=r"ks_m_per_s:row 1.*-1e-06"):
        run_losses(units, RAIN, 600.0, method="green_ampt")
    with pytest.raises(ParameterError, match="suction_head_m.*missing"):
        run_losses(unit_frame(3).drop(columns="suction_head_m"), RAIN, 600.0, method="green_ampt")
    with pytest.raises(StormError, match="dt_s"):
        run_losses(unit_frame(1), RAIN, 0.0, method="phi_index")


def test_loss_result_checks_itself_and_is_read_only():
    res = run_losses(unit_frame(2), RAIN, 600.0, method="green_ampt")
    assert isinstance(res, LossResult)
    assert (res.n_steps, res.n_units) == (8, 2)
    with pytest.raises(ValueError):
        res.excess_m[0, 0] = 1.0
    with pytest.raises(ValueError, match="storage_m"):
        LossResult(res.rain_m, res.infil_m, res.excess_m, res.capacity_m_per_s, np.zeros(3),
                   res.time_to_ponding_s, 600.0, res.methods)
    with pytest.raises(ValueError, match="dt_s"):
        LossResult(res.rain_m, res.infil_m, res.excess_m, res.capacity_m_per_s, res.storage_m,
                   res.time_to_ponding_s, -1.0, res.methods)
    assert np.max(np.abs(res.mass_balance_error_m())) < 1e-15


def test_method_name_normalises():
    assert method_name(" Curve Number ") == "curve_number"


def test_no_units_gives_empty_arrays():
    res = run_losses(unit_frame(0), RAIN, 600.0, method="horton")
    assert res.infil_m.shape == (RAIN.size, 0) and res.methods == ()
