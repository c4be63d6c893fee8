"""gisrun: infiltration and runoff for every subcatchment, from soil and cover rasters.

The notebook API, step by step (see :mod:`gisrun.workflow.pipeline`)::

    import gisrun
    project = gisrun.load_project("demo_catchment")
    result = gisrun.run(project)              # overlay, parameters, every storm
    gisrun.write_outputs(result, overwrite=True)

Results are planning-level estimates: check them against local codes and agency
methods and have them reviewed by a licensed engineer.
"""

from .errors import GisrunError, GisrunWarning

__version__ = "0.1.0"

from .engine import run_losses  # noqa: E402
from .grid.overlay import compute_unit_areas
from .io.vector import read_subcatchments  # noqa: E402
from .workflow.pipeline import (  # noqa: E402
    CAUTION,
    load_project,
    overlay_inputs,
    prepare_parameters,
    read_inputs,
    run,
    run_storm,
)
from .workflow.stream import run_and_write, write_outputs

__all__ = [
    "CAUTION",
    "GisrunError",
    "GisrunWarning",
    "__version__",
    "compute_unit_areas",
    "load_project",
    "overlay_inputs",
    "prepare_parameters",
    "read_inputs",
    "read_subcatchments",
    "run",
    "run_losses",
    "run_storm",
    "write_outputs",
    "run_and_write",
]
