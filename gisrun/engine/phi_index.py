r"""Phi-index: a constant loss rate, and fitting loss rates to observed runoff.

Equations
---------
Losses at the constant rate :math:`\phi` from the start of the storm
(Chow, Maidment and Mays 1988, section 5.2):

.. math:: \Delta L = \min(i\,\Delta t,\; \phi\,\Delta t), \qquad
          \text{excess} = \sum_k \max(R_k - \phi\,\Delta t,\; 0)

with :math:`R_k` the rain of step :math:`k` and :math:`i` the supply rate (rain
plus water held in depression storage, usually zero for this method).

Fitting
-------
The runoff depth :math:`D(\phi) = \sum_k \max(R_k - \phi\Delta t, 0)` is
continuous, piecewise linear and non-increasing in :math:`\phi`, with breaks at
:math:`\phi = R_k/\Delta t`. :func:`fit_phi_index` sorts the steps by rain,
evaluates :math:`D` at every break with cumulative sums and solves the linear
piece holding the observed depth exactly (the textbook trial procedure of Chow
et al. 1988, Example 5.2.1, done without trials). :func:`fit_constant_loss_rate`
does the same after an initial loss, where the step that completes the initial
loss contributes only its remaining duration. Both are vectorized over units.

References
----------
Chow, V. T., Maidment, D. R. and Mays, L. W. (1988). Applied Hydrology,
McGraw-Hill, section 5.2.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from ..errors import ParameterError
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
    "fit_phi_index",
    "fit_constant_loss_rate",
]

NAME = "phi_index"
#: Position in listings and in the order of output columns.
ORDER = 50

#: Parameters (declarations; see :mod:`gisrun.engine.declare`).
PARAMETERS: tuple[Parameter, ...] = (
    Parameter("phi_index_m_per_s", "m/s", default="group_min_infiltration", equivalent=True,
              then_lower=DEPRESSION_STORAGE.column),
    DEPRESSION_STORAGE,
)


@dataclass(frozen=True)
class Params:
    """Phi-index parameters, arrays of shape ``(n_units,)``, SI.

    Attributes
    ----------
    phi_index_m_per_s : ndarray
        Constant loss rate, m/s.
    depression_storage_m : ndarray
        Surface storage filled before runoff, m.
    """

    phi_index_m_per_s: FloatArray
    depression_storage_m: FloatArray

    def __post_init__(self) -> None:
        set_nonnegative_arrays(self, ("phi_index_m_per_s", "depression_storage_m"), "phi-index")

    @classmethod
    def from_frame(cls, frame: pd.DataFrame) -> Params:
        """Read the SI columns of the unit parameter frame.

        Raises
        ------
        ParameterError
            A column is missing or a value is empty or negative.
        """
        return cls(
            phi_index_m_per_s=PARAMETERS[0].read(frame),
            depression_storage_m=DEPRESSION_STORAGE.read(frame),
        )


@dataclass(frozen=True)
class State:
    """Storage and ponded flag per unit."""

    storage_m: FloatArray
    ponded: np.ndarray


def initial_state(params: Params) -> State:
    """Empty storage, not ponded."""
    n = params.phi_index_m_per_s.shape[0]
    return State(np.zeros(n), np.zeros(n, dtype=bool))


def step(params: Params, state: State, rain_m: FloatArray, dt_s: float) -> tuple[State, StepResult]:
    """Advance every unit by one step of ``dt_s`` seconds with ``rain_m`` of rain.

    Returns
    -------
    (State, StepResult)
    """
    phi = params.phi_index_m_per_s
    supply = rain_m + state.storage_m
    d_infil = np.minimum(supply, phi * dt_s)
    storage, excess = split_surface_water(supply - d_infil, params.depression_storage_m)
    ponded = supply > phi * dt_s
    offset = start_offsets(ponded & ~state.ponded, 0.0)
    return State(storage, ponded), StepResult(d_infil, excess, phi.copy(), offset)


def fit_phi_index(rain_m: ArrayLike, observed_runoff_m: ArrayLike, dt_s: float) -> FloatArray:
    """Phi-index giving an observed runoff depth, per unit, m/s.

    Parameters
    ----------
    rain_m : array_like, shape (n_steps,) or (n_steps, n_units)
        Rain depth per step, m.
    observed_runoff_m : array_like, scalar or shape (n_units,)
        Observed direct runoff depth, m.
    dt_s : float
        Step length, s.

    Returns
    -------
    ndarray, shape (n_units,)
        The smallest rate whose runoff equals the observed depth, m/s.

    Raises
    ------
    ParameterError
        Observed runoff negative or above the rain depth.

    Examples
    --------
    >>> fit_phi_index([0.010, 0.030, 0.020], 0.020, 3600.0) * 3600 * 1000  # mm/h
    array([15.])
    """
    rain, observed = _prepare(rain_m, observed_runoff_m, dt_s)
    return _fit_piecewise(rain, np.full_like(rain, float(dt_s)), observed)


def fit_constant_loss_rate(rain_m: ArrayLike, observed_runoff_m: ArrayLike, dt_s: float, *,
                           initial_loss_m: ArrayLike = 0.0) -> FloatArray:
    """Constant loss rate giving an observed runoff depth after an initial loss, m/s.

    Consistent with :mod:`gisrun.engine.constant_loss` without depression
    storage: the step that completes the initial loss contributes only the
    rest of its duration.

    Parameters
    ----------
    rain_m : array_like, shape (n_steps,) or (n_steps, n_units)
        Rain depth per step, m.
    observed_runoff_m : array_like, scalar or shape (n_units,)
        Observed direct runoff depth, m.
    dt_s : float
        Step length, s.
    initial_loss_m : array_like, scalar or shape (n_units,)
        Initial loss, m.

    Returns
    -------
    ndarray, shape (n_units,)

    Raises
    ------
    ParameterError
        Observed runoff negative or above the rain left after the initial loss.
    """
    rain, observed = _prepare(rain_m, observed_runoff_m, dt_s)
    loss0 = np.broadcast_to(np.asarray(initial_loss_m, dtype=np.float64), observed.shape)
    if np.any(~np.isfinite(loss0) | (loss0 < 0)):
        raise ParameterError("initial_loss_m", "is negative or not a number",
                             "give a non-negative initial loss in m")
    before = np.cumsum(rain, axis=0) - rain
    taken = np.clip(loss0 - before, 0.0, rain)
    net = rain - taken
    duration = np.where(rain > 0, dt_s * net / np.where(rain > 0, rain, 1.0), dt_s)
    _check_observed(observed, net.sum(axis=0), "rain left after the initial loss")
    return _fit_piecewise(net, duration, observed)


def _prepare(rain_m: ArrayLike, observed_runoff_m: ArrayLike,
             dt_s: float) -> tuple[FloatArray, FloatArray]:
    rain = np.asarray(rain_m, dtype=np.float64)
    if rain.ndim == 1:
        rain = rain[:, None]
    if rain.ndim != 2 or np.any(~np.isfinite(rain) | (rain < 0)):
        raise ParameterError("rain_m", "must be non-negative depths, shape (n_steps[, n_units])",
                             "give rain depth per step in m")
    if not (np.isfinite(dt_s) and dt_s > 0):
        raise ParameterError("dt_s", f"time step {dt_s!r} is not positive", "give seconds > 0")
    observed = np.asarray(observed_runoff_m, dtype=np.float64)
    n_units = max(rain.shape[1], observed.size if observed.ndim else 1)
    try:
        observed = np.broadcast_to(observed, (n_units,)).copy()
        rain = np.broadcast_to(rain, (rain.shape[0], n_units))
    except ValueError:
        raise ParameterError("observed_runoff_m", f"has {observed.size} values for "
                             f"{rain.shape[1]} rain columns", "give one value per unit") from None
    _check_observed(observed, rain.sum(axis=0), "rain depth")
    return rain, observed


def _check_observed(observed: FloatArray, available: FloatArray, what: str) -> None:
    tol = 1e-12 * np.maximum(available, 1e-3)
    bad = ~np.isfinite(observed) | (observed < 0) | (observed > available + tol)
    if bad.any():
        j = int(np.flatnonzero(bad)[0])
        raise ParameterError(f"observed_runoff_m:unit {j}",
                             f"runoff {float(observed[j])!r} m is negative or exceeds the {what} "
                             f"{float(available[j])!r} m",
                             "check the observed runoff, the rain record and their units")


def _fit_piecewise(depth: FloatArray, duration: FloatArray, observed: FloatArray) -> FloatArray:
    """Smallest rate ``c`` with ``sum(max(depth - c * duration, 0)) == observed`` per column."""
    with np.errstate(divide="ignore", invalid="ignore"):
        brk = np.where(duration > 0, depth / duration, 0.0)
    order = np.argsort(-brk, axis=0, kind="stable")
    brk = np.take_along_axis(brk, order, axis=0)
    dep = np.cumsum(np.take_along_axis(depth, order, axis=0), axis=0)
    dur = np.cumsum(np.take_along_axis(duration, order, axis=0), axis=0)
    runoff_at_break = dep - dur * brk  # non-decreasing down the sorted steps
    observed = np.minimum(observed, dep[-1])
    below = runoff_at_break < observed[None, :]
    j = np.maximum(below.sum(axis=0) - 1, 0)  # last break with runoff below observed
    cols = np.arange(depth.shape[1])
    dj, tj = dep[j, cols], dur[j, cols]
    rate = np.where(tj > 0, (dj - observed) / np.where(tj > 0, tj, 1.0), 0.0)
    rate = np.where(observed > 0, rate, brk[0, cols])
    return np.maximum(rate, 0.0)
