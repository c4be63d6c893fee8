"""The result model: what a run read, computed and hands to the writers (frozen, all SI).

The workflow (:mod:`gisrun.workflow`) builds these; the writers (:mod:`gisrun.write`)
and the presentation code (:mod:`gisrun.present`) only read them. A
:class:`RunResult` carries everything the outputs are drawn from (the resampled
storms, each storm's layer and file names, the cell-level values for the rasters,
the raster grid), so nothing is read from the inputs or computed a second time
while writing.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import geopandas as gpd
import numpy as np
import pandas as pd
from affine import Affine
from numpy.typing import NDArray
from pyproj import CRS

from .engine import LossResult
from .grid.classes import ClassGrid
from .grid.polygons import ClassPolygons
from .project import Project, UncertaintySettings
from .storm import Hyetograph, StepRain

__all__ = ["CAUTION", "BAND_CAUTION", "GridSpec", "CellRasters", "Inputs", "StormResult",
           "UncertaintyResult", "RunResult"]

#: Printed by the CLI, written into the run table and the report.
CAUTION = (
    "Planning-level estimates only. Runoff figures depend on published typical parameters and "
    "simplified loss methods; before sizing drains or judging flood risk, check them against "
    "local codes and agency methods and have them reviewed by a licensed engineer."
)

#: Said wherever runoff bands are shown (report, README, run table).
BAND_CAUTION = (
    "The bands cover the spread of the loss parameters within their published ranges only: "
    "not the error of the loss methods themselves, nor of the rain, the soil and cover maps or "
    "the subcatchment boundaries. The true runoff can lie outside them."
)


@dataclass(frozen=True)
class GridSpec:
    """A raster grid: where its cells are, how many, and the nodata of rasters written on it."""

    crs: CRS
    transform: Affine
    width: int
    height: int
    nodata: float


@dataclass(frozen=True)
class CellRasters:
    """Cell-level values of every storm on the soil raster's grid.

    One ``(height, width)`` array per storm, in the run's storm order; NaN
    where a cell has no value (outside every subcatchment, or nodata).
    """

    grid: GridSpec
    runoff_depth_m: tuple[NDArray[np.float64], ...]
    time_to_ponding_s: tuple[NDArray[np.float64], ...]
    #: What a reader should know about how the cells were filled.
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class Inputs:
    """Everything read from disk for a run, checked and in SI."""

    subcatchments: gpd.GeoDataFrame
    #: A class raster, or a polygon layer of classes (already in the overlay's CRS).
    soil: ClassGrid | ClassPolygons
    cover: ClassGrid | ClassPolygons | None
    storms: tuple[Hyetograph, ...]
    overrides: pd.DataFrame | None = None
    #: Warnings raised while reading (repaired polygons, implausible storms), as text.
    notes: tuple[str, ...] = ()
    #: The impervious-share grid (``[impervious] path``), if the project names one.
    impervious: ClassGrid | None = None


@dataclass(frozen=True)
class StormResult:
    """Results of one storm: per subcatchment, per unit, and the step series (SI columns)."""

    hyetograph: Hyetograph
    #: The storm on the run's step (resampled once), m: ``(steps,)``, or for a storm with areal
    #: rain ``(steps, subcatchments)`` in the layer's order, which a whole run's result makes
    #: only when asked (:class:`gisrun.storm.StepRain`; see :attr:`rain_per_step_m`).
    step_rain: StepRain
    #: The storm's polygon layer in the GeoPackage (``runoff_<storm>``), unique in the run.
    layer_name: str
    #: The storm's part of raster, map and plot file names, unique in the run.
    file_stem: str
    subcatchments: pd.DataFrame
    #: Excess-rainfall series per subcatchment and step; None when streamed to the output.
    series: pd.DataFrame | None
    #: Per-unit results; None when streamed to the output.
    units: pd.DataFrame | None
    #: Per-unit step arrays, kept for plots by runs small enough; None otherwise.
    loss: LossResult | None

    @property
    def rain_per_step_m(self) -> NDArray[np.float64]:
        """Rain depth per run step, m: ``(steps,)``, or ``(steps, subcatchments)``.

        Areal rain is made whole when asked (8 bytes per step and subcatchment).
        """
        return self.step_rain.whole()

    @property
    def steps(self) -> int:
        """Number of run steps."""
        return self.step_rain.steps

    @property
    def name(self) -> str:
        """The storm's name."""
        return self.hyetograph.name


@dataclass(frozen=True)
class UncertaintyResult:
    """Runoff bands from the parameter ranges (:mod:`gisrun.uncertainty`), SI columns.

    ``bands``: per storm and subcatchment the percentiles of runoff depth, volume
    and time to ponding, ``ponding_probability``, ``first_to_pond_share`` (share
    of samples in which it is among the first ``top_k`` to pond) and
    ``most_influential_parameter``. ``sensitivity``: the one-at-a-time table.
    ``draws``: what was sampled, its distribution and the source of its range.
    """

    settings: UncertaintySettings
    bands: pd.DataFrame
    sensitivity: pd.DataFrame
    draws: pd.DataFrame
    #: Subcatchments drawn as tornado figures (named in the project, or the largest).
    tornado_subcatchments: tuple[str, ...] = ()


@dataclass(frozen=True)
class RunResult:
    """A whole run: the overlay, the parameters and one :class:`StormResult` per storm.

    ``parameters`` and each storm's ``units`` are None when the run streamed its
    unit rows into the output as it went (large runs); ``unit_count``,
    ``method_counts``, ``lumped_parameters`` and ``unit_ranking_top`` are kept either way.
    """

    project: Project
    subcatchments: gpd.GeoDataFrame
    units: pd.DataFrame
    coverage: pd.DataFrame
    parameters: pd.DataFrame | None
    parameter_sources: pd.DataFrame
    storms: tuple[StormResult, ...]
    #: Lumped parameters per subcatchment, storm, method and basis with the runoff they give
    #: (SI, long form; :mod:`gisrun.parameters.equivalent`); empty when not made.
    lumped_parameters: pd.DataFrame
    #: Units (soil x cover x surface parts) that were run, and how many per loss method.
    unit_count: int
    method_counts: Mapping[str, int]
    #: The loss method of each subcatchment (``subcatchment_id``, ``loss_method``), layer order.
    subcatchment_methods: pd.DataFrame
    #: The soil raster's CRS (maps of cell values are drawn in it).
    raster_crs: CRS
    warnings: tuple[str, ...] = ()
    started_utc: str = ""
    checksums: Mapping[str, str] = field(default_factory=dict)
    #: Cell-level values for the rasters; None when the run was asked not to make them.
    cells: CellRasters | None = None
    #: The first pervious units to pond under each storm (SI columns), for a report on a
    #: run whose unit rows were streamed; None when ``storms[k].units`` are kept.
    unit_ranking_top: pd.DataFrame | None = None
    #: Name of the Parquet file beside the GeoPackage that holds the excess series (set by the
    #: writer that wrote it); None when they are the GeoPackage's ``excess_series`` table.
    series_file: str | None = None
    #: Runoff bands and sensitivity (``[uncertainty]``); None when not asked for.
    uncertainty: UncertaintyResult | None = None
