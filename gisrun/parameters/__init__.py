"""Published infiltration and runoff parameter tables and their assignment to units.

The package reads only its own CSV tables (through :mod:`importlib.resources`);
a user's override CSV is read by :mod:`gisrun.io.tables`.

Runoff estimates from these parameters are planning-level: defer to local
codes, agency methods and a licensed engineer for design.
"""

from .assign import AssignedParameters, assign_parameters
from .composite import composite_parameters
from .overrides import LOSS_METHODS, PARAMETER_COLUMNS, accepted_columns, normalize_overrides
from .soils import CLASSIFICATIONS
from .tables import ShippedTable, list_tables

__all__ = [
    "CLASSIFICATIONS",
    "LOSS_METHODS",
    "PARAMETER_COLUMNS",
    "AssignedParameters",
    "ShippedTable",
    "accepted_columns",
    "assign_parameters",
    "composite_parameters",
    "list_tables",
    "normalize_overrides",
]
