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

Recovery (optional, ``horton_recovery_per_s`` :math:`k_r > 0`): in a step with
no supply the capacity relaxes back toward :math:`f_0`,
:math:`f \leftarrow f_0 - (f_0 - f)\,e^{-k_r \Delta t}`, and :math:`t_e` is set
from the new capacity (common practice for continuous simulation; a
first-order drying recovery as described e.g. by Bedient and Huber, Hydrology
and Floodplain Analysis -- from memory). Without recovery the capacity does not
change during dry spells.

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
from .base import PARAMETER_FRAME, FloatArray, StepResult, read_column, split_surface_water

__all__ = ["NAME", "Params", "State", "initial_state", "step", "curve_increment_m"]

NAME = "horton"

_RTOL = 1e-12
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
        Recovery constant during dry steps, 1/s (0 = none).
    depression_storage_m : ndarray
        Surface storage filled before runoff, m.
    """

    f0_m_per_s: FloatArray
    fc_m_per_s: FloatArray
    decay_per_s: FloatArray
    recovery_per_s: FloatArray
    depression_storage_m: FloatArray

    def __post_init__(self) -> None:
        for name in ("f0_m_per_s", "fc_m_per_s", "decay_per_s", "recovery_per_s",
                     "depression_storage_m"):
            a = np.asarray(getattr(self, name), dtype=np.float64)
            if a.ndim != 1 or a.shape != np.shape(self.f0_m_per_s):
                raise ValueError("Horton parameters must be 1-D arrays of one length")
            if not np.all(np.isfinite(a) & (a >= 0)):
                raise ValueError(f"Horton {name} must be finite and >= 0")
            object.__setattr__(self, name, a)
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
        f0 = read_column(frame, "horton_f0_m_per_s", low=0.0)
        fc = read_column(frame, "horton_fc_m_per_s", low=0.0)
        _check_f0_above_fc(frame, f0, fc)
        return cls(
            f0_m_per_s=f0,
            fc_m_per_s=fc,
            decay_per_s=read_column(frame, "horton_decay_per_s", low=0.0),
            recovery_per_s=read_column(frame, "horton_recovery_per_s", default=0.0, low=0.0),
            depression_storage_m=read_column(frame, "depression_storage_m", low=0.0),
        )


def _check_f0_above_fc(frame: pd.DataFrame, f0: FloatArray, fc: FloatArray) -> None:
    bad = np.flatnonzero(f0 < fc)
    if bad.size:
        row = frame.index[bad[0]]
        raise ParameterError(f"{PARAMETER_FRAME}:horton_f0_m_per_s:row {row!r}",
                             f"initial capacity {float(f0[bad[0]])!r} m/s is below the final capacity "
                             f"{float(fc[bad[0]])!r} m/s", "give horton_f0_m_per_s >= horton_fc_m_per_s")


@dataclass(frozen=True)
class State:
    """Horton state per unit: equivalent time on the ponded curve, storage, ponded flag."""

    equivalent_time_s: FloatArray
    storage_m: FloatArray
    ponded: np.ndarray


def initial_state(params: Params) -> State:
    """Dry start: capacity ``f0``, empty storage, not ponded."""
    n = params.f0_m_per_s.shape[0]
    return State(np.zeros(n), np.zeros(n), np.zeros(n, dtype=bool))


def capacity_m_per_s(params: Params, equivalent_time_s: FloatArray) -> FloatArray:
    """Horton capacity ``fc + (f0 - fc) exp(-k t)`` at an equivalent time, m/s."""
    p = params
    return p.fc_m_per_s + (p.f0_m_per_s - p.fc_m_per_s) * np.exp(-p.decay_per_s * equivalent_time_s)


def curve_increment_m(params: Params, start_s: FloatArray, duration_s: FloatArray) -> FloatArray:
    """``F(start + duration) - F(start)`` on the ponded Horton curve, m (exact, no cancellation)."""
    p = params
    k = p.decay_per_s
    decayed = -np.expm1(-k * duration_s) / np.where(k > 0, k, 1.0)
    decayed = np.where(k > 0, decayed, duration_s)
    return (p.fc_m_per_s * duration_s
            + (p.f0_m_per_s - p.fc_m_per_s) * np.exp(-k * start_s) * decayed)


def step(params: Params, state: State, rain_m: FloatArray, dt_s: float) -> tuple[State, StepResult]:
    """Advance every unit by one step of ``dt_s`` seconds with ``rain_m`` of rain.

    Returns
    -------
    (State, StepResult)
    """
    p, te = params, state.equivalent_time_s
    supply = rain_m + state.storage_m
    rate = supply / dt_s
    cap0 = capacity_m_per_s(p, te)
    wet = supply > 0
    ponded_start = wet & (rate >= cap0)
    t_pond, tau_pond = _ponding_point(p, te, rate, ponded_start)
    ponds_inside = tau_pond < dt_s
    ponded = ponded_start | ponds_inside
    advance = np.where(ponded_start, dt_s, (t_pond - te) + (dt_s - tau_pond))
    advance = np.where(ponded, advance, 0.0)
    d_infil = np.where(ponded, curve_increment_m(p, te, advance), supply)
    d_infil = np.clip(d_infil, 0.0, supply)
    unponded_wet = wet & ~ponded
    te_new = te + advance
    te_new = np.where(unponded_wet, te + _advance_for_depth(p, te, supply, unponded_wet), te_new)
    te_new = np.where(wet, te_new, _recover(p, te, dt_s))
    storage, excess = split_surface_water(supply - d_infil, p.depression_storage_m)
    new_start = ~state.ponded
    offset = np.where(ponded_start & new_start, 0.0,
                      np.where(ponds_inside & new_start, tau_pond, np.nan))
    result = StepResult(d_infil, excess, capacity_m_per_s(p, te_new), offset)
    return State(te_new, storage, ponded), result


def _ponding_point(p: Params, te: FloatArray, rate: FloatArray,
                   ponded_start: np.ndarray) -> tuple[FloatArray, FloatArray]:
    """Equivalent time where capacity falls to ``rate`` and the step time to get there.

    Returns ``(t_p, tau_p)``; ``tau_p = inf`` where the unit cannot pond this way.
    """
    span = p.f0_m_per_s - p.fc_m_per_s
    can = ~ponded_start & (rate > p.fc_m_per_s) & (p.decay_per_s > 0) & (span > 0)
    ratio = np.where(can, (rate - p.fc_m_per_s) / np.where(can, span, 1.0), 1.0)
    with np.errstate(over="ignore"):  # a decay constant near 0 puts t_p beyond float range
        t_p = -np.log(ratio) / np.where(can, p.decay_per_s, 1.0)
    can &= np.isfinite(t_p)
    t_p = np.where(can, np.maximum(t_p, te), te)
    with np.errstate(over="ignore"):  # inf: cannot pond within any step
        tau = curve_increment_m(p, te, t_p - te) / np.where(can, rate, 1.0)
    return t_p, np.where(can, tau, np.inf)


def _advance_for_depth(p: Params, te: FloatArray, depth_m: FloatArray,
                       mask: np.ndarray) -> FloatArray:
    """Equivalent-time advance ``d`` with ``F(te + d) - F(te) = depth`` where ``mask``, s."""
    d = np.zeros_like(te)
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return d
    sub = _SubParams(p, idx)
    t0, target = te[idx], depth_m[idx]
    x = target / capacity_m_per_s(sub, t0)  # first Newton step from 0: a lower bound
    for _ in range(_MAX_NEWTON):
        miss = target - curve_increment_m(sub, t0, x)
        todo = np.abs(miss) > _RTOL * target
        if not todo.any():
            break
        x = x + np.where(todo, miss / capacity_m_per_s(sub, t0 + x), 0.0)
    d[idx] = x
    return d


def _recover(p: Params, te: FloatArray, dt_s: float) -> FloatArray:
    """Equivalent time after a dry step with recovery toward ``f0`` (unchanged if none)."""
    k, kr = p.decay_per_s, p.recovery_per_s
    use = (kr > 0) & (k > 0)
    # fraction of the (f0 - fc) span lost: 1 - exp(-k te), relaxed by exp(-kr dt)
    lost = -np.expm1(-k * te) * np.exp(-kr * dt_s)
    te_rec = -np.log1p(-np.minimum(lost, 1.0 - 1e-16)) / np.where(use, k, 1.0)
    return np.where(use, te_rec, te)


class _SubParams:
    """A view of some units' Horton parameters (no checks; internal to Newton)."""

    def __init__(self, p: Params, idx: np.ndarray) -> None:
        self.f0_m_per_s = p.f0_m_per_s[idx]
        self.fc_m_per_s = p.fc_m_per_s[idx]
        self.decay_per_s = p.decay_per_s[idx]
