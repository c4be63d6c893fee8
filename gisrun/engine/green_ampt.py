r"""Green-Ampt infiltration under unsteady rain, with ponding inside a step.

Equations
---------
With hydraulic conductivity :math:`K_s`, wetting-front suction head
:math:`\psi` and moisture deficit :math:`\Delta\theta` (effective porosity x
(1 - initial effective saturation)), write :math:`P = \psi\,\Delta\theta`. The
infiltration capacity after a cumulative infiltration :math:`F` is

.. math:: f_p(F) = K_s \left(1 + \frac{P}{F}\right).

Each step has a constant supply rate :math:`i` = (rain of the step + water held
in depression storage) / :math:`\Delta t`, so stored water keeps infiltrating
after the rain stops. Three cases (Mein and Larson 1973; Chu 1978; Chow,
Maidment and Mays 1988, section 4.4):

1. :math:`i \le K_s`, or the capacity stays above :math:`i` for the whole step:
   everything infiltrates, :math:`\Delta F = i\,\Delta t`.
2. Ponded from the start (:math:`i \ge f_p(F_0)`): :math:`F` follows the
   ponded Green-Ampt equation for the whole step.
3. :math:`i > K_s` and the surface ponds part way: ponding when
   :math:`F_p = K_s P / (i - K_s)`, at :math:`t_p = (F_p - F_0)/i` into the
   step; afterwards the ponded equation from :math:`F_p` for
   :math:`\Delta t - t_p`.

Ponded equation from :math:`F_s` over a time :math:`\tau`, in the increment
:math:`G = F - F_s` (implicit; Chow et al. 1988 eq. 4.4.8 in its general form):

.. math:: G - P \ln\!\left(1 + \frac{G}{P + F_s}\right) = K_s \tau .

It is solved by Newton's method to a relative residual of ``1e-9``. With
:math:`y = G/(P+F_s)`, :math:`b = F_s/(P+F_s)` and :math:`T = K_s\tau/(P+F_s)`
the equation is :math:`b\,y + (1-b)\,h(y) = T` with :math:`h(y) = y - \ln(1+y)`.
The explicit first guess replaces :math:`\ln(1+y)` by its [2/2] Pade form
:math:`y(6+y)/(6+4y)`, which turns the equation into the quadratic
:math:`(3+b)\,y^2 + (6b - 4T)\,y - 6T = 0`; its positive root is exact when
:math:`P = 0` and has relative error :math:`O(y^3)` for short steps. As the left
side is convex and increasing in :math:`y`, Newton converges from any positive
guess; units within tolerance drop out of the iteration.

Edge cases: :math:`K_s = 0` infiltrates nothing (impervious); :math:`P = 0`
gives a constant capacity :math:`K_s`; at :math:`F = 0` the capacity is
infinite (reported as ``inf``). Infiltration is clipped to ``[0, supply]``.

Water that does not infiltrate fills depression storage up to
``depression_storage_m``; the rest is excess. Per step,
``rain = infiltration + excess + storage change``.

References
----------
Green, W. H. and Ampt, G. A. (1911). Studies on soil physics, 1: the flow of air
and water through soils. J. Agric. Sci. 4(1), 1-24.

Mein, R. G. and Larson, C. L. (1973). Modeling infiltration during a steady
rain. Water Resour. Res. 9(2), 384-394.

Chu, S. T. (1978). Infiltration during an unsteady rain. Water Resour. Res.
14(3), 461-466.

Chow, V. T., Maidment, D. R. and Mays, L. W. (1988). Applied Hydrology,
McGraw-Hill, sections 4.3-4.4.

Rawls, W. J., Brakensiek, D. L. and Miller, N. (1983). Green-Ampt infiltration
parameters from soils data. J. Hydraul. Eng. 109(1), 62-70.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .base import (
    FloatArray,
    StepResult,
    no_ponding_offsets,
    set_nonnegative_arrays,
    split_surface_water,
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
    "ponded_increment_m",
]

NAME = "green_ampt"
#: Position in listings and in the order of output columns.
ORDER = 10

#: Parameters (declarations; see :mod:`gisrun.engine.declare`).
PARAMETERS: tuple[Parameter, ...] = (
    Parameter("ks_m_per_s", "m/s", default="texture_green_ampt", positive_when_pervious=True,
              equivalent=True, then_lower=DEPRESSION_STORAGE.column),
    Parameter("suction_head_m", "m", default="texture_green_ampt", composite="pervious_area"),
    Parameter("moisture_deficit", "-", default="moisture_deficit", high=1.0,
              composite="pervious_area"),
    DEPRESSION_STORAGE,
    # soil properties the moisture deficit is derived from (override columns only)
    Parameter("effective_porosity", "-", default="texture_green_ampt", low_open=True, high=1.0,
              impervious=math.nan, in_frame=False),
    Parameter("total_porosity", "-", default="texture_green_ampt", low_open=True, high=1.0,
              impervious=math.nan, in_frame=False),
)
_P = {p.column: p for p in PARAMETERS}

#: Relative residual to which the ponded equation is solved.
NEWTON_RTOL = 1e-9
_MAX_NEWTON = 60
#: Below this ``y`` the function ``y - log1p(y)`` is evaluated by its series.
_SERIES_BELOW = 1e-3
_NEGLIGIBLE_M = 1e-200
_FLOOR = 1e-300


@dataclass(frozen=True)
class Params:
    """Green-Ampt parameters, arrays of shape ``(n_units,)``, SI.

    Attributes
    ----------
    ks_m_per_s : ndarray
        Hydraulic conductivity, m/s (0 = impervious).
    suction_head_m : ndarray
        Wetting-front suction head, m.
    moisture_deficit : ndarray
        Initial moisture deficit, - (0 to 1).
    depression_storage_m : ndarray
        Surface storage filled before runoff, m.
    suction_deficit_m : ndarray
        Derived: ``suction_head_m * moisture_deficit``, m.
    ks_suction_m2_per_s : ndarray
        Derived: ``ks_m_per_s * suction_deficit_m``, m2/s.
    constant_capacity : ndarray of int
        Derived: units with ``Ks P = 0``, whose capacity is the constant ``Ks``.
    """

    ks_m_per_s: FloatArray
    suction_head_m: FloatArray
    moisture_deficit: FloatArray
    depression_storage_m: FloatArray
    suction_deficit_m: FloatArray = field(init=False)
    ks_suction_m2_per_s: FloatArray = field(init=False)
    constant_capacity: np.ndarray = field(init=False)

    def __post_init__(self) -> None:
        set_nonnegative_arrays(self, ("ks_m_per_s", "suction_head_m", "moisture_deficit",
                                      "depression_storage_m"), "Green-Ampt")
        if np.any(self.moisture_deficit > 1):
            raise ValueError("Green-Ampt moisture_deficit must be <= 1")
        object.__setattr__(self, "suction_deficit_m", self.suction_head_m * self.moisture_deficit)
        object.__setattr__(self, "ks_suction_m2_per_s", self.ks_m_per_s * self.suction_deficit_m)
        object.__setattr__(self, "constant_capacity", np.flatnonzero(self.ks_suction_m2_per_s == 0))

    @classmethod
    def from_frame(cls, frame: pd.DataFrame) -> Params:
        """Read the SI columns of the unit parameter frame.

        Raises
        ------
        ParameterError
            A column is missing or a value is empty, negative or out of range.
        """
        return cls(
            ks_m_per_s=_P["ks_m_per_s"].read(frame),
            suction_head_m=_P["suction_head_m"].read(frame),
            moisture_deficit=_P["moisture_deficit"].read(frame),
            depression_storage_m=DEPRESSION_STORAGE.read(frame),
        )


@dataclass(frozen=True)
class State:
    """Green-Ampt state per unit: cumulative infiltration, storage, ponded flag."""

    infil_m: FloatArray
    storage_m: FloatArray
    ponded: np.ndarray


def initial_state(params: Params) -> State:
    """Dry start: nothing infiltrated, empty storage, not ponded."""
    n = params.ks_m_per_s.shape[0]
    return State(np.zeros(n), np.zeros(n), np.zeros(n, dtype=bool))


def step(params: Params, state: State, rain_m: FloatArray, dt_s: float) -> tuple[State, StepResult]:
    """Advance every unit by one step of ``dt_s`` seconds with ``rain_m`` of rain.

    Parameters
    ----------
    params : Params
    state : State
    rain_m : ndarray, shape (n_units,)
        Rain depth of the step, m (uniform over the step).
    dt_s : float
        Step length, s.

    Returns
    -------
    (State, StepResult)
    """
    f0 = state.infil_m
    supply = rain_m + state.storage_m
    # A unit ponds inside the step when Fp = Ks P / (i - Ks) < F0 + i dt with i > Ks; in
    # product form (no division, no overflow) that is (i - Ks)(F0 + i dt) > Ks P, which
    # is false whenever i <= Ks. Every other unit infiltrates its whole supply (case 1).
    # The rate is computed once and used below too: with P = 0 a rate a rounding away from Ks
    # must not pass this test and then give Fp = 0/0.
    infil = f0 + supply
    rate = supply / dt_s
    test = np.subtract(rate, params.ks_m_per_s)
    np.multiply(test, infil, out=test)
    ponds = np.greater(test, params.ks_suction_m2_per_s)
    idx = np.flatnonzero(ponds)
    d_infil = supply  # the supply array becomes the infiltration (changed where units pond)
    storage, excess = np.zeros(supply.shape), np.zeros(supply.shape)
    offset = no_ponding_offsets(supply.shape[0])
    # inf and 0/0 below are expected and handled (capacity at F = 0, Fp for i a hair above Ks)
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        if idx.size:
            f0_sub, supply_sub = f0[idx], supply[idx]
            d_sub, t_sub = _ponding(params.ks_m_per_s[idx], params.suction_deficit_m[idx],
                                    f0_sub, supply_sub, rate[idx], dt_s)
            d_infil[idx] = d_sub
            infil[idx] = f0_sub + d_sub
            storage[idx], excess[idx] = split_surface_water(supply_sub - d_sub,
                                                            params.depression_storage_m[idx])
            fresh = ~state.ponded[idx]
            if fresh.any():  # ponding starts in this step for these units
                offset = np.full(supply.shape, np.nan)
                offset[idx[fresh]] = t_sub[fresh]
        capacity = _capacity(params, infil)
    return State(infil, storage, ponds), StepResult(d_infil, excess, capacity, offset)


def _ponding(ks: FloatArray, pd_m: FloatArray, f0: FloatArray, supply: FloatArray,
             rate: FloatArray, dt_s: float) -> tuple[FloatArray, FloatArray]:
    """Cases 2 and 3 for units that pond during the step: (infiltration, t_p).

    With ``Fp = Ks P / (i - Ks)`` and ``t_p = max((Fp - F0) / i, 0)``: ``t_p = 0`` is case 2
    (ponded from the start, ``Fp <= F0``), ``0 < t_p < dt`` case 3. The caller's test
    guarantees ``rate > Ks`` for these units.
    """
    f_pond = ks * pd_m / (rate - ks)  # inf for a rate a hair above Ks (caller ignores overflow)
    # rounding may put t_p a hair past dt for a unit that ponds at the very end of the step
    t_pond = np.minimum(np.maximum((f_pond - f0) / rate, 0.0), dt_s)
    start = np.maximum(f_pond, f0)
    gain = _solve_ponded(start, pd_m, ks * (dt_s - t_pond))
    return np.minimum((start - f0) + gain, supply), t_pond


def capacity_m_per_s(params: Params, infil_m: FloatArray) -> FloatArray:
    """Infiltration capacity ``Ks (1 + P / F)`` after ``infil_m`` infiltrated, m/s.

    ``inf`` at ``F = 0`` where ``Ks > 0`` and ``P > 0``; ``Ks`` where ``P = 0``.
    """
    # F of a few 1e-308 m or F = 0: capacity beyond float range (inf); 0/0 where Ks P = 0
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        return _capacity(params, np.asarray(infil_m, dtype=np.float64))


def _capacity(params: Params, infil_m: FloatArray) -> FloatArray:
    """:func:`capacity_m_per_s` without the floating-point error state (the caller sets it)."""
    cap = params.ks_suction_m2_per_s / infil_m
    cap += params.ks_m_per_s
    if params.constant_capacity.size:  # Ks P = 0: no suction term, not 0/0 = NaN
        cap[params.constant_capacity] = params.ks_m_per_s[params.constant_capacity]
    return cap


def ponded_increment_m(start_m: FloatArray, suction_deficit_m: FloatArray,
                       ks_time_m: FloatArray) -> FloatArray:
    """Solve the ponded Green-Ampt equation for the infiltration increment, m.

    Solves ``G - P ln(1 + G / (P + Fs)) = Ks * tau`` for ``G >= 0``.

    Parameters
    ----------
    start_m : ndarray
        Cumulative infiltration at the start of ponded infiltration, ``Fs``, m.
    suction_deficit_m : ndarray
        ``P = suction head x moisture deficit``, m.
    ks_time_m : ndarray
        ``Ks * tau``: conductivity times ponded duration, m.

    Returns
    -------
    ndarray
        The increment ``G``, m, to a relative residual of :data:`NEWTON_RTOL`.

    Examples
    --------
    >>> import numpy as np
    >>> g = ponded_increment_m(np.array([0.0]), np.array([0.0568]), np.array([0.0065]))
    >>> round(float(g[0]) * 100, 2)  # cm; Chow et al. (1988) Example 4.3.1
    3.17
    """
    fs, p, k = np.broadcast_arrays(*(np.asarray(a, dtype=np.float64)
                                     for a in (start_m, suction_deficit_m, ks_time_m)))
    return _solve_ponded(fs, p, k)


def _solve_ponded(fs: FloatArray, p: FloatArray, k: FloatArray) -> FloatArray:
    """:func:`ponded_increment_m` for float64 arrays of one shape."""
    scale = fs + p
    # P + Fs below 1e-200 m: the suction term P ln(1 + G/(P+Fs)) is below 1e-197 m, so the
    # capacity is the constant Ks and G = Ks tau (this also covers P = Fs = 0).
    has_scale = scale > _NEGLIGIBLE_M
    if has_scale.all():
        q, b, t = scale, fs / scale, k / scale
    else:
        q = np.where(has_scale, scale, 1.0)
        b = np.where(has_scale, fs / q, 1.0)
        t = np.where(has_scale, k / q, k)
    y = _first_guess(b, t)
    if np.all(t > 0):
        active, ya, ba, ta = slice(None), y, b, t
    else:  # K tau = 0 (impervious, or no ponded time): G = 0, nothing to solve
        y[t <= 0] = 0.0
        active = np.flatnonzero(t > 0)
        ya, ba, ta = y[active], b[active], t[active]
    tol = NEWTON_RTOL * ta + _FLOOR  # the absolute floor only matters for subnormal K tau
    for it in range(_MAX_NEWTON):
        r = _residual(ya, ba, ta)
        todo = np.abs(r) > tol
        if not todo.any():
            break
        # Newton on every remaining unit: a unit already within tolerance only gets closer
        move = r * ((1.0 + ya) / (ba + ya))
        ya = ya - move
        if it >= 2:  # stop where float precision is exhausted (subnormal or huge K tau)
            todo &= np.abs(move) > 4e-16 * ya
        if todo.sum() * 2 < todo.size:  # drop the converged units once they are the majority
            y[active] = ya
            keep = np.flatnonzero(todo)
            active = keep if isinstance(active, slice) else active[keep]
            ya, ba, ta, tol = ya[keep], ba[keep], ta[keep], tol[keep]
    else:  # pragma: no cover - convex increasing equation from a positive guess converges
        raise RuntimeError("Green-Ampt Newton iteration did not converge")
    y[active] = ya
    return np.maximum(y, 0.0) * q


def _first_guess(b: FloatArray, t: FloatArray) -> FloatArray:
    """Explicit first guess of ``y`` from the [2/2] Pade form of ``ln(1 + y)``.

    ``ln(1+y) ~ y (6 + y) / (6 + 4 y)`` turns ``b y + (1-b) h(y) = T`` into
    ``(3 + b) y^2 + (6 b - 4 T) y - 6 T = 0``; its positive root has relative error
    ``O(y^3)`` (below 3e-6 for ``y <= 0.01``, 3e-4 for ``y <= 0.1``). Newton on the convex,
    increasing residual converges from any positive guess.
    """
    t = np.minimum(t, 1e150)  # keeps the squares finite; Newton takes it from there
    a2 = 3.0 + b
    b1 = 6.0 * b - 4.0 * t
    root = np.sqrt(b1 * b1 + 24.0 * a2 * t)
    # b1 + root cancels where b1 < 0 (replaced below) and is 0 where T = 0 (set to 0 later)
    with np.errstate(divide="ignore", invalid="ignore"):
        y = 12.0 * t / (b1 + root)
    neg = b1 < 0  # pick the form of the quadratic root that does not cancel
    if neg.any():
        y[neg] = 0.5 * (root[neg] - b1[neg]) / a2[neg]
    return y


def _residual(y: FloatArray, b: FloatArray, t: FloatArray) -> FloatArray:
    """``b y + (1 - b) h(y) - T`` with ``h(y) = y - log1p(y)`` (series for small y)."""
    return b * y + (1.0 - b) * _y_minus_log1p(y) - t


def _y_minus_log1p(y: FloatArray) -> FloatArray:
    out = y - np.log1p(y)
    small = y < _SERIES_BELOW
    if small.any():  # direct form cancels for small y: use the series there
        ys = y[small]
        out[small] = ys * ys * (0.5 - ys * (1.0 / 3.0 - ys * (0.25 - ys * 0.2)))
    return out
