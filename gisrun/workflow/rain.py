"""Rain on the run's step for every unit: one series for all, or areal rain per subcatchment.

A plain hyetograph is resampled once for the whole run (:func:`run_rains`): one series
``(steps,)`` that every chunk shares. A storm carrying :class:`gisrun.storm.ArealRain` is not
made whole: each chunk carries the rain of its own subcatchments (:func:`chunk_storms`, the
sources they use and their weights) and makes its columns ``(steps, subcatchments)`` when it
runs (:func:`chunk_rains`, :func:`run_rain`), so memory holds a chunk's columns at a time. A
storm run gives every unit its subcatchment's column (:func:`unit_rain`), times the
per-subcatchment rain factor if the project has one. The engine takes either shape
(``run_losses``: ``(steps,)`` or ``(steps, units)``).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from ..model import Inputs
from ..project import Project
from ..storm import Hyetograph, StepRain, resampling_note

__all__ = ["run_rain", "run_rains", "run_steps", "chunk_storms", "chunk_rains", "whole_rains",
           "unit_rain"]

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


def run_rains(project: Project, inputs: Inputs
              ) -> tuple[tuple[FloatArray | None, ...], list[str]]:
    """Each plain storm's rain on the run's step, None for a storm of areal rain, and notes.

    The notes (:func:`gisrun.storm.resampling_note`) say what resampling did to each storm's
    own hyetograph, for areal rain the basin mean. Areal rain is made chunk by chunk
    (:func:`chunk_rains`).
    """
    dt_s = project.time_step_s
    rains = tuple(h.resample(dt_s) if h.areal is None else None for h in inputs.storms)
    notes = [note for h, rain in zip(inputs.storms, rains, strict=True)
             if (note := resampling_note(h, dt_s, rain, project.units))]
    return rains, notes


def run_steps(storms: Sequence[Hyetograph], dt_s: float) -> int:
    """The most run steps of any of ``storms`` on the step ``dt_s``."""
    return max((h.areal.resample_steps(dt_s) if h.areal is not None else len(h.resample(dt_s))
                for h in storms), default=0)


def chunk_storms(storms: Sequence[Hyetograph], sub_ids: ArrayLike) -> tuple[Hyetograph, ...]:
    """The storms as a chunk of subcatchments (``sub_ids``) needs them.

    A storm of areal rain keeps only the rain of those subcatchments, in their order
    (:meth:`gisrun.storm.ArealRain.subset`); a plain storm is shared.

    Raises
    ------
    StormError
        If a storm's areal rain has no column for one of ``sub_ids``.
    """
    return tuple(h if h.areal is None else dataclasses.replace(
        h, areal=h.areal.subset(h.areal.positions(sub_ids, f"storm {h.name!r}")))
        for h in storms)


def chunk_rains(storms: Sequence[Hyetograph], rains: Sequence[FloatArray | None], dt_s: float,
                sub_ids: ArrayLike) -> tuple[FloatArray, ...]:
    """Each storm's rain for a chunk: the shared series, or the chunk's areal columns.

    ``rains`` are :func:`run_rains`' (None for areal rain, made here from the storm's own
    areal rain for ``sub_ids``).
    """
    return tuple(rain if rain is not None else run_rain(h, dt_s, sub_ids)
                 for h, rain in zip(storms, rains, strict=True))


def whole_rains(project: Project, inputs: Inputs, rains: Sequence[FloatArray | None]
                ) -> tuple[StepRain, ...]:
    """Each storm's rain on the run's step for every subcatchment of the layer, in its order.

    A plain storm's series is held (:func:`run_rains`' own); a storm of areal rain is not
    made here: its :class:`gisrun.storm.StepRain` makes the columns, in the layer's order,
    when something asks (they are ``(steps, subcatchments)``, more than a large run's memory
    budget; the chunks made theirs while they ran).
    """
    sub_ids = inputs.subcatchments["subcatchment_id"].to_numpy(dtype=object)
    return tuple(StepRain.held(rain) if rain is not None else StepRain.of_areal(
        h.areal, h.areal.positions(sub_ids, f"storm {h.name!r}"), project.time_step_s)
        for h, rain in zip(inputs.storms, rains, strict=True))


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

