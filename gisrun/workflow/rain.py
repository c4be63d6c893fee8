"""Rain on the run's step for every unit: one series for all, or areal rain per subcatchment.

A storm is resampled once for the whole run (:func:`run_rain`): a plain hyetograph gives one
series ``(steps,)``, a storm carrying :class:`gisrun.storm.ArealRain` gives a matrix ``(steps,
subcatchments)`` in the subcatchment layer's order. A chunk takes its own columns
(:func:`chunk_rain`), and a storm run gives every unit its subcatchment's column
(:func:`unit_rain`), times the per-subcatchment rain factor if the project has one. The engine
takes either shape (``run_losses``: ``(steps,)`` or ``(steps, units)``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from ..model import Inputs
from ..project import Project
from ..storm import Hyetograph, resampling_note

__all__ = ["run_rain", "run_rains", "chunk_rain", "unit_rain"]

FloatArray = NDArray[np.float64]


def run_rain(h: Hyetograph, dt_s: float, sub_ids: ArrayLike) -> FloatArray:
    """A storm's rain on the run's step: ``(steps,)``, or ``(steps, len(sub_ids))`` if areal.

    Raises
    ------
    StormError
        If the storm's areal rain has no column for one of ``sub_ids``.
    """
    if h.areal is None:
        return h.resample(dt_s)
    columns = h.areal.positions(sub_ids, f"storm {h.name!r}")
    return h.areal.resample(dt_s, columns)


def run_rains(project: Project, inputs: Inputs) -> tuple[tuple[FloatArray, ...], list[str]]:
    """Every storm's rain on the run's step (:func:`run_rain`), and what resampling did to them.

    The notes (:func:`gisrun.storm.resampling_note`) are about each storm's own hyetograph, for
    areal rain the basin mean.
    """
    dt_s = project.time_step_s
    sub_ids = inputs.subcatchments["subcatchment_id"].to_numpy(dtype=object)
    rains = tuple(run_rain(h, dt_s, sub_ids) for h in inputs.storms)
    notes = [note for h, rain in zip(inputs.storms, rains, strict=True)
             if (note := resampling_note(h, dt_s, rain if rain.ndim == 1 else None,
                                         project.units))]
    return rains, notes


def chunk_rain(rain: FloatArray, rows: NDArray[np.intp]) -> FloatArray:
    """A chunk's part of a run's rain: all of a single series, its columns of areal rain."""
    return rain if rain.ndim == 1 else np.ascontiguousarray(rain[:, rows])


def unit_rain(rain: FloatArray, unit_sub_ids: ArrayLike, sub_ids: ArrayLike,
              scale: FloatArray | None = None) -> FloatArray:
    """Rain per step for the engine: ``(steps,)`` shared, or ``(steps, units)``.

    Parameters
    ----------
    rain : ndarray
        ``(steps,)``, or ``(steps, len(sub_ids))`` areal rain in the order of ``sub_ids``.
    unit_sub_ids : array_like
        The subcatchment of each unit.
    sub_ids : array_like
        The subcatchments of ``rain``'s columns.
    scale : ndarray, optional
        A factor per unit on the rain.
    """
    if rain.ndim == 1:
        return rain if scale is None else rain[:, None] * scale[None, :]
    index = pd.Index(np.asarray(sub_ids, dtype=object))
    columns = index.get_indexer(np.asarray(unit_sub_ids, dtype=object))
    per_unit = np.take(rain, columns, axis=1)
    return per_unit if scale is None else per_unit * scale[None, :]

