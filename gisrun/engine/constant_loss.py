r"""Initial-and-constant loss.

Equations
---------
Rain (plus water held in depression storage, spread over the step at rate
:math:`i`) first satisfies the remaining initial loss :math:`L_0`; from the
instant it is satisfied, :math:`t_0 = L_0 / i` into the step, losses continue
at the constant rate :math:`c` (or the supply rate, if lower):

.. math:: \Delta L = \min(i\,\Delta t, L_0)
          + \min\!\big(i\,\Delta t - \min(i\,\Delta t, L_0),\; c\,(\Delta t - t_0)\big).

Splitting the step at :math:`t_0` keeps the result independent of the step
length. Ponding (the supply exceeding the loss rate) starts at :math:`t_0`
where :math:`i > c`. Water not lost fills depression storage; the rest is
excess. The reported capacity is ``inf`` while initial loss remains, then
:math:`c`.

References
----------
Hill, P., Mein, R. and Siriwardena, L. (1998). How much rainfall becomes
runoff? Loss modelling for flood estimation. CRC for Catchment Hydrology,
Report 98/5 (cited from memory).

Chow, V. T., Maidment, D. R. and Mays, L. W. (1988). Applied Hydrology,
McGraw-Hill, section 5.2 (abstractions as losses from rainfall).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .base import (
    FloatArray,
    StepResult,
    set_nonnegative_arrays,
    split_surface_water,
    start_offsets,
)
from .declare import DEPRESSION_STORAGE, Parameter

__all__ = [
    "NAME",
    "ORDER",
    "PARAMETERS",
    "Params",
    "State",
    "initial_state",
    "step",
]

NAME = "constant_loss"
#: Position in listings and in the order of output columns.
ORDER = 40

#: Parameters (declarations; see :mod:`gisrun.engine.declare`).
PARAMETERS: tuple[Parameter, ...] = (
    Parameter("initial_loss_m", "m", default="initial_loss",
              impervious="impervious_storage_as_initial_loss",
              then_lower=DEPRESSION_STORAGE.column),
    Parameter("constant_loss_m_per_s", "m/s", default="group_min_infiltration", equivalent=True,
              then_lower="initial_loss_m"),
    DEPRESSION_STORAGE,
)


@dataclass(frozen=True)
class Params:
    """Initial-and-constant loss parameters, arrays of shape ``(n_units,)``, SI.

    Attributes
    ----------
    initial_loss_m : ndarray
        Initial loss, m.
    constant_loss_m_per_s : ndarray
        Continuing loss rate, m/s.
    depression_storage_m : ndarray
        Surface storage filled before runoff, m.
    """

    initial_loss_m: FloatArray
    constant_loss_m_per_s: FloatArray
    depression_storage_m: FloatArray

    def __post_init__(self) -> None:
        set_nonnegative_arrays(
            self, ("initial_loss_m", "constant_loss_m_per_s", "depression_storage_m"),
            "constant loss")

    @classmethod
    def from_frame(cls, frame: pd.DataFrame) -> Params:
        """Read the SI columns of the unit parameter frame.

        Raises
        ------
        ParameterError
            A column is missing or a value is empty or negative.
        """
        return cls(
            initial_loss_m=PARAMETERS[0].read(frame),
            constant_loss_m_per_s=PARAMETERS[1].read(frame),
            depression_storage_m=DEPRESSION_STORAGE.read(frame),
        )


@dataclass(frozen=True)
class State:
    """Initial loss still to satisfy, storage and ponded flag per unit."""

    initial_loss_left_m: FloatArray
    storage_m: FloatArray
    ponded: np.ndarray


def initial_state(params: Params) -> State:
    """Full initial loss to satisfy, empty storage."""
    n = params.initial_loss_m.shape[0]
    return State(params.initial_loss_m.copy(), np.zeros(n), np.zeros(n, dtype=bool))


def step(params: Params, state: State, rain_m: FloatArray, dt_s: float) -> tuple[State, StepResult]:
    """Advance every unit by one step of ``dt_s`` seconds with ``rain_m`` of rain.

    Returns
    -------
    (State, StepResult)
    """
    c = params.constant_loss_m_per_s
    supply = rain_m + state.storage_m
    rate = supply / dt_s
    initial = np.minimum(supply, state.initial_loss_left_m)
    after = supply - initial
    wet_after = after > 0
    # water so scarce that its rate underflows to 0 (a few subnormal metres held in storage)
    # takes the same instant as the share of the step that the initial loss takes
    tiny = wet_after & (rate <= 0)
    timed = wet_after & ~tiny
    t0 = np.where(timed, initial / np.where(timed, rate, 1.0), dt_s)
    t0 = np.where(tiny, dt_s * (initial / np.where(tiny, supply, 1.0)), t0)
    continuing = np.minimum(after, c * (dt_s - t0))
    d_infil = initial + continuing
    left = state.initial_loss_left_m - initial
    storage, excess = split_surface_water(supply - d_infil, params.depression_storage_m)
    ponded = wet_after & (rate > c)
    offset = start_offsets(ponded & ~state.ponded, t0)
    capacity = np.where(left > 0, np.inf, c)
    return State(left, storage, ponded), StepResult(d_infil, excess, capacity, offset)
