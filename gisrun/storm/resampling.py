"""What resampling a storm onto the run's step does to it, in words (all SI inside).

A run simulates every storm on one fixed step (:meth:`Hyetograph.resample`). That keeps the
depth exactly, but a step coarser than the storm's own intervals averages its burst: the peak
intensity falls, and infiltration-excess runoff with it (a NRCS type II storm run at a 60-min
step gives about a quarter less Green-Ampt runoff than at 1-15 min). A storm whose times do not
fall on the step (an irregular CSV) is spread over the steps and padded to a whole number of
them. :func:`resampling_note` says so, with the peak intensity and the duration before and
after, whenever the peak falls by more than :data:`PEAK_CHANGE` or the duration changes.

Runoff estimates are planning-level; defer to local codes, agency methods and a licensed
engineer.

Examples
--------
>>> h = Hyetograph("burst", [0.0, 600.0, 1200.0, 1800.0], [0.002, 0.010, 0.002])
>>> peak_window_s(h)
600.0
>>> print(resampling_note(h, 1800.0))  # doctest: +NORMALIZE_WHITESPACE
storm 'burst': the run's 30-min step is coarser than the storm's 10-min peak-intensity window;
resampled, its peak intensity falls from 60 to 28 mm/h (-53 %) and its duration stays 30 min,
so infiltration-excess runoff is likely underestimated; set [project] time_step_min to 10 or
less
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from ..units import SI, UnitSystem, from_si
from .hyetograph import REL_TOL, Hyetograph

__all__ = ["PEAK_CHANGE", "peak_window_s", "resampling_note"]

#: A fall of the peak intensity larger than this share is worth a warning.
PEAK_CHANGE = 0.01


def peak_window_s(h: Hyetograph) -> float:
    """Length (s) of the storm's burst (full width at half maximum).

    The run of intervals around the peak-intensity one whose intensity is at least half the
    peak.
    """
    intensity = h.intensity_m_per_s
    k = int(np.argmax(intensity))
    low = np.flatnonzero(intensity < 0.5 * intensity[k])
    first = int(low[low < k].max()) + 1 if np.any(low < k) else 0
    last = int(low[low > k].min()) if np.any(low > k) else len(intensity)
    return float(h.time_s[last] - h.time_s[first])


def resampling_note(h: Hyetograph, dt_s: float, rain_m: NDArray[np.float64] | None = None,
                    units: UnitSystem = SI) -> str | None:
    """A warning text when the run's step changes the storm's peak or duration, else None.

    Parameters
    ----------
    h : Hyetograph
        The storm as given.
    dt_s : float
        The run's step, s.
    rain_m : ndarray, optional
        ``h.resample(dt_s)`` when the caller has it already.
    units : UnitSystem
        Units of the intensities in the text.
    """
    rain = h.resample(dt_s) if rain_m is None else np.asarray(rain_m)
    before, after = h.peak_intensity_m_per_s, float(rain.max()) / dt_s
    duration_after = len(rain) * dt_s
    fell = before > 0 and after < before * (1.0 - PEAK_CHANGE)
    longer = abs(duration_after - h.duration_s) > REL_TOL * h.duration_s
    if not (fell or longer):
        return None
    window, resolution = peak_window_s(h), float(h.steps_s.min())
    unit = units.rate.replace("_per_", "/")
    peak_before, peak_after = (float(from_si(v, units.rate)) for v in (before, after))
    change = f" ({(after / before - 1.0) * 100:+.0f} %)" if before > 0 else ""
    duration = (f"stays {h.duration_s / 60:.4g} min" if not longer else
                f"goes from {h.duration_s / 60:.4g} to {duration_after / 60:.4g} min")
    resampled = (f"falls from {peak_before:.4g} to {peak_after:.4g} {unit}{change}" if fell
                 else f"stays {peak_before:.4g} {unit}")
    step = f"the run's {dt_s / 60:g}-min step"
    if fell and dt_s > resolution * (1.0 + REL_TOL):
        what = (f"{window / 60:.4g}-min peak-intensity window" if dt_s > window
                else f"{resolution / 60:.4g}-min resolution")
        return (f"storm {h.name!r}: {step} is coarser than the storm's {what}; resampled, its "
                f"peak intensity {resampled} and its duration {duration}, so "
                f"infiltration-excess runoff is likely underestimated; set [project] "
                f"time_step_min to {resolution / 60:.4g} or less")
    return (f"storm {h.name!r}: its times do not fall on {step}; resampled, its peak "
            f"intensity {resampled} and its duration {duration}; give the storm's times on "
            f"multiples of the step or pick a step that divides them")
