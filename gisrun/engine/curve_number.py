r"""NRCS curve number runoff, applied incrementally through a storm.

Equations
---------
Potential maximum retention from the curve number (NRCS 1986 TR-55 eq. 2-4,
here in SI): :math:`S = 25.4\,(1000/CN - 10)` mm. Cumulative excess for
cumulative rain :math:`P` (TR-55 eq. 2-1):

.. math:: Q(P) = \frac{(P - I_a)^2}{P - I_a + S} \quad (P > I_a),
          \qquad Q = 0 \ \text{otherwise}, \qquad I_a = \lambda S .

The excess of a step is :math:`Q(P_{k}) - Q(P_{k-1})`; the rest of the rain is
the loss (initial abstraction and continuing abstraction). Runoff starts when
cumulative rain exceeds :math:`I_a` (linearly interpolated inside the step);
that instant is reported as the time to ponding.

Antecedent runoff condition (column ``antecedent_condition``: 1 dry, 2 average
(default), 3 wet), converted from the tabulated AMC II number (Chow, Maidment
and Mays 1988, eqs. 5.5.4-5.5.5; NRCS NEH Part 630 ch. 10):

.. math:: CN_{I} = \frac{4.2\,CN_{II}}{10 - 0.058\,CN_{II}}, \qquad
          CN_{III} = \frac{23\,CN_{II}}{10 + 0.13\,CN_{II}} .

Initial abstraction ratio (column ``initial_abstraction_ratio``): 0.2
(TR-55, default) or 0.05 with the retention converted as published
(Hawkins et al. 2002; Woodward et al. 2003), S in inches:

.. math:: S_{0.05} = 1.33\,S_{0.20}^{1.15} .

Order: AMC conversion of the curve number, then :math:`S_{0.20}`, then (for
0.05) :math:`S_{0.05}`. The curve number has no depression storage (the
initial abstraction covers it) and no rate form (capacity is NaN).

References
----------
NRCS (1986). Urban Hydrology for Small Watersheds, Technical Release 55 (TR-55),
2nd ed., chapter 2.

NRCS (2004). National Engineering Handbook Part 630 Hydrology, chapter 10.

Chow, V. T., Maidment, D. R. and Mays, L. W. (1988). Applied Hydrology,
McGraw-Hill, section 5.5.

Hawkins, R. H. (1993). Asymptotic determination of runoff curve numbers from
data. J. Irrig. Drain. Eng. 119(2), 334-345.

Hawkins, R. H., Jiang, R., Woodward, D. E., Hjelmfelt, A. T. and Van Mullem,
J. A. (2002). Runoff curve number method: examination of the initial
abstraction ratio. Proc. Second Federal Interagency Hydrologic Modeling Conf.

Woodward, D. E., Hawkins, R. H., Jiang, R., Hjelmfelt, A. T., Van Mullem, J. A.
and Quan, Q. D. (2003). Runoff curve number method: examination of the initial
abstraction ratio. World Water & Environmental Resources Congress, ASCE.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import ParameterError
from ..units import FACTORS_TO_SI
from .base import (
    FloatArray,
    StepResult,
    no_ponding_offsets,
    start_offsets,
)
from .declare import PARAMETER_FRAME, Parameter

__all__ = [
    "NAME",
    "ORDER",
    "PARAMETERS",
    "Params",
    "State",
    "initial_state",
    "step",
    "cumulative_excess_m",
    "adjust_for_antecedent_condition",
    "retention_m",
    "curve_number_for_runoff",
    "equivalent_for_runoff",
]

NAME = "curve_number"
#: Position in listings and in the order of output columns.
ORDER = 30

#: Parameters (declarations; see :mod:`gisrun.engine.declare`). The ratio and the condition
#: are run options ([method] in the project file); the ratio may also be overridden per unit.
PARAMETERS: tuple[Parameter, ...] = (
    Parameter("curve_number", "-", default="cover_curve_number", low_open=True, high=100.0,
              impervious="impervious_curve_number", equivalent=True),
    Parameter("initial_abstraction_ratio", "-", default="run_abstraction_ratio",
              allowed=(0.2, 0.05), missing=0.2, impervious="run_abstraction_ratio"),
    Parameter("antecedent_condition", "-", default="run_antecedent_condition",
              allowed=(1.0, 2.0, 3.0), missing=2.0, overridable=False),
)

#: Metres in an inch (TR-55 states S in inches), from the one unit table.
INCH_M = FACTORS_TO_SI["in"]


def adjust_for_antecedent_condition(cn_ii: FloatArray, condition: FloatArray) -> FloatArray:
    """Curve number for antecedent condition 1, 2 or 3 from the AMC II number.

    Chow, Maidment and Mays (1988) eqs. 5.5.4 (dry) and 5.5.5 (wet).

    Examples
    --------
    >>> import numpy as np
    >>> adjust_for_antecedent_condition(np.array([80.0, 80.0, 80.0]), np.array([1, 2, 3])).round(1)
    array([62.7, 80. , 90.2])
    """
    cn = np.asarray(cn_ii, dtype=np.float64)
    cond = np.asarray(condition)
    dry = 4.2 * cn / (10.0 - 0.058 * cn)
    wet = 23.0 * cn / (10.0 + 0.13 * cn)
    return np.where(cond == 1, dry, np.where(cond == 3, wet, cn))


def retention_m(cn: FloatArray, ratio: FloatArray) -> FloatArray:
    """Potential maximum retention S for the initial abstraction ratio used, m.

    ``S = 25.4 (1000/CN - 10)`` mm (TR-55 eq. 2-4); for a ratio of 0.05,
    ``S0.05 = 1.33 S0.20^1.15`` with S in inches (Woodward et al. 2003).
    """
    # clip: AMC conversions of CN 100 may round a hair above 100
    s20 = INCH_M * np.maximum(1000.0 / np.asarray(cn, dtype=np.float64) - 10.0, 0.0)
    s05 = INCH_M * 1.33 * (s20 / INCH_M) ** 1.15
    return np.where(np.isclose(ratio, 0.05), s05, s20)


def cumulative_excess_m(rain_total_m: FloatArray, retention: FloatArray,
                        abstraction_m: FloatArray) -> FloatArray:
    """``Q(P) = (P - Ia)^2 / (P - Ia + S)`` for ``P > Ia``, else 0 (TR-55 eq. 2-1), m."""
    net = np.maximum(rain_total_m - abstraction_m, 0.0)
    denom = net + retention
    return np.where(net > 0, net * net / np.where(net > 0, denom, 1.0), 0.0)


def curve_number_for_runoff(rain_m: FloatArray, runoff_m: FloatArray, ratio: FloatArray,
                            condition: FloatArray) -> FloatArray:
    r"""The AMC II curve number whose runoff from ``rain_m`` is ``runoff_m`` (inverse of eq. 2-1).

    The rainfall-runoff back-calculation of Hawkins (1993): with
    :math:`I_a = \lambda S`, TR-55 eq. 2-1 is a quadratic in :math:`S` whose
    smaller root (the one with :math:`I_a \le P`) is, in a form free of cancellation,

    .. math:: S = \frac{2P(P - Q)}{b + \sqrt{4\lambda PQ + (1 - \lambda)^2 Q^2}},
              \qquad b = 2\lambda P + (1 - \lambda) Q,

    for :math:`\lambda = 0.2` the same as Hawkins' :math:`S = 5\,[P + 2Q -
    (4Q^2 + 5PQ)^{1/2}]`. For :math:`\lambda = 0.05` the retention is taken back
    to :math:`S_{0.20} = (S_{0.05}/1.33)^{1/1.15}` (inches), then
    :math:`CN = 1000/(10 + S_{0.20})` at the antecedent condition, converted back
    to AMC II by the inverses of Chow et al. (1988) eqs. 5.5.4-5.5.5:
    :math:`CN_{II} = 10\,CN_I/(4.2 + 0.058\,CN_I)` and
    :math:`CN_{II} = 10\,CN_{III}/(23 - 0.13\,CN_{III})`.

    ``runoff_m`` of 0 gives the largest curve number that still gives no runoff
    (:math:`I_a = P`); runoff at or above the rain gives 100; no rain gives NaN
    (every curve number gives no runoff).

    Hawkins, R. H. (1993). Asymptotic determination of runoff curve numbers from
    data. J. Irrig. Drain. Eng. 119(2), 334-345.

    Examples
    --------
    >>> float(curve_number_for_runoff(3.0 * INCH_M, 1.25 * INCH_M, 0.2, 2).round(9))
    80.0
    """
    p = np.asarray(rain_m, dtype=np.float64)
    q = np.clip(np.asarray(runoff_m, dtype=np.float64), 0.0, p)
    small = np.isclose(ratio, 0.05)
    lam = np.where(small, 0.05, 0.2)
    b = 2.0 * lam * p + (1.0 - lam) * q
    root = np.sqrt(4.0 * lam * p * q + (1.0 - lam) ** 2 * q * q)
    with np.errstate(divide="ignore", invalid="ignore"):
        s_in = 2.0 * p * (p - q) / (b + root) / INCH_M
        s20_in = np.where(small, (s_in / 1.33) ** (1.0 / 1.15), s_in)
        cn = 1000.0 / (10.0 + s20_in)
    cond = np.asarray(condition)
    cn_ii = np.where(cond == 1, 10.0 * cn / (4.2 + 0.058 * cn),
                     np.where(cond == 3, 10.0 * cn / (23.0 - 0.13 * cn), cn))
    return np.where(p > 0, np.minimum(cn_ii, 100.0), np.nan)


def equivalent_for_runoff(frame: pd.DataFrame, rain_m: FloatArray,
                          runoff_m: FloatArray) -> FloatArray:
    """The equivalent curve number of each row of ``frame`` (its ratio and condition).

    The closed-form inverse the lumped parameters use instead of a root search
    (:mod:`gisrun.parameters.equivalent`); see :func:`curve_number_for_runoff`.
    """
    _, ratio, condition = (p.read(frame) for p in PARAMETERS)
    return curve_number_for_runoff(rain_m, runoff_m, ratio, condition)


@dataclass(frozen=True)
class Params:
    """Curve number parameters, arrays of shape ``(n_units,)``.

    Attributes
    ----------
    curve_number : ndarray
        AMC II curve number, (0, 100].
    initial_abstraction_ratio : ndarray
        Ia/S, 0.2 or 0.05.
    antecedent_condition : ndarray
        1, 2 or 3.
    retention_m, initial_abstraction_m : ndarray
        Derived S and Ia, m.
    """

    curve_number: FloatArray
    initial_abstraction_ratio: FloatArray
    antecedent_condition: FloatArray
    retention_m: FloatArray = field(init=False)
    initial_abstraction_m: FloatArray = field(init=False)

    def __post_init__(self) -> None:
        cn = np.asarray(self.curve_number, dtype=np.float64)
        ratio = np.asarray(self.initial_abstraction_ratio, dtype=np.float64)
        cond = np.asarray(self.antecedent_condition, dtype=np.float64)
        if cn.ndim != 1 or ratio.shape != cn.shape or cond.shape != cn.shape:
            raise ValueError("curve number parameters must be 1-D arrays of one length")
        if not np.all((cn > 0) & (cn <= 100)):
            raise ValueError("curve_number must be in (0, 100]")
        if not np.all(np.isclose(ratio, 0.2) | np.isclose(ratio, 0.05)):
            raise ValueError("initial_abstraction_ratio must be 0.2 or 0.05")
        if not np.all(np.isin(cond, (1, 2, 3))):
            raise ValueError("antecedent_condition must be 1, 2 or 3")
        for name, a in (("curve_number", cn), ("initial_abstraction_ratio", ratio),
                        ("antecedent_condition", cond)):
            object.__setattr__(self, name, a)
        s = retention_m(adjust_for_antecedent_condition(cn, cond), ratio)
        object.__setattr__(self, "retention_m", s)
        object.__setattr__(self, "initial_abstraction_m", np.where(np.isclose(ratio, 0.05),
                                                                   0.05, 0.2) * s)

    @classmethod
    def from_frame(cls, frame: pd.DataFrame) -> Params:
        """Read ``curve_number`` and the optional ratio (0.2) and condition (2) columns.

        Raises
        ------
        ParameterError
            Missing curve number, or a value out of range.
        """
        cn, ratio, cond = (p.read(frame) for p in PARAMETERS)
        _check_allowed(frame, PARAMETERS[1], ratio,
                       "use 0.2 (TR-55) or 0.05 (with the published retention conversion)")
        _check_allowed(frame, PARAMETERS[2], cond, "use 1 (dry), 2 (average) or 3 (wet)")
        return cls(curve_number=cn, initial_abstraction_ratio=ratio, antecedent_condition=cond)


def _check_allowed(frame: pd.DataFrame, parameter: Parameter, values: FloatArray,
                   fix: str) -> None:
    name = parameter.column
    ok = np.zeros(values.shape, dtype=bool)
    for a in parameter.allowed:
        ok |= np.isclose(values, a)
    if not ok.all():
        pos = int(np.flatnonzero(~ok)[0])
        raise ParameterError(f"{PARAMETER_FRAME}:{name}:row {frame.index[pos]!r}",
                             f"value {float(values[pos])!r} is not allowed", fix)


@dataclass(frozen=True)
class State:
    """Curve number state: cumulative rain and excess, m (no surface storage)."""

    rain_total_m: FloatArray
    excess_total_m: FloatArray
    storage_m: FloatArray


def initial_state(params: Params) -> State:
    """No rain yet."""
    n = params.curve_number.shape[0]
    return State(np.zeros(n), np.zeros(n), np.zeros(n))


def step(params: Params, state: State, rain_m: FloatArray, dt_s: float) -> tuple[State, StepResult]:
    """Advance every unit by one step with ``rain_m`` of rain.

    Returns
    -------
    (State, StepResult)
    """
    ia = params.initial_abstraction_m
    before = state.rain_total_m
    after = before + rain_m
    total = cumulative_excess_m(after, params.retention_m, ia)
    excess = np.clip(total - state.excess_total_m, 0.0, rain_m)
    infil = rain_m - excess
    starts = (before <= ia) & (after > ia)
    if starts.any():
        frac = (ia - before) / np.where(starts, rain_m, 1.0)
        offset = start_offsets(starts, np.clip(frac, 0.0, 1.0) * dt_s)
    else:
        offset = no_ponding_offsets(starts.shape[0])
    nan = np.full(rain_m.shape, np.nan)
    result = StepResult(infil, excess, nan, offset)
    return State(after, state.excess_total_m + excess, state.storage_m), result
