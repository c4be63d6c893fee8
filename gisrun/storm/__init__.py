"""Storms: the hyetograph type, published design storms and their resampling (all SI).

Reads only its own packaged table of the NRCS 24-hour distributions
(through :mod:`importlib.resources`).
"""

from .hyetograph import (
    NRCS_DISTRIBUTIONS,
    Hyetograph,
    IdfFormula,
    IdfTable,
    alternating_block,
    chicago,
    max_depth_in_window_m,
    nrcs_24h,
    nrcs_24h_table,
    uniform,
)

__all__ = [
    "Hyetograph",
    "IdfFormula",
    "IdfTable",
    "NRCS_DISTRIBUTIONS",
    "nrcs_24h_table",
    "nrcs_24h",
    "alternating_block",
    "chicago",
    "uniform",
    "max_depth_in_window_m",
]
