r"""Horton infiltration with capacity tied to the infiltrated depth.

Equations
---------
Under ponding, Horton's capacity and cumulative infiltration after a time
:math:`t` are (Horton 1939; Chow, Maidment and Mays 1988, eqs. 4.2.9-4.2.10)

.. math::
   f(t) = f_c + (f_0 - f_c)\,e^{-k t}, \qquad
   F(t) = f_c\,t + \frac{f_0 - f_c}{k}\left(1 - e^{-k t}\right).

Under rain that does not pond, less water enters than the curve assumes, so the
capacity must follow the infiltrated depth, not clock time. Each unit keeps an
*equivalent time* :math:`t_e` on the ponded curve; the capacity is
:math:`f(t_e)`. In a step with supply rate :math:`i` (rain plus depression
storage, spread over the step):

1. :math:`i \ge f(t_e)`: ponded for the whole step,
   :math:`\Delta F = F(t_e + \Delta t) - F(t_e)`, :math:`t_e \mathrel{+}= \Delta t`.
2. :math:`f_c < i < f(t_e)`: the capacity reaches :math:`i` at
   :math:`t_p = -\ln\!\big((i - f_c)/(f_0 - f_c)\big)/k` on the curve, after
   :math:`\tau_p = (F(t_p) - F(t_e))/i` of the step. If :math:`\tau_p < \Delta t`
   the unit ponds there and follows the curve for the rest of the step.
3. Otherwise all supply infiltrates and :math:`t_e` moves to where
   :math:`F(t_e') = F(t_e) + i\,\Delta t`, found by Newton's method on the
   concave, increasing :math:`F` (first guess :math:`i\Delta t / f(t_e)`, a
   lower bound; iterates increase monotonically to the root).

The state is kept as the decay factor :math:`e = e^{-k t_e}`, so the capacity is
:math:`f_c + (f_0 - f_c)\,e` and the ponding point is
:math:`e_p = (i - f_c)/(f_0 - f_c)` without logarithms of times.

Recovery (optional, ``horton_recovery_per_s`` :math:`k_r > 0`): in a step with
no supply the capacity relaxes back toward :math:`f_0`,
:math:`f \leftarrow f_0 - (f_0 - f)\,e^{-k_r \Delta t}` (i.e.
:math:`1 - e \leftarrow (1 - e)\,e^{-k_r \Delta t}`), a first-order recovery at the rate
:math:`k_r` (the shipped rates per hour by soil group are gisrun's choice, see the
``horton_hsg`` table). Without recovery the
capacity does not change during dry spells.

Water that does not infiltrate fills depression storage; the rest is excess.

References
----------
Horton, R. E. (1939). Analysis of runoff-plat experiments with varying
infiltration-capacity. Trans. Am. Geophys. Union 20(4), 693-711.

Chow, V. T., Maidment, D. R. and Mays, L. W. (1988). Applied Hydrology,
McGraw-Hill, section 4.2.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import ParameterError
from .base import (
    FloatArray,
    StepResult,
    no_ponding_offsets,
    set_nonnegative_arrays,
    split_surface_water,
)
from .declare import DEPRESSION_STORAGE, PARAMETER_FRAME, Parameter

__all__ = [
    "NAME",
    "ORDER",
    "PARAMETERS",
    "Params",
    "State",
    "initial_state",
    "step",
    "capacity_m_per_s",
]

NAME = "horton"
#: Position in listings and in the order of output columns.
ORDER = 20

#: Parameters (declarations; see :mod:`gisrun.engine.declare`).
PARAMETERS: tuple[Parameter, ...] = (
    DEPRESSION_STORAGE,
    Parameter("horton_f0_m_per_s", "m/s", default="group_horton",
              then_lower=DEPRESSION_STORAGE.column),
    Parameter("horton_fc_m_per_s", "m/s", default="group_horton", equivalent=True,
              at_most="horton_f0_m_per_s", then_lower="horton_f0_m_per_s"),
    Parameter("horton_decay_per_s", "1/s", default="group_horton", composite="pervious_area"),
    Parameter("horton_recovery_per_s", "1/s", default="group_horton_recovery", missing=0.0,
              composite="pervious_area"),
)
_P = {p.column: p for p in PARAMETERS}

_RTOL = 1e-10
_MAX_NEWTON = 100


@dataclass(frozen=True)
class Params:
    """Horton parameters, arrays of shape ``(n_units,)``, SI.

    Attributes
    ----------
    f0_m_per_s, fc_m_per_s : ndarray
        Initial (dry) and final capacity, m/s, ``f0 >= fc >= 0``.
    decay_per_s : ndarray
        Decay constant ``k``, 1/s.
    recovery_per_s : ndarray
        Recovery rate of the capacity in steps without supply, 1/s (0 = none).
    depression_storage_m : ndarray
        Surface storage filled before runoff, m.
    """

    f0_m_per_s: FloatArray
    fc_m_per_s: FloatArray
    decay_per_s: FloatArray
    recovery_per_s: FloatArray
    depression_storage_m: FloatArray

    def __post_init__(self) -> None:
        set_nonnegative_arrays(self, ("f0_m_per_s", "fc_m_per_s", "decay_per_s",
                                      "recovery_per_s", "depression_storage_m"), "Horton")
        if np.any(self.f0_m_per_s < self.fc_m_per_s):
            raise ValueError("Horton f0 must be >= fc")

    @classmethod
    def from_frame(cls, frame: pd.DataFrame) -> Params:
        """Read the SI Horton columns of the unit parameter frame.

        ``horton_recovery_per_s`` may be absent (no recovery).

        Raises
        ------
        ParameterError
            A column is missing, a value is out of range, or ``f0 < fc``.
        """
        f0 = _P["horton_f0_m_per_s"].read(frame)
        fc = _P["horton_fc_m_per_s"].read(frame)
        _check_f0_above_fc(frame, f0, fc)
        return cls(
            f0_m_per_s=f0,
            fc_m_per_s=fc,
            decay_per_s=_P["horton_decay_per_s"].read(frame),
            recovery_per_s=_P["horton_recovery_per_s"].read(frame),
            depression_storage_m=DEPRESSION_STORAGE.read(frame),
        )


def _check_f0_above_fc(frame: pd.DataFrame, f0: FloatArray, fc: FloatArray) -> None:
    bad = np.flatnonzero(f0 < fc)
    if bad.size:
        row = frame.index[bad[0]]
        raise ParameterError(f"{PARAMETER_FRAME}:horton_f0_m_per_s:row {row!r}",
                             f"initial capacity {float(f0[bad[0]])!r} m/s is below the final "
                             f"capacity {float(fc[bad[0]])!r} m/s",
                             "give horton_f0_m_per_s >= horton_fc_m_per_s")


@dataclass(frozen=True)
class State:
    """Horton state per unit.

    ``decay_factor`` is ``exp(-k t_e)`` at the equivalent time ``t_e`` on the ponded curve
    (1 when dry), so the capacity is ``fc + (f0 - fc) * decay_factor``.
    """

    decay_factor: FloatArray
    storage_m: FloatArray
    ponded: np.ndarray


def initial_state(params: Params) -> State:
    """Dry start: capacity ``f0``, empty storage, not ponded."""
    n = params.f0_m_per_s.shape[0]
    return State(np.ones(n), np.zeros(n), np.zeros(n, dtype=bool))


def capacity_m_per_s(params: Params, decay_factor: FloatArray) -> FloatArray:
    """Horton capacity ``fc + (f0 - fc) exp(-k t_e)`` from the decay factor, m/s."""
    return params.fc_m_per_s + (params.f0_m_per_s - params.fc_m_per_s) * decay_factor


def step(params: Params, state: State, rain_m: FloatArray, dt_s: float) -> tuple[State, StepResult]:
    """Advance every unit by one step of ``dt_s`` seconds with ``rain_m`` of rain.

    Returns
    -------
    (State, StepResult)
    """
    p, e = params, state.decay_factor
    supply = rain_m + state.storage_m
    d_infil = supply.copy()  # all infiltrates unless the unit ponds
    ponded = np.zeros(supply.shape, dtype=bool)
    offset = no_ponding_offsets(supply.shape[0])
    e_new = e.copy()
    hi = np.flatnonzero(supply > p.fc_m_per_s * dt_s)  # only these can pond
    if hi.size:
        d_sub, ponded_sub, tau_sub, e_sub = _above_fc(p, hi, e[hi], supply[hi], dt_s)
        d_infil[hi], ponded[hi], e_new[hi] = d_sub, ponded_sub, e_sub
        fresh = ponded_sub & ~state.ponded[hi]
        if fresh.any():  # ponding starts in this step for these units
            offset = np.full(supply.shape, np.nan)
            offset[hi[fresh]] = tau_sub[fresh]
    light = np.flatnonzero((supply > 0) & ~ponded & (p.decay_per_s > 0))
    if light.size:
        e_new[light] = _after_infiltrating(p, light, e[light], supply[light])
    dry = np.flatnonzero((supply <= 0) & (p.recovery_per_s > 0))
    if dry.size:  # first-order recovery of the capacity toward f0
        e_new[dry] = 1.0 - (1.0 - e[dry]) * np.exp(-p.recovery_per_s[dry] * dt_s)
    storage, excess = split_surface_water(supply - d_infil, p.depression_storage_m)
    result = StepResult(d_infil, excess, capacity_m_per_s(p, e_new), offset)
    return State(e_new, storage, ponded), result


def _decayed_s(k: FloatArray, duration_s: FloatArray) -> FloatArray:
    """``(1 - exp(-k d)) / k``, and ``d`` where ``k = 0``, s."""
    positive = k > 0
    return np.where(positive, -np.expm1(-k * duration_s) / np.where(positive, k, 1.0), duration_s)


def _above_fc(p: Params, idx: np.ndarray, e: FloatArray, supply: FloatArray, dt_s: float
              ) -> tuple[FloatArray, np.ndarray, FloatArray, FloatArray]:
    """Units whose supply rate exceeds fc: (infiltration, ponded, tau_p, new decay factor).

    The capacity falls to the rate ``i`` at decay factor ``e_p = (i - fc) / (f0 - fc)``, after
    infiltrating ``D_p = [fc ln(e / e_p) + (f0 - fc)(e - e_p)] / k``, i.e. ``tau_p = D_p / i``
    into the step (0 if ponded from the start); then the ponded curve for ``dt - tau_p``.
    """
    k, fc = p.decay_per_s[idx], p.fc_m_per_s[idx]
    span = p.f0_m_per_s[idx] - fc
    rate = supply / dt_s
    start = rate >= fc + span * e
    can = ~start & (k > 0)  # k = 0: constant capacity f0 above the rate, never ponds
    e_p = np.where(can, (rate - fc) / np.where(can, span, 1.0), e)
    with np.errstate(over="ignore", divide="ignore"):  # k near 0: ponds beyond float range
        depth = np.where(can, (fc * np.log(e / e_p) + span * (e - e_p)) / np.where(can, k, 1.0),
                         np.where(start, 0.0, np.inf))
        tau = depth / rate
    ponded = tau < dt_s
    rest = np.where(ponded, dt_s - tau, 0.0)
    gain = fc * rest + span * e_p * _decayed_s(k, rest)
    d_infil = np.where(ponded, np.minimum(np.where(ponded, depth, 0.0) + gain, supply), supply)
    e_new = np.where(ponded, e_p * np.exp(-k * rest), e)
    return d_infil, ponded, np.where(ponded, tau, np.nan), e_new


def _after_infiltrating(p: Params, idx: np.ndarray, e: FloatArray, depth_m: FloatArray
                        ) -> FloatArray:
    """Return the decay factor after ``depth_m`` infiltrated without ponding (``k > 0``).

    Solves ``fc u + A (1 - exp(-u)) = k D`` (``A = (f0 - fc) e``) for ``u = k d`` by Newton's
    method, then returns ``e exp(-u)``. First guess: the root of the model with
    ``1 - exp(-u) ~ u - u^2/2`` (an upper bound, relative error O(u^2)), or ``k D / f`` where
    that model has no root. The residual is concave and increasing, so Newton converges.
    """
    k, fc = p.decay_per_s[idx], p.fc_m_per_s[idx]
    amp = (p.f0_m_per_s[idx] - fc) * e
    target = k * depth_m
    slope = fc + amp
    disc = slope * slope - 2.0 * amp * target
    u = np.where(disc > 0, 2.0 * target / (slope + np.sqrt(np.maximum(disc, 0.0))),
                 target / slope)
    active = np.arange(u.size)
    ua, ta, fa, aa = u, target, fc, amp
    for _ in range(_MAX_NEWTON):
        miss = ta - (fa * ua - aa * np.expm1(-ua))
        todo = np.abs(miss) > _RTOL * ta
        if not todo.any():
            break
        keep = np.flatnonzero(todo)
        active, ua, ta, fa, aa, miss = (x[keep] for x in (active, ua, ta, fa, aa, miss))
        ua = ua + miss / (fa + aa * np.exp(-ua))
        u[active] = ua
    return e * np.exp(-u)
