"""The same storms with every impervious area connected, beside the run with disconnection.

``[impervious] compare_connected = true`` runs each chunk's units a second time
with no disconnected share (and so no TR-55 composite for unconnected impervious
area) and adds, per subcatchment and storm, ``connected_runoff_depth_m`` and
``disconnection_difference_m`` (runoff with disconnection minus runoff with every
impervious area connected: what disconnection saves, as a negative depth).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..model import Inputs, StormResult
from ..project import Project
from .steps import prepare_parameters, rain_scale_for_units, run_storm

__all__ = ["connected_project", "add_connected_comparison", "runon_target"]


def runon_target(project: Project) -> str | None:
    """Where disconnected impervious runoff goes in this run; None when nothing is disconnected."""
    source = project.impervious
    return source.runon_to if source is not None and source.disconnects else None


def connected_project(project: Project) -> Project:
    """The project with no disconnected share (the impervious grid, if any, kept)."""
    source = dataclasses.replace(project.impervious, disconnected_fraction=None,
                                 disconnected_field=None, disconnected_by_cover={},
                                 compare_connected=False)
    if source.path is None:
        source = None
    return dataclasses.replace(project, impervious=source)


def add_connected_comparison(project: Project, inputs: Inputs, units: pd.DataFrame,
                             results: list[StormResult], sub_ids: NDArray[np.object_]
                             ) -> list[StormResult]:
    """Each result with the connected runoff and the difference disconnection makes (SI).

    The results unchanged unless the project asks (``[impervious] compare_connected``).
    """
    if project.impervious is None or not project.impervious.compare_connected:
        return results
    connected = connected_project(project)
    params, _, _ = prepare_parameters(connected, inputs, units)
    scale = rain_scale_for_units(project, inputs, params)
    out = []
    for result in results:
        base = run_storm(params, result.hyetograph, project.time_step_s, sub_ids=sub_ids,
                         rain_scale=scale, rain_per_step_m=result.rain_per_step_m).subcatchments
        subs = result.subcatchments.assign(
            connected_runoff_depth_m=base["runoff_depth_m"].to_numpy())
        subs["disconnection_difference_m"] = (subs["runoff_depth_m"]
                                              - subs["connected_runoff_depth_m"])
        out.append(dataclasses.replace(result, subcatchments=subs))
    return out
