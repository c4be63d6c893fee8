"""Build a project's storms, once the subcatchment layer is read (areal rain needs it).

Storm names are checked here too: two names that would write the same output layer or file
stop the run before any work.
"""

from __future__ import annotations

import geopandas as gpd

from ..config.storms import storms_from_config
from ..errors import StormError
from ..present.layers import layer_name, storm_layer_name
from ..project import Project
from ..storm import Hyetograph, check_step_count

__all__ = ["read_storms", "check_storm_names", "MAX_STORM_NAME"]

#: Longest storm name: its output files add a prefix and suffix, and file names stop at 255.
MAX_STORM_NAME = 100


def read_storms(project: Project, subcatchments: gpd.GeoDataFrame | None = None
                ) -> tuple[Hyetograph, ...]:
    """Build every storm of the project; areal rain (``config.areal``) needs ``subcatchments``.

    Raises
    ------
    StormError
        A storm cannot be built, or two storms would write the same layer.
    """
    where = f"{project.path.name}:[[storms]]"
    storms = tuple(storms_from_config(list(project.storms), base_dir=project.base_dir,
                                      units=project.units, where=where,
                                      subcatchments=subcatchments,
                                      step_s=project.time_step_s,
                                      memory_budget_mb=project.memory_budget_mb))
    check_storm_names([h.name for h in storms], where)
    for i, h in enumerate(storms, start=1):  # before anything is resampled onto the run's step
        check_step_count(float(h.time_s[-1]), project.time_step_s, f"{where} {i} ({h.name})",
                         "shorten the storm or lengthen "
                         f"{project.where('project', 'time_step_min')}")
    return storms


def check_storm_names(names: list[str], where: str) -> None:
    """Stop when two storm names give the same output layer or file name.

    Raises
    ------
    StormError
        Naming both storms.
    """
    for name in names:  # file names of maps and rasters are built from it; most systems
        if len(layer_name(name)) > MAX_STORM_NAME:  # stop file names at 255 bytes
            raise StormError(where, f"storm name {name[:40]!r}... is {len(name)} characters "
                             "long, too long for the file names of its outputs",
                             f"give it a name of at most {MAX_STORM_NAME} characters")
    for naming in (storm_layer_name, layer_name):
        seen: dict[str, str] = {}
        for name in names:
            key = naming(name)
            if key in seen:
                raise StormError(where, f"storms {seen[key]!r} and {name!r} would both be "
                                 f"written as {key!r}", "give the storms names that differ "
                                 "in letters or digits")
            seen[key] = name
