"""Storms: the hyetograph type, published design storms and their resampling (all SI).

Reads only its own packaged table of the NRCS 24-hour distributions
(through :mod:`importlib.resources`). :data:`KINDS` is the registry of design
storm kinds. The names below are loaded from their modules on first use
(PEP 562), so this package imports none of its modules.
"""

import importlib

#: Public name -> the module of this package that defines it.
_EXPORTS = {
    "Hyetograph": "hyetograph",
    "max_depth_in_window_m": "hyetograph",
    "IdfFormula": "idf",
    "IdfTable": "idf",
    "KINDS": "design",
    "StormKind": "design",
    "StormKey": "design",
    "NRCS_DISTRIBUTIONS": "design",
    "nrcs_24h_table": "design",
    "nrcs_24h": "design",
    "alternating_block": "design",
    "chicago": "design",
    "uniform": "design",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name: str) -> object:
    if name in _EXPORTS:
        return getattr(importlib.import_module(f"{__name__}.{_EXPORTS[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted({*globals(), *_EXPORTS})
