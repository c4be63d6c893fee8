"""Storms: the hyetograph type, published design storms and their resampling (all SI).

Reads only its own packaged table of the NRCS 24-hour distributions
(through :mod:`importlib.resources`). :data:`KINDS` is the registry of design
storm kinds; :data:`RELATIONS` the registry of areal reduction relations.
"""

from .areal import ArealRain, weighted_mean
from .areal_reduction import RELATIONS, AppliedReduction, FactorTable, ReductionInputs
from .design import (
    KINDS,
    NRCS_DISTRIBUTIONS,
    StormKey,
    StormKind,
    alternating_block,
    chicago,
    nrcs_24h,
    nrcs_24h_table,
    uniform,
)
from .hyetograph import (
    MAX_STEPS,
    Hyetograph,
    areal_storm,
    check_step_count,
    max_depth_in_window_m,
    reduced_storm,
)
from .idf import IdfFormula, IdfTable
from .mix import SourceMix, gauge_mix, identity_mix, scaling_mix
from .resampling import peak_window_s, resampling_note
from .step_rain import StepRain

__all__ = [
    "ArealRain",
    "AppliedReduction",
    "FactorTable",
    "RELATIONS",
    "ReductionInputs",
    "reduced_storm",
    "areal_storm",
    "weighted_mean",
    "SourceMix",
    "StepRain",
    "gauge_mix",
    "identity_mix",
    "scaling_mix",
    "MAX_STEPS",
    "check_step_count",
    "KINDS",
    "NRCS_DISTRIBUTIONS",
    "Hyetograph",
    "IdfFormula",
    "IdfTable",
    "StormKey",
    "StormKind",
    "alternating_block",
    "chicago",
    "max_depth_in_window_m",
    "nrcs_24h",
    "nrcs_24h_table",
    "peak_window_s",
    "resampling_note",
    "uniform",
]
