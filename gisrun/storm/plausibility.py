"""Storms that hold more rain than has ever fallen anywhere: a warning, in the project's units.

A storm past these limits is almost always a unit mix-up (inches read as millimetres, an
intensity read as a depth, a rain scale factor of 100 meant as a percent), so the warning says
how much rain it holds in the units the project was typed in.
"""

from __future__ import annotations

import warnings

from ..errors import GisrunWarning
from ..units import SI, UnitSystem, from_si
from .hyetograph import Hyetograph, max_depth_in_window_m

__all__ = ["IMPLAUSIBLE_DEPTH_M", "warn_if_implausible"]

#: Windows (s) and the depth (m) above which a storm is implausible. The world-record point
#: rainfalls are 1.825 m in 24 h (Foc-Foc, La Reunion, 7-8 January 1966) and 0.305 m in one
#: hour, fallen in 42 min (Holt, Missouri, 22 June 1947), per the WMO World Weather and Climate
#: Extremes Archive (wmo.asu.edu, "World: Greatest Twenty-four-Hour (1 Day) Rainfall" and
#: "World: Greatest Sixty-Minute (One Hour) Rainfall"); the limits sit a little above them.
IMPLAUSIBLE_DEPTH_M: tuple[tuple[float, float], ...] = ((3600.0, 0.4), (86400.0, 2.0))


def warn_if_implausible(h: Hyetograph, where: str, units: UnitSystem | None = None) -> None:
    """Warn (``GisrunWarning``) if the storm holds more rain than is plausible anywhere on Earth.

    The depths are written in ``units`` (the project's; mm when not given).
    """
    unit = (units or SI).depth
    for window_s, limit_m in IMPLAUSIBLE_DEPTH_M:
        depth = max_depth_in_window_m(h, window_s)
        if depth > limit_m:
            warnings.warn(
                f"{where}: {_depth_text(depth, unit)} of rain within {window_s / 3600:g} h "
                f"exceeds the world record (about {_depth_text(limit_m, unit)}); check the "
                "units and values",
                GisrunWarning, stacklevel=3,
            )
            return


def _depth_text(depth_m: float, unit: str) -> str:
    """``2540 mm``, ``100 in``, ``15.7 in``: whole millimetres, inches to a tenth."""
    value = float(from_si(depth_m, unit))
    return f"{value:.0f} {unit}" if unit == "mm" else f"{round(value, 1):g} {unit}"
