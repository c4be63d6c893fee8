"""What a project is: the checked, frozen settings of a run (every path absolute, SI values).

Built from a project file by :func:`gisrun.config.project.load_project`; this
module holds only the types, so compute and result modules can name a
:class:`Project` without reaching the file reader.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .units import UnitSystem

__all__ = ["SubcatchmentSource", "SoilSource", "CoverSource", "ImperviousSource",
           "UncertaintySettings", "Project"]


@dataclass(frozen=True)
class SubcatchmentSource:
    """Where the subcatchment polygons come from."""

    path: Path
    id_field: str
    layer: str | None = None
    crs: str | None = None
    method_field: str | None = None
    parameter_fields: tuple[str, ...] = ()
    #: Largest share of the smaller of two subcatchments that may overlap the other (their
    #: rain is counted twice); above it the run stops. Every overlap is reported.
    max_overlap_fraction: float = 0.01


class _ClassLayer:
    """What the soil and the cover source share: a raster, or a polygon layer with a class field."""

    class_field: str | None

    @property
    def is_polygons(self) -> bool:
        """True for a polygon layer, False for a raster."""
        return self.class_field is not None

    @property
    def kind(self) -> str:
        """``"polygon layer"`` or ``"raster"``, for messages and listings."""
        return "polygon layer" if self.is_polygons else "raster"


@dataclass(frozen=True)
class SoilSource(_ClassLayer):
    """The soil raster or polygon layer, its code table and the soil choices of the run.

    With ``class_field`` the file is a polygon layer (``layer`` picks one) whose field
    holds each polygon's class, or a code looked up in ``codes`` when that is given.
    With an attribute table (``[soil] attributes``) ``codes`` is the table's
    key -> class map and ``keys`` the :class:`gisrun.parameters.class_keys.KeyedClasses`
    it was read into (typed loosely here so the project types import no compute).
    """

    path: Path
    codes: dict[int, str]
    classification: str = "hydrologic_soil_group"
    dual_group_condition: str = "undrained"
    initial_saturation: float = 0.3
    crs: str | None = None
    initial_water_content: float | None = None
    keys: Any = None
    attributes: Path | None = None
    unlisted_keys: str = "error"
    layer: str | None = None
    class_field: str | None = None


@dataclass(frozen=True)
class CoverSource(_ClassLayer):
    """The land-cover raster or polygon layer and its code table.

    Or attribute table, as for the soil; see :class:`SoilSource`.
    """

    path: Path
    codes: dict[int, str]
    crs: str | None = None
    keys: Any = None
    attributes: Path | None = None
    unlisted_keys: str = "error"
    layer: str | None = None
    class_field: str | None = None


@dataclass(frozen=True)
class ImperviousSource:
    """The ``[impervious]`` table: an impervious-share grid and disconnected impervious area.

    Attributes
    ----------
    path : Path or None
        Impervious-share raster; None: each cover's tabulated share is used.
    scale : str or None
        What the grid's values are: ``"percent"`` (0-100) or ``"fraction"`` (0-1).
    disconnected_fraction : float or None
        Project-wide share of impervious area draining onto pervious ground (0-1).
    disconnected_field : str or None
        Subcatchment field giving that share per subcatchment (blank: the next source).
    disconnected_by_cover : dict of str to float
        That share per cover class.
    runon_to : str
        Where disconnected runoff runs on: ``"unit"`` (the pervious part of the same
        soil x cover unit) or ``"subcatchment"`` (all its pervious parts, by area).
    compare_connected : bool
        Also run with every impervious area connected and report the difference.
    """

    path: Path | None = None
    scale: str | None = None
    crs: str | None = None
    disconnected_fraction: float | None = None
    disconnected_field: str | None = None
    disconnected_by_cover: dict[str, float] = field(default_factory=dict)
    runon_to: str = "unit"
    compare_connected: bool = False

    @property
    def disconnects(self) -> bool:
        """Whether any disconnected share is stated."""
        return (self.disconnected_fraction is not None or self.disconnected_field is not None
                or bool(self.disconnected_by_cover))


@dataclass(frozen=True)
class UncertaintySettings:
    """``[uncertainty]``: runoff bands from the published parameter ranges.

    ``samples`` parameter sets are drawn by Latin hypercube from ``seed``; the
    bands are the ``percentiles`` of each subcatchment's figures; ``top_k`` is the
    length of the ponding-first list whose stability is counted; the tornado
    figures are drawn for ``sensitivity_subcatchments`` (or the largest few).
    """

    samples: int
    seed: int
    percentiles: tuple[float, ...] = (10.0, 50.0, 90.0)
    top_k: int = 10
    sensitivity_subcatchments: tuple[str, ...] = ()


@dataclass(frozen=True)
class Project:
    """A checked project: every input path absolute, every value in SI.

    Attributes
    ----------
    path : Path
        The project file.
    units : UnitSystem
        The unit system of values in the project file and of the outputs.
    time_step_s : float
        The run's time step, seconds.
    storms : tuple of dict
        The ``[[storms]]`` tables as written; turned into hyetographs by
        :func:`gisrun.config.storms.storm_from_config`.
    """

    path: Path
    name: str
    units: UnitSystem
    output: Path
    time_step_s: float
    subcatchments: SubcatchmentSource
    soil: SoilSource
    cover: CoverSource | None
    storms: tuple[dict[str, Any], ...]
    nodata_rule: str = "dominant"
    max_nodata_fraction: float = 0.25
    method: str = "green_ampt"
    combine: str = "units"
    overrides: Path | None = None
    rain_scale_field: str | None = None
    memory_budget_mb: float = 1500.0
    compare_composite: bool = False
    #: Lumped parameter sets to make: ``"solve"``, ``"area_weighted"`` or ``"off"``.
    lumped_parameters: str = "auto"
    initial_abstraction_ratio: float = 0.2
    antecedent_condition: int = 2
    overlay_cache: Path | None = None
    #: ``[[storms]]`` keys whose value names an input file or folder (from the storm kinds).
    storm_file_keys: tuple[str, ...] = ("path", "idf_table")
    #: Where the excess series go: ``"auto"``, ``"geopackage"`` or ``"parquet"``.
    series: str = "auto"
    #: The ``[impervious]`` table; None when the project has none.
    impervious: ImperviousSource | None = None
    #: Runoff bands from the parameter ranges (``[uncertainty]``); None when not asked for.
    uncertainty: UncertaintySettings | None = None

    @property
    def base_dir(self) -> Path:
        """The folder relative paths in the project file are taken from."""
        return self.path.parent

    def where(self, section: str, key: str | None = None) -> str:
        """Name a place in the project file for an error message."""
        return f"{self.path.name}:[{section}]" + (f".{key}" if key else "")

    def input_files(self) -> dict[str, Path]:
        """Every file the run reads, by what it is (``"soil raster"``); no file is opened."""
        files = {"project file": self.path, "subcatchment file": self.subcatchments.path,
                 f"soil {self.soil.kind}": self.soil.path}
        if self.soil.attributes is not None:
            files["soil attribute table"] = self.soil.attributes
        if self.cover is not None:
            files[f"cover {self.cover.kind}"] = self.cover.path
            if self.cover.attributes is not None:
                files["cover attribute table"] = self.cover.attributes
        if self.overrides is not None:
            files["parameter override file"] = self.overrides
        if self.impervious is not None and self.impervious.path is not None:
            files["impervious raster"] = self.impervious.path
        files.update(self.storm_files())
        return files

    def storm_files(self) -> dict[str, Path]:
        """Every file or folder the ``[[storms]]`` tables name, by table and key.

        A design storm's ``areal_reduction.table`` (a factor table) is one of them.
        """
        files = {f"[[storms]] {i}.{key}": self.base_dir / spec[key]
                 for i, spec in enumerate(self.storms, start=1)
                 for key in self.storm_file_keys if isinstance(spec.get(key), str)}
        for i, spec in enumerate(self.storms, start=1):
            reduction = spec.get("areal_reduction")
            if isinstance(reduction, dict) and isinstance(reduction.get("table"), str):
                files[f"[[storms]] {i}.areal_reduction.table"] = self.base_dir / reduction["table"]
        return files
