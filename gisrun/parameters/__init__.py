"""Published infiltration and runoff parameter tables and their assignment to units.

The package reads only its own CSV tables (through :mod:`importlib.resources`);
a user's override CSV is read by :mod:`gisrun.io.tables`.

The names below are loaded from their modules on first use (PEP 562), so this
package imports none of its modules and importing one of them loads only what
it needs.

Runoff estimates from these parameters are planning-level: defer to local
codes, agency methods and a licensed engineer for design.
"""

import importlib

#: Public name -> the module of this package that defines it.
_EXPORTS = {
    "AssignedParameters": "assign",
    "assign_parameters": "assign",
    "composite_parameters": "composite",
    "LOSS_METHODS": "overrides",
    "PARAMETER_COLUMNS": "overrides",
    "accepted_columns": "overrides",
    "normalize_overrides": "overrides",
    "CLASSIFICATIONS": "soils",
    "ShippedTable": "tables",
    "list_tables": "tables",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name: str) -> object:
    if name in _EXPORTS:
        return getattr(importlib.import_module(f"{__name__}.{_EXPORTS[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted({*globals(), *_EXPORTS})
