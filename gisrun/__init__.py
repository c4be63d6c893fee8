"""gisrun: infiltration and runoff for every subcatchment, from soil and cover rasters."""

from .errors import GisrunError, GisrunWarning

__version__ = "0.1.0"

__all__ = ["GisrunError", "GisrunWarning", "__version__"]
