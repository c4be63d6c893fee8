"""gisrun: infiltration and runoff for every subcatchment, from soil and cover rasters.

The notebook API, step by step (see :mod:`gisrun.workflow.steps`)::

    import gisrun
    project = gisrun.load_project("demo_catchment")
    result = gisrun.run(project)              # overlay, parameters, every storm
    gisrun.write_outputs(result, overwrite=True)

Every name here is loaded on first use (``_LAZY``), so importing gisrun, or one of
its modules, loads only what is used: the overlay alone does not load the run's
workflow, the uncertainty modules or matplotlib.

Results are planning-level estimates: check them against local codes and agency
methods and have them reviewed by a licensed engineer.
"""

import importlib

from ._version import __version__
from .errors import GisrunError, GisrunWarning

#: Where each name of the notebook API lives; loaded on first use, so that importing one
#: module (``gisrun.grid.overlay``) does not load the whole package.
_LAZY = {
    "load_project": ".config.project", "run_losses": ".engine",
    "compute_unit_areas": ".grid.overlay", "read_subcatchments": ".io.vector",
    "CAUTION": ".model", "Inputs": ".model", "RunResult": ".model", "StormResult": ".model",
    "read_inputs": ".workflow.inputs", "run": ".workflow.pipeline",
    "overlay_inputs": ".workflow.steps", "prepare_parameters": ".workflow.steps",
    "run_storm": ".workflow.steps", "run_and_write": ".workflow.stream",
    "write_outputs": ".write.geopackage", "ExtrasOptions": ".write.extras",
    "write_extras": ".write.extras",
}

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
    """Load a name of the notebook API (and what it needs) on first use."""
    if name in _LAZY:
        return getattr(importlib.import_module(_LAZY[name], __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
