"""Areal reduction of point design depths: the registry of relations, :data:`RELATIONS` (SI).

A design storm's depth is a point depth; the mean depth over a catchment of the same duration
and annual exceedance probability (AEP) is smaller. The ratio, the areal reduction factor, is
a function of area and duration (and, in some relations, AEP). Each relation of
:data:`RELATIONS` is a :class:`ReductionRelation`: the keys it reads from the storm's
``areal_reduction`` table, whether it depends on area, its published source, and the function
giving a factor per area. Outside the area and duration a relation covers it raises
:class:`ReductionRangeError` (never extrapolates).

Relations:

``arr2019_short_duration``
    Australian Rainfall and Runoff 2019 (Ball et al., eds., Commonwealth of Australia,
    Geoscience Australia), Book 2, Chapter 4, section 4.3: the short-duration equation
    (:func:`arr2019_short_duration_equation`), applied by area and duration as ARR Book 2
    Table 2.4.1 says (:func:`arr2019_short_duration_factor`). Public copy of the equation and of
    the table's cases used here: A. Ladson, "ARR2019 - Areal Reduction Factors" and "ARR2019 -
    Areal Reduction Factors: interpolating between short and long duration ARFs",
    https://tonyladson.wordpress.com/page/2/ (equation 1 there). The long-duration equation
    (24 h and longer) needs regional coefficients (ARR Table 2.4.2) of which no readable public
    copy was found, so durations over 12 h are refused.
``factor_table``
    The project's own table of factors by area and duration (:class:`FactorTable`),
    interpolated linearly in log(area) and in duration.
``fixed_factor``
    One factor given directly.

Areal reduction gives planning-level estimates only; defer to local codes, agency methods and a
licensed engineer.

Examples
--------
>>> arr2019_short_duration_factor([0.5, 100.0], 360.0, 0.01).round(4).tolist()
[1.0, 0.8776]
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ..errors import StormError
from .timing import FloatArray, frozen_array

__all__ = ["RELATIONS", "ReductionRelation", "ReductionInputs", "ReductionRangeError",
           "AppliedReduction", "FactorTable", "arr2019_short_duration_equation",
           "arr2019_short_duration_factor", "SMALL_AREA_KM2", "EQUATION_AREA_KM2",
           "LARGEST_AREA_KM2", "LONGEST_DURATION_MIN", "ARR2019_SOURCE"]

#: ARR 2019 Book 2 Table 2.4.1 (public copy: Ladson, above): at or below 1 km2 the factor is 1.
SMALL_AREA_KM2 = 1.0
#: ... from 10 km2 the short-duration equation applies (1-10 km2: interpolated, see below) ...
EQUATION_AREA_KM2 = 10.0
#: ... up to 1000 km2 for durations up to 12 h; larger areas are not covered at these durations.
LARGEST_AREA_KM2 = 1000.0
#: ... and the equation is for durations up to 12 h.
LONGEST_DURATION_MIN = 720.0
#: The largest AEP accepted: above 0.5 the equation's AEP terms, (0.3 + log10 AEP), turn
#: positive and the factor would grow with area. ARR's own stated AEP range for the equation
#: was not found in a public copy.
LARGEST_AEP = 0.5
_KM2 = 1e6

ARR2019_SOURCE = ("Australian Rainfall and Runoff 2019, Book 2, Chapter 4, section 4.3: "
                  "short-duration areal reduction factor equation, applied by area and duration "
                  "as ARR Book 2 Table 2.4.1 says (1-10 km2: interpolation between 1 at 1 km2 "
                  "and the equation at 10 km2, typed from memory, no public copy found)")


class ReductionRangeError(StormError):
    """An area, duration or AEP outside what a relation covers.

    ``index`` is the position of the first area at fault (None when every area is).
    """

    def __init__(self, where: str, problem: str, fix: str, index: int | None = None) -> None:
        super().__init__(where, problem, fix)
        self.index = index


def arr2019_short_duration_equation(area_km2: ArrayLike, duration_min: float,
                                    aep: float) -> FloatArray:
    """ARR 2019's short-duration areal reduction factor equation, as printed (no area rules).

    ``ARF = min[1, 1 - 0.287 (A^0.265 - 0.439 log10 D) D^-0.36
    + 0.00226 A^0.226 D^0.125 (0.3 + log10 P)
    + 0.0141 A^0.213 10^(-0.021 (D - 180)^2 / 1440) (0.3 + log10 P)]``

    with ``A`` the area in km2, ``D`` the duration in minutes and ``P`` the AEP as a fraction.

    References
    ----------
    .. [1] Ball, J. et al. (eds.) (2019), Australian Rainfall and Runoff: A Guide to Flood
       Estimation, Book 2, Chapter 4, section 4.3 (short-duration ARF equation).
    .. [2] Ladson, A., "ARR2019 - Areal Reduction Factors: interpolating between short and
       long duration ARFs", https://tonyladson.wordpress.com/page/2/ (equation 1; public copy).
    """
    a = np.asarray(area_km2, dtype=np.float64)
    d, aep_term = float(duration_min), 0.3 + math.log10(aep)
    value = (1.0 - 0.287 * (a ** 0.265 - 0.439 * math.log10(d)) * d ** -0.36
             + 0.00226 * a ** 0.226 * d ** 0.125 * aep_term
             + 0.0141 * a ** 0.213 * 10.0 ** (-0.021 * (d - 180.0) ** 2 / 1440.0) * aep_term)
    return np.minimum(1.0, value)


def arr2019_short_duration_factor(area_km2: ArrayLike, duration_min: float,
                                  aep: float) -> FloatArray:
    """The ARR 2019 short-duration factor with the area rules of ARR Book 2 Table 2.4.1.

    Up to 1 km2 the factor is 1 (any duration); from 10 to 1000 km2, the equation
    (:func:`arr2019_short_duration_equation`); between 1 and 10 km2,
    ``1 - 0.6614 (1 - ARF_10) (A^0.4 - 1)`` with ``ARF_10`` the equation at 10 km2 (typed
    from memory; no public copy found; it is 1 at 1 km2 and, as 0.6614 (10^0.4 - 1) = 1.000,
    the equation's value at 10 km2).

    Raises
    ------
    ReductionRangeError
        An area above 1 km2 with a duration over 12 h (the long-duration relation needs
        regional coefficients gisrun does not ship), an area above 1000 km2, an AEP outside
        (0, 0.5], or a duration so short that the equation gives no factor above 0.
    """
    a = np.asarray(area_km2, dtype=np.float64)
    d = float(duration_min)
    if not (0.0 < aep <= LARGEST_AEP):
        raise ReductionRangeError("", f"annual exceedance probability {aep:g} is outside (0, "
                                  f"{LARGEST_AEP:g}] where the relation reduces depth with "
                                  "area", "give an AEP as a fraction, e.g. 0.01 for 1 %")
    reduced = a > SMALL_AREA_KM2
    if not np.any(reduced):
        return np.ones_like(a)
    first = int(np.argmax(reduced))
    if d > LONGEST_DURATION_MIN:
        raise ReductionRangeError("", f"area {a[first]:,.4g} km2 with a {d:g} min duration is "
                                  "beyond the short-duration relation (up to 12 h); longer "
                                  "durations need ARR's regional long-duration coefficients",
                                  "give relation = \"factor_table\" with factors for this "
                                  "area and duration", first)
    large = a > LARGEST_AREA_KM2
    if np.any(large):
        k = int(np.argmax(large))
        raise ReductionRangeError("", f"area {a[k]:,.4g} km2 is above the {LARGEST_AREA_KM2:g} "
                                  "km2 the short-duration relation covers", "give relation = "
                                  "\"factor_table\" with factors for this area and duration", k)
    at_ten = float(arr2019_short_duration_equation(EQUATION_AREA_KM2, d, aep))
    small = 1.0 - 0.6614 * (1.0 - at_ten) * (np.clip(a, 1.0, None) ** 0.4 - 1.0)
    factor = np.where(a <= SMALL_AREA_KM2, 1.0,
                      np.where(a < EQUATION_AREA_KM2, small,
                               arr2019_short_duration_equation(a, d, aep)))
    if np.any(factor <= 0.0):
        k = int(np.argmax(factor <= 0.0))
        raise ReductionRangeError("", f"the relation gives factor {factor[k]:.3g} at "
                                  f"{a[k]:,.4g} km2 and {d:g} min, too short a duration for "
                                  "this area", "give a factor table, or the storm's duration "
                                  "(duration_min)", k)
    return factor


@dataclass(frozen=True, eq=False)
class FactorTable:
    """Areal reduction factors on a grid of areas and durations (SI), from the project.

    Parameters
    ----------
    area_m2, duration_s : array_like
        The grid's areas and durations, strictly increasing, > 0.
    factor : array_like, shape (durations, areas)
        The factor at each duration and area, in (0, 1].
    where : str
        The table's file, for messages.
    """

    area_m2: FloatArray
    duration_s: FloatArray
    factor: FloatArray
    where: str

    def __post_init__(self) -> None:
        area, duration = frozen_array(self.area_m2), frozen_array(self.duration_s)
        factor = frozen_array(self.factor)
        for name, knots in (("areas", area), ("durations", duration)):
            if knots.ndim != 1 or knots.size == 0 or np.any(knots <= 0) \
                    or np.any(np.diff(knots) <= 0):
                raise StormError(self.where, f"{name} are not increasing numbers > 0",
                                 f"give each of the table's {name} once, > 0")
        if factor.shape != (duration.size, area.size):
            raise StormError(self.where, f"has a factor grid of shape {factor.shape}",
                             "give a factor for every area and duration")
        if not np.all((factor > 0) & (factor <= 1)):
            raise StormError(self.where, "has a factor outside (0, 1]",
                             "give factors greater than 0 and at most 1")
        for name, value in (("area_m2", area), ("duration_s", duration), ("factor", factor)):
            object.__setattr__(self, name, value)

    def factors(self, area_m2: ArrayLike, duration_s: float) -> FloatArray:
        """The factor at each area for one duration: linear in log(area) and in duration.

        Raises
        ------
        ReductionRangeError
            An area or the duration outside the table (no extrapolation).
        """
        area = np.asarray(area_m2, dtype=np.float64)
        d_lo, d_hi = self.duration_s[0], self.duration_s[-1]
        if not (d_lo * (1 - 1e-9) <= duration_s <= d_hi * (1 + 1e-9)):
            raise ReductionRangeError(self.where, f"has durations {d_lo / 60:g}-{d_hi / 60:g} "
                                      f"min, not {duration_s / 60:g} min", "add rows for this "
                                      "duration (the table is not extrapolated)")
        a_lo, a_hi = self.area_m2[0], self.area_m2[-1]
        outside = (area < a_lo * (1 - 1e-9)) | (area > a_hi * (1 + 1e-9))
        if np.any(outside):
            k = int(np.argmax(outside))
            raise ReductionRangeError(self.where, f"has areas {a_lo / _KM2:g}-{a_hi / _KM2:g} "
                                      f"km2, not {area[k] / _KM2:.6g} km2", "add rows for this "
                                      "area (the table is not extrapolated)", k)
        logs = np.log(np.clip(area, a_lo, a_hi))
        rows = [np.interp(logs, np.log(self.area_m2), row) for row in self.factor]
        if len(rows) == 1:
            return rows[0]
        d = min(max(duration_s, d_lo), d_hi)
        j = min(int(np.searchsorted(self.duration_s, d, side="right")) - 1, len(rows) - 2)
        w = (d - self.duration_s[j]) / (self.duration_s[j + 1] - self.duration_s[j])
        return rows[j] + w * (rows[j + 1] - rows[j])


@dataclass(frozen=True)
class ReductionInputs:
    """What a relation reads besides area and duration: AEP, a factor table, a fixed factor."""

    annual_exceedance_probability: float | None = None
    table: FactorTable | None = None
    factor: float | None = None


@dataclass(frozen=True)
class ReductionRelation:
    """One areal reduction relation: its keys, whether it depends on area, its factors."""

    #: Keys of the storm's ``areal_reduction`` table it needs (besides relation, over and
    #: duration_min); each is a field of :class:`ReductionInputs` (``table`` is a CSV path).
    keys: tuple[str, ...]
    #: Whether the factor depends on area (then ``over`` says which area).
    by_area: bool
    #: ``factors(area_m2, duration_s, inputs)``: one factor per area.
    factors: Callable[[FloatArray, float, ReductionInputs], FloatArray]
    #: Where the values come from, in words, for the run table and the report.
    source: Callable[[ReductionInputs], str]


def _arr(area_m2: FloatArray, duration_s: float, inputs: ReductionInputs) -> FloatArray:
    return arr2019_short_duration_factor(np.asarray(area_m2) / _KM2, duration_s / 60.0,
                                         float(inputs.annual_exceedance_probability))


#: Areal reduction relations, by the ``relation`` an ``areal_reduction`` table names.
RELATIONS: dict[str, ReductionRelation] = {
    "arr2019_short_duration": ReductionRelation(
        ("annual_exceedance_probability",), True, _arr, lambda inputs: ARR2019_SOURCE),
    "factor_table": ReductionRelation(
        ("table",), True, lambda a, d, inputs: inputs.table.factors(a, d),
        lambda inputs: f"factor table {inputs.table.where}, linear in log(area) and duration"),
    "fixed_factor": ReductionRelation(
        ("factor",), False, lambda a, d, inputs: np.full(np.shape(a), float(inputs.factor)),
        lambda inputs: "a fixed factor given in the project file"),
}


@dataclass(frozen=True, eq=False)
class AppliedReduction:
    """The areal reduction applied to one storm: relation, settings and each factor (SI).

    ``area_m2`` is the area each subcatchment's factor was taken at (its own, or the whole
    layer's when ``over`` is ``"basin"``).
    """

    relation: str
    source: str
    over: str
    duration_s: float
    annual_exceedance_probability: float | None
    subcatchment_ids: tuple[str, ...]
    area_m2: FloatArray
    factor: FloatArray

    def __post_init__(self) -> None:
        object.__setattr__(self, "area_m2", frozen_array(self.area_m2))
        object.__setattr__(self, "factor", frozen_array(self.factor))
        object.__setattr__(self, "subcatchment_ids", tuple(map(str, self.subcatchment_ids)))
