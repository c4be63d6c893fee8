"""Result types and shared helpers of the loss engine.

Every method module returns a :class:`StepResult` per time step; the engine
collects them into a :class:`LossResult` (arrays of shape ``(n_steps, n_units)``,
all SI). Parameter columns are declared and read through :mod:`gisrun.engine.declare`.

Mass balance, per unit and per step, for every method::

    rain = infiltration + excess + (storage at end - storage at start)
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field, fields
from typing import Any, TypeVar

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "StepResult",
    "LossResult",
    "take_params",
    "split_surface_water",
    "set_nonnegative_arrays",
]

FloatArray = NDArray[np.float64]
P = TypeVar("P")


@dataclass(frozen=True)
class StepResult:
    """What one method did over one time step, per unit (all arrays ``(n_units,)``).

    Attributes
    ----------
    infil_m : ndarray
        Depth infiltrated (or otherwise lost) during the step, m.
    excess_m : ndarray
        Depth leaving as runoff (rainfall excess) during the step, m.
    capacity_m_per_s : ndarray
        Loss capacity at the end of the step, m/s; ``inf`` where any rate
        would be absorbed, NaN where the method has no rate form.
    ponding_offset_s : ndarray
        Seconds after the start of the step at which ponding (or, for the curve
        number, runoff) starts; NaN unless it starts inside this step.
    """

    infil_m: FloatArray
    excess_m: FloatArray
    capacity_m_per_s: FloatArray
    ponding_offset_s: FloatArray

    def __post_init__(self) -> None:
        shape = np.shape(self.infil_m)  # called every step: keep it cheap
        if not (np.shape(self.excess_m) == np.shape(self.capacity_m_per_s)
                == np.shape(self.ponding_offset_s) == shape):
            raise ValueError("StepResult arrays must share one shape, got "
                             f"{[np.shape(getattr(self, f.name)) for f in fields(self)]}")


@dataclass(frozen=True)
class LossResult:
    """Losses of every unit through a storm, all SI.

    Attributes
    ----------
    rain_m, infil_m, excess_m : ndarray, shape (n_steps, n_units)
        Rain, infiltration (losses) and rainfall excess per step, m.
    capacity_m_per_s : ndarray, shape (n_steps, n_units)
        Loss capacity at the end of each step, m/s (NaN where the method has
        no rate form, ``inf`` where any rate would be absorbed).
    storage_m : ndarray, shape (n_units,)
        Surface (depression) storage left at the end, m.
    time_to_ponding_s : ndarray, shape (n_units,)
        Time from the storm start to ponding, s; for the curve number the time
        runoff starts. NaN where it never happens.
    dt_s : float
        The fixed time step, s.
    methods : tuple of str
        The loss method of each unit.
    runon_m, routed_m : ndarray, shape (n_steps, n_units), or None
        With disconnected impervious area (:mod:`gisrun.runon`): run-on received
        from impervious parts, and the depth a part sent onto pervious ground
        (taken out of its ``excess_m``); None when the run routes nothing.

    Notes
    -----
    Arrays are made read-only. Per unit,
    ``rain_m.sum(0) + runon == infil_m.sum(0) + excess_m.sum(0) + routed + storage_m``
    to rounding (see :meth:`mass_balance_error_m`).
    """

    rain_m: FloatArray
    infil_m: FloatArray
    excess_m: FloatArray
    capacity_m_per_s: FloatArray
    storage_m: FloatArray
    time_to_ponding_s: FloatArray
    dt_s: float
    methods: tuple[str, ...] = field(default=())
    runon_m: FloatArray | None = None
    routed_m: FloatArray | None = None

    def __post_init__(self) -> None:
        shape = np.shape(self.rain_m)
        if len(shape) != 2:
            raise ValueError(f"LossResult.rain_m must be 2-D (n_steps, n_units), got {shape}")
        routing = [n for n in ("runon_m", "routed_m") if getattr(self, n) is not None]
        for name in ("infil_m", "excess_m", "capacity_m_per_s", *routing):
            if np.shape(getattr(self, name)) != shape:
                raise ValueError(f"LossResult.{name} has shape {np.shape(getattr(self, name))}, "
                                 f"expected {shape}")
        for name in ("storage_m", "time_to_ponding_s"):
            if np.shape(getattr(self, name)) != (shape[1],):
                raise ValueError(f"LossResult.{name} has shape {np.shape(getattr(self, name))}, "
                                 f"expected {(shape[1],)}")
        if not (np.isfinite(self.dt_s) and self.dt_s > 0):
            raise ValueError(f"LossResult.dt_s must be positive, got {self.dt_s}")
        methods = tuple(map(str, self.methods))
        if len(methods) != shape[1]:
            raise ValueError(f"LossResult.methods has {len(methods)} names for {shape[1]} units")
        object.__setattr__(self, "methods", methods)
        object.__setattr__(self, "dt_s", float(self.dt_s))
        for f in fields(self):
            value = getattr(self, f.name)
            if isinstance(value, np.ndarray):
                value.flags.writeable = False

    @property
    def n_steps(self) -> int:
        """Number of time steps."""
        return int(self.rain_m.shape[0])

    @property
    def n_units(self) -> int:
        """Number of units."""
        return int(self.rain_m.shape[1])

    @property
    def runoff_depth_m(self) -> FloatArray:
        """Total rainfall excess of each unit over the storm, m."""
        return self.excess_m.sum(axis=0)

    def mass_balance_error_m(self) -> FloatArray:
        """Rain and run-on minus (infiltration + excess + routed + storage left) per unit, m."""
        error = self.rain_m.sum(0) - (self.infil_m.sum(0) + self.excess_m.sum(0) + self.storage_m)
        if self.runon_m is not None:
            error += self.runon_m.sum(0)
        if self.routed_m is not None:
            error -= self.routed_m.sum(0)
        return error


def take_params(params: P, index: NDArray[np.intp]) -> P:
    """Return the same kind of ``Params`` for the units at ``index`` (derived fields recomputed)."""
    kwargs: dict[str, Any] = {
        f.name: np.asarray(getattr(params, f.name))[index] for f in fields(params) if f.init
    }
    return type(params)(**kwargs)


def set_nonnegative_arrays(params: object, names: tuple[str, ...], label: str) -> None:
    """Turn ``params``' fields ``names`` into float64 arrays, checked 1-D, of one length, >= 0.

    For the frozen ``Params`` dataclasses of the method modules (their
    ``__post_init__``).

    Raises
    ------
    ValueError
        A field is not 1-D, has another length than the first, or holds a
        negative or non-finite value.
    """
    arrays = [np.asarray(getattr(params, n), dtype=np.float64) for n in names]
    if arrays[0].ndim != 1 or any(a.shape != arrays[0].shape for a in arrays):
        raise ValueError(f"{label} parameters must be 1-D arrays of one length")
    for name, a in zip(names, arrays, strict=True):
        if not np.all(np.isfinite(a) & (a >= 0)):
            raise ValueError(f"{label} {name} must be finite and >= 0")
        object.__setattr__(params, name, a)


def split_surface_water(
    water_m: FloatArray, depression_storage_m: FloatArray
) -> tuple[FloatArray, FloatArray]:
    """Split water left on the surface into (storage kept, excess that runs off), m.

    Storage fills up to the depression storage depth; the rest is excess.
    """
    kept = np.minimum(water_m, depression_storage_m)
    return kept, water_m - kept


@functools.lru_cache(maxsize=8)
def no_ponding_offsets(n_units: int) -> FloatArray:
    """A shared, read-only all-NaN ``ponding_offset_s`` for a step where no unit starts to pond.

    A method returns this array (the same object every time) instead of a fresh NaN array;
    the engine's time loop then skips looking for new ponding times in that step.
    """
    out = np.full(n_units, np.nan)
    out.flags.writeable = False
    return out


def start_offsets(starts: NDArray[np.bool_], offsets_s: FloatArray | float) -> FloatArray:
    """``ponding_offset_s`` of a step: ``offsets_s`` where ``starts``, NaN elsewhere.

    Returns the shared :func:`no_ponding_offsets` array when no unit starts to pond.
    """
    if not starts.any():
        return no_ponding_offsets(starts.shape[0])
    return np.where(starts, offsets_s, np.nan)
