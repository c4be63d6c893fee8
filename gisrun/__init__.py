"""gisrun: infiltration and runoff for every subcatchment, from soil and cover rasters.

The notebook API, step by step (see :mod:`gisrun.workflow.steps`)::

    import gisrun
    project = gisrun.load_project("demo_catchment")
    result = gisrun.run(project)              # overlay, parameters, every storm
    gisrun.write_outputs(result, overwrite=True)

``write_extras`` and ``ExtrasOptions`` (the maps, rasters and report) are loaded on
first use, so importing gisrun for its computation does not load matplotlib.

Results are planning-level estimates: check them against local codes and agency
methods and have them reviewed by a licensed engineer.
"""

import importlib

from ._version import __version__
from .config.project import load_project
from .engine import run_losses
from .errors import GisrunError, GisrunWarning
from .grid.overlay import compute_unit_areas
from .io.vector import read_subcatchments
from .model import CAUTION, Inputs, RunResult, StormResult
from .workflow.inputs import read_inputs
from .workflow.pipeline import run
from .workflow.steps import overlay_inputs, prepare_parameters, run_storm
from .workflow.stream import run_and_write
from .write.geopackage import write_outputs

__all__ = [
    "CAUTION",
    "ExtrasOptions",
    "GisrunError",
    "GisrunWarning",
    "Inputs",
    "RunResult",
    "StormResult",
    "__version__",
    "compute_unit_areas",
    "load_project",
    "overlay_inputs",
    "prepare_parameters",
    "read_inputs",
    "read_subcatchments",
    "run",
    "run_and_write",
    "run_losses",
    "run_storm",
    "write_extras",
    "write_outputs",
]


def __getattr__(name: str) -> object:
    """Load the writers of the extras (and with them matplotlib) on first use."""
    if name in ("ExtrasOptions", "write_extras"):
        return getattr(importlib.import_module(".write.extras", __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
