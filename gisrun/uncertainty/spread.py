r"""How each uncertain parameter is spread: its distribution, what its range means, its bounds.

A parameter's range is a pair ``low``/``high`` around the value the run uses (the
*central* value). What the pair means depends on the parameter (:data:`SPREADS`):

``lognormal``
    ``low`` and ``high`` are the central value divided and multiplied by one log
    standard deviation (:math:`\ln v \sim N(\ln c, \sigma)`, ``low = c e^{-\sigma}``).
    Rawls, Brakensiek and Miller (1983) report the suction head this way (a
    geometric mean with a range of one standard deviation); conductivity is
    log-normal as the soils literature reports it.
``normal``
    ``low`` and ``high`` are the central value minus and plus ``z_of_range``
    standard deviations; the distribution is bounded (truncated) to the
    parameter's physical range. Effective porosity (one standard deviation,
    Rawls et al. 1983) and the curve number (antecedent runoff conditions I and
    III as the 10th and 90th percentiles, ``z = 1.2816``; see
    :mod:`gisrun.uncertainty.ranges`).
``uniform``
    Every value between ``low`` and ``high`` equally likely: a class *defined* by
    an interval (a hydrologic soil group's transmission rate, TR-55 1986 App. A).

A range that is not symmetric about the central value (``c - low != high - c``, or
in logs for ``lognormal``) gives a two-piece distribution: each side has its own
standard deviation and the central value stays the median (before bounding). A
range of zero width gives the central value exactly, whatever the sample.

Values come from a uniform number ``u`` in (0, 1) by the inverse of the
distribution function (the sampler's Latin hypercube supplies ``u``), so the
marginals are exactly the stated distributions.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray
from scipy.special import ndtr, ndtri

__all__ = ["Spread", "SPREADS", "values_from_uniform", "Z_10_90", "U_MIN"]

FloatArray = NDArray[np.float64]
Kind = Literal["lognormal", "normal", "uniform"]

#: Standard normal quantile of the 90th percentile (the 10th is its negative): 1.2816.
Z_10_90 = float(ndtri(0.9))
#: Uniform numbers are kept inside [U_MIN, 1 - U_MIN] so no quantile is infinite.
U_MIN = 1e-12


@dataclass(frozen=True)
class Spread:
    """The distribution of one uncertain parameter.

    Attributes
    ----------
    kind : {"lognormal", "normal", "uniform"}
    z_of_range : float
        Standard deviations between the central value and ``low`` or ``high``
        (1 for a one-standard-deviation range); unused for ``uniform``.
    lower, upper : float
        Physical bounds the values are kept within (a ``normal`` is truncated to them).
    what : str
        The parameter in words, for figures and the report.
    """

    kind: Kind
    what: str
    z_of_range: float = 1.0
    lower: float = 0.0
    upper: float = np.inf


#: Every parameter gisrun samples, by SI column (``effective_porosity`` scales the Green-Ampt
#: moisture deficit, which is effective porosity x (1 - initial saturation)).
SPREADS: dict[str, Spread] = {
    "ks_m_per_s": Spread("lognormal", "saturated conductivity (Green-Ampt)"),
    "suction_head_m": Spread("lognormal", "suction head (Green-Ampt)"),
    "effective_porosity": Spread("normal", "effective porosity (Green-Ampt)", upper=1.0),
    "curve_number": Spread("normal", "curve number", z_of_range=Z_10_90, upper=100.0),
    "horton_f0_m_per_s": Spread("lognormal", "Horton initial capacity"),
    "horton_fc_m_per_s": Spread("uniform", "Horton final capacity"),
    "horton_decay_per_s": Spread("lognormal", "Horton decay constant"),
    "constant_loss_m_per_s": Spread("uniform", "constant loss rate"),
    "phi_index_m_per_s": Spread("uniform", "phi-index"),
    "initial_loss_m": Spread("uniform", "initial loss"),
    "depression_storage_m": Spread("uniform", "depression storage"),
}


def values_from_uniform(u: FloatArray, central: FloatArray, low: FloatArray, high: FloatArray,
                        spread: Spread) -> FloatArray:
    """Parameter values for uniform numbers ``u`` by the inverse distribution function.

    Parameters
    ----------
    u : ndarray
        Uniform numbers in (0, 1), one per value (broadcast with the others).
    central, low, high : ndarray
        The central value and the range (SI); ``low <= central <= high``.
    spread : Spread
        The distribution (see the module docstring).

    Returns
    -------
    ndarray
        Values; exactly ``central`` where ``low == high == central``.

    Examples
    --------
    The median of a log-normal with a one-standard-deviation range is its centre:

    >>> float(values_from_uniform(np.array(0.5), np.array(2.0), np.array(1.0), np.array(4.0),
    ...                           SPREADS["ks_m_per_s"])[()])
    2.0
    """
    u = np.clip(np.asarray(u, dtype=np.float64), U_MIN, 1.0 - U_MIN)
    c, lo, hi = (np.asarray(a, dtype=np.float64) for a in (central, low, high))
    if spread.kind == "uniform":
        return lo + u * (hi - lo)
    if spread.kind == "lognormal":
        positive = (lo > 0) & (c > 0)
        z_r = spread.z_of_range
        s_lo = np.log(np.divide(c, lo, out=np.ones_like(c * lo), where=positive)) / z_r
        s_hi = np.log(np.divide(hi, c, out=np.ones_like(c * hi), where=positive)) / z_r
        z = ndtri(u)
        return c * np.exp(z * np.where(z < 0, s_lo, s_hi))
    s_lo = (c - lo) / spread.z_of_range
    s_hi = (hi - c) / spread.z_of_range
    z = ndtri(_truncated(u, c, s_lo, s_hi, spread))
    return c + z * np.where(z < 0, s_lo, s_hi)


def _truncated(u: FloatArray, c: FloatArray, s_lo: FloatArray, s_hi: FloatArray,
               spread: Spread) -> FloatArray:
    """``u`` mapped into the part of (0, 1) whose normal quantiles lie within the bounds."""
    with np.errstate(divide="ignore", invalid="ignore"):
        z_a = np.where(s_lo > 0, (spread.lower - c) / np.where(s_lo > 0, s_lo, 1.0), -np.inf)
        z_b = np.where(s_hi > 0, (spread.upper - c) / np.where(s_hi > 0, s_hi, 1.0), np.inf)
    p_a, p_b = ndtr(z_a), ndtr(z_b)
    inside = p_a + u * (p_b - p_a)
    return np.clip(inside, np.maximum(p_a, U_MIN), np.minimum(p_b, 1.0 - U_MIN))
