"""Time steps and checked arrays shared by the storm types (all SI)."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import StormError

__all__ = ["FloatArray", "REL_TOL", "frozen_array", "step_edges", "check_positive"]

FloatArray = NDArray[np.float64]
REL_TOL = 1e-9  # relative tolerance for "the duration is a whole number of steps"


def frozen_array(values: ArrayLike) -> FloatArray:
    """A read-only float64 copy of ``values``."""
    arr = np.array(values, dtype=np.float64, copy=True)
    arr.setflags(write=False)
    return arr


def step_edges(duration_s: float, step_s: float, where: str, *, pad: bool) -> FloatArray:
    """Edges ``0, dt, 2 dt, ...``; the last is ``n dt`` when ``pad``, else the duration."""
    if not (math.isfinite(step_s) and step_s > 0):
        raise StormError(where, f"step {step_s!r} s is not positive", "use a step > 0")
    if not (math.isfinite(duration_s) and duration_s > 0):
        raise StormError(where, f"duration {duration_s!r} s is not positive", "use a duration > 0")
    ratio = duration_s / step_s
    n = round(ratio) if abs(ratio - round(ratio)) <= REL_TOL * ratio else math.ceil(ratio)
    n = max(n, 1)
    edges = np.arange(n + 1, dtype=np.float64) * step_s
    if not pad:
        edges[-1] = duration_s
    return edges


def check_positive(value: float, what: str, where: str) -> None:
    """Raise :class:`StormError` unless ``value`` is a finite number > 0."""
    if not (isinstance(value, (int, float, np.floating)) and math.isfinite(value) and value > 0):
        raise StormError(where, f"{what} {value!r} is not a positive number", f"give a {what} > 0")
