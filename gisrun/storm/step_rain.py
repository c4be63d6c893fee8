"""A storm's rain on a run's step, for the run's result: held as given, or made when asked (SI).

A storm of one hyetograph has one series for every subcatchment, ``(steps,)``: small, held.
A storm of areal rain has a column per subcatchment, ``(steps, subcatchments)``: 8 bytes per
step and subcatchment (230 MB for 100,000 subcatchments of 288 steps, 2.3 GB for a million),
more than a run's memory budget allows once the layer is large. The run makes it chunk by
chunk while it runs; its result keeps a :class:`StepRain` that makes it again, in the
layer's order, only when something asks (:meth:`StepRain.whole`, or any columns with
:meth:`StepRain.columns`), from the storm's own areal rain: the same operations, so the same
bits as the chunks had.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import StormError
from .areal import ArealRain
from .timing import FloatArray

__all__ = ["StepRain"]


@dataclass(frozen=True, eq=False)
class StepRain:
    """Rain depth per run step, m: ``(steps,)`` shared, or ``(steps, subcatchments)``.

    Make one with :meth:`held` (an array in hand) or :meth:`of_areal` (areal rain, made
    when asked).

    Parameters
    ----------
    values_m : ndarray or None
        The rain as given, ``(steps,)`` or ``(steps, subcatchments)``; None when made from
        ``areal``.
    areal : ArealRain or None
        The storm's areal rain; its columns ``positions`` are the subcatchments, in order.
    positions : ndarray of int or None
        Columns of ``areal``.
    dt_s : float
        The run's step, s.
    """

    values_m: FloatArray | None
    areal: ArealRain | None = None
    positions: NDArray[np.intp] | None = None
    dt_s: float = 0.0

    def __post_init__(self) -> None:
        if (self.values_m is None) == (self.areal is None):
            raise StormError("rain per run step", "needs either the values or the areal rain",
                             "give one of them")
        if self.values_m is not None:
            values = np.asarray(self.values_m, dtype=np.float64).view()
            values.setflags(write=False)
            object.__setattr__(self, "values_m", values)
        else:
            positions = np.asarray(self.positions, dtype=np.intp).view()
            positions.setflags(write=False)
            object.__setattr__(self, "positions", positions)

    @classmethod
    def held(cls, values_m: ArrayLike) -> StepRain:
        """Rain already made, ``(steps,)`` or ``(steps, subcatchments)``, held as it is."""
        return cls(np.asarray(values_m, dtype=np.float64))

    @classmethod
    def of_areal(cls, areal: ArealRain, positions: ArrayLike, dt_s: float) -> StepRain:
        """``areal``'s columns ``positions`` on the step ``dt_s``, made when asked."""
        return cls(None, areal, np.asarray(positions, dtype=np.intp), float(dt_s))

    @property
    def ndim(self) -> int:
        """1 for a shared series, 2 for a column per subcatchment."""
        return 2 if self.values_m is None else self.values_m.ndim

    @property
    def steps(self) -> int:
        """Number of run steps."""
        if self.values_m is not None:
            return int(self.values_m.shape[0])
        return self.areal.resample_steps(self.dt_s)

    def whole(self) -> FloatArray:
        """The rain, ``(steps,)`` or ``(steps, subcatchments)``; areal rain made now, whole."""
        if self.values_m is not None:
            return self.values_m
        return self.areal.resample(self.dt_s, self.positions)

    def columns(self, rows: ArrayLike) -> FloatArray:
        """The rain of the subcatchments ``rows`` (positions), ``(steps, len(rows))``.

        A shared series is given as ``(steps,)``: the same for every subcatchment.
        """
        rows = np.asarray(rows, dtype=np.intp)
        if self.values_m is not None:
            return self.values_m if self.values_m.ndim == 1 else self.values_m[:, rows]
        return self.areal.resample(self.dt_s, self.positions[rows])
