"""Intensity-duration-frequency curves: a formula ``i = a / (t + b)**c`` or a table (SI).

Rainfall from these curves feeds planning-level runoff estimates only; defer to local codes,
agency methods and a licensed engineer for design.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ..errors import StormError
from .hyetograph import REL_TOL, FloatArray, frozen_array

__all__ = ["IdfFormula", "IdfTable"]


@dataclass(frozen=True)
class IdfFormula:
    """Intensity-duration curve ``i = a / (t + b)**c`` with ``t`` in minutes.

    Parameters
    ----------
    a_m_per_s : float
        ``a`` expressed so that ``i`` comes out in m/s (multiply a value in mm/h by
        ``gisrun.units.to_si(1, "mm_per_h")``); > 0.
    b_min : float
        ``b`` in minutes, >= 0.
    c : float
        Exponent, > 0.

    Examples
    --------
    >>> f = IdfFormula(a_m_per_s=1.0, b_min=0.0, c=0.5)
    >>> float(f.intensity_m_per_s(3600.0))  # 1 / sqrt(60)
    0.12909944487358055
    """

    a_m_per_s: float
    b_min: float
    c: float

    def __post_init__(self) -> None:
        ok = (math.isfinite(self.a_m_per_s) and self.a_m_per_s > 0 and math.isfinite(self.b_min)
              and self.b_min >= 0 and math.isfinite(self.c) and self.c > 0)
        if not ok:
            raise StormError(
                f"idf {{a={self.a_m_per_s}, b={self.b_min}, c={self.c}}}",
                "needs a > 0, b >= 0 and c > 0", "check the IDF coefficients",
            )

    def intensity_m_per_s(self, duration_s: ArrayLike) -> FloatArray:
        """Average intensity (m/s) over a duration (s)."""
        t_min = np.asarray(duration_s, dtype=np.float64) / 60.0
        return self.a_m_per_s / (t_min + self.b_min) ** self.c

    def depth_m(self, duration_s: ArrayLike) -> FloatArray:
        """Depth (m) of the most intense burst of a duration (s); 0 at duration 0."""
        d = np.asarray(duration_s, dtype=np.float64)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(d > 0, self.intensity_m_per_s(d) * d, 0.0)


@dataclass(frozen=True, eq=False)
class IdfTable:
    """Intensity-duration pairs, interpolated linearly in log(duration)-log(intensity).

    Parameters
    ----------
    duration_s : array_like
        Durations in seconds, strictly increasing, > 0, at least two.
    intensity_m_per_s : array_like
        Average intensity (m/s) for each duration, > 0.
    """

    duration_s: FloatArray
    table_intensity_m_per_s: FloatArray

    def __post_init__(self) -> None:
        d, i = frozen_array(self.duration_s), frozen_array(self.table_intensity_m_per_s)
        ok = (d.ndim == 1 and d.size >= 2 and i.shape == d.shape and np.all(np.isfinite(d))
              and np.all(np.isfinite(i)) and np.all(d > 0) and np.all(i > 0)
              and np.all(np.diff(d) > 0))
        if not ok:
            raise StormError(
                "idf table", "needs >= 2 rows of increasing durations > 0 with intensities > 0",
                "fix the IDF table",
            )
        object.__setattr__(self, "duration_s", d)
        object.__setattr__(self, "table_intensity_m_per_s", i)

    def intensity_m_per_s(self, duration_s: ArrayLike) -> FloatArray:
        """Average intensity (m/s) over a duration (s) inside the tabulated range."""
        d = np.asarray(duration_s, dtype=np.float64)
        lo, hi = self.duration_s[0], self.duration_s[-1]
        if np.any(d < lo * (1 - REL_TOL)) or np.any(d > hi * (1 + REL_TOL)):
            raise StormError(
                "idf table", f"durations {d.min() / 60:g}-{d.max() / 60:g} min are needed but the "
                f"table covers {lo / 60:g}-{hi / 60:g} min", "extend the table or change the step",
            )
        log_i = np.interp(np.log(d), np.log(self.duration_s), np.log(self.table_intensity_m_per_s))
        return np.exp(log_i)

    def depth_m(self, duration_s: ArrayLike) -> FloatArray:
        """Depth (m) of the most intense burst of a duration (s); 0 at duration 0."""
        d = np.asarray(duration_s, dtype=np.float64)
        out = np.zeros_like(d)
        positive = d > 0
        out[positive] = self.intensity_m_per_s(d[positive]) * d[positive]
        return out
