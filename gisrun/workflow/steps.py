"""The run, step by step, for a notebook user: overlay, parameters, one storm.

::

    project = load_project("demo_catchment")
    inputs = read_inputs(project)
    units, coverage, notes = overlay_inputs(project, inputs)
    params, sources, notes = prepare_parameters(project, inputs, units)
    storm = run_storm(params, inputs.storms[0], project.time_step_s, sub_ids=...)

Each step takes and returns frames and arrays (SI); :func:`gisrun.run` does all
of them chunk by chunk.
"""

from __future__ import annotations

import dataclasses

import geopandas as gpd
import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..aggregate import (
    step_totals,
    subcatchment_series,
    summarize_subcatchments,
    summarize_units,
)
from ..engine import ENGINES, method_name, run_losses
from ..errors import ParameterError, VectorError
from ..grid.impervious import impervious_shares
from ..grid.overlay import compute_unit_areas
from ..grid.polygons import ClassPolygons, polygon_unit_areas
from ..model import Inputs, StormResult
from ..parameters import assign_parameters, composite_parameters
from ..parameters.disconnection import Disconnection, assign_disconnection, merge_sources
from ..parameters.equivalent import LUMPED_COLUMNS, StormRunoff, lumped_parameters
from ..parameters.keyed import table_impervious_shares
from ..present.layers import layer_name, storm_layer_name
from ..project import Project
from ..runon import run_with_runon
from ..storm import Hyetograph, StepRain
from .inputs import check_inputs_codes
from .polygon_inputs import class_layer_sources
from .rain import run_rain, unit_rain

__all__ = [
    "overlay_inputs",
    "prepare_parameters",
    "compact_sources",
    "run_storm",
    "add_composite_comparison",
    "rain_scale_for_units",
    "lumped_parameter_table",
    "disconnection_spec",
    "subcatchment_attributes",
]


def overlay_inputs(project: Project, inputs: Inputs, *, check_codes: bool = True
                   ) -> tuple[pd.DataFrame, pd.DataFrame, list]:
    """Areas of every (subcatchment, soil class, cover class) unit, and nodata per subcatchment.

    ``check_codes=False`` skips the check of the rasters' codes under the
    subcatchments (``gisrun.run`` checks them once before its chunks).

    Raises
    ------
    RasterError
        If a raster holds codes its code table does not list, or nodata exceeds the limit.
    """
    if check_codes:
        check_inputs_codes(project, inputs)
    cover_codes = project.cover.codes if project.cover else None
    polygons = any(isinstance(x, ClassPolygons) for x in (inputs.soil, inputs.cover))
    units, coverage, notes = (polygon_unit_areas if polygons else compute_unit_areas)(
        inputs.subcatchments, inputs.soil, inputs.cover,
        soil_codes=project.soil.codes,
        cover_codes=cover_codes,
        nodata_rule=project.nodata_rule,
        max_nodata_fraction=project.max_nodata_fraction,
    )
    source = project.impervious
    if source is not None and source.path is not None and inputs.impervious is not None:
        units, more = impervious_shares(
            inputs.subcatchments, inputs.soil, inputs.cover, inputs.impervious, units,
            soil_codes=project.soil.codes, cover_codes=cover_codes, scale=source.scale,
            max_nodata_fraction=project.max_nodata_fraction)
        notes = [*notes, *more]
    return units, coverage, notes


def prepare_parameters(
    project: Project, inputs: Inputs, units: pd.DataFrame
) -> tuple[pd.DataFrame, pd.DataFrame, list]:
    """Unit parameters (SI) from the published tables and the user's overrides."""
    attributes = _subcatchment_attributes(project, inputs.subcatchments)
    units, table_shares = table_impervious_shares(units, project.cover.keys if project.cover
                                                  else None)
    params, sources, notes = assign_parameters(
        units,
        classification=project.soil.classification,
        dual_group_condition=project.soil.dual_group_condition,
        initial_saturation=project.soil.initial_saturation,
        method=project.method,
        overrides=inputs.overrides,
        subcatchment_attributes=attributes,
        initial_abstraction_ratio=project.initial_abstraction_ratio,
        antecedent_condition=project.antecedent_condition,
        initial_water_content=project.soil.initial_water_content,
        compact_provenance=True,
        soil_keys=project.soil.keys,
        cover_keys=project.cover.keys if project.cover else None,
    )
    sources = pd.DataFrame(sources)
    notes = list(notes)
    if "impervious_fraction" in units.columns and project.impervious is not None:
        sources = pd.concat([sources, _share_sources(units, project)], ignore_index=True)
    if project.impervious is not None and project.impervious.disconnects:
        params, more, said = assign_disconnection(
            params, disconnection_spec(project, inputs.subcatchments))
        sources, notes = merge_sources(sources, more), [*notes, *said]
    if table_shares is not None:
        sources = pd.concat([sources, table_shares], ignore_index=True)
    layers = class_layer_sources(project, params)
    if not layers.empty:
        sources = pd.concat([sources, layers], ignore_index=True)
    if project.combine == "composite":
        params = composite_parameters(params)
    return params.reset_index(drop=True), compact_sources(sources), notes


def disconnection_spec(project: Project, subs: gpd.GeoDataFrame) -> Disconnection:
    """The project's disconnected shares, the subcatchment field read and checked.

    Raises
    ------
    ParameterError
        Naming the first subcatchment whose share is neither blank nor a number 0-1.
    """
    source = project.impervious
    by_sub, where = None, ""
    if source.disconnected_field:
        where = f"{project.subcatchments.path.name}:{source.disconnected_field}"
        raw = subs[source.disconnected_field]
        blank = raw.isna() | (raw.astype(str).str.strip() == "")
        values = pd.to_numeric(raw.where(~blank), errors="coerce")
        bad = ~blank & ~((values >= 0) & (values <= 1))
        if bad.any():
            i = int(np.flatnonzero(bad.to_numpy())[0])
            raise ParameterError(f"{where}:id={subs['subcatchment_id'].iloc[i]}",
                                 f"disconnected share {raw.iloc[i]!r} is not a number from 0 "
                                 "to 1", "give the share of impervious area draining onto "
                                 "pervious ground, or leave it blank for the cover's share")
        by_sub = pd.Series(values.to_numpy(dtype=np.float64),
                           index=subs["subcatchment_id"].astype(str).to_numpy())
    return Disconnection(by_cover=source.disconnected_by_cover,
                         project_wide=source.disconnected_fraction, by_subcatchment=by_sub,
                         field_where=where, runon_to=source.runon_to)


def _share_sources(units: pd.DataFrame, project: Project) -> pd.DataFrame:
    """Provenance rows of the impervious shares measured on the grid (one per soil x cover)."""
    counts = units.groupby(["soil_class", "cover_class"], sort=True).size()
    name = project.impervious.path.name
    return pd.DataFrame({
        "parameter": "impervious_fraction",
        "source": f"impervious grid {name} ({project.where('impervious', 'path')}), "
                  "area-weighted exactly over each unit's cells",
        "soil_class": counts.index.get_level_values(0), "cover_class":
        counts.index.get_level_values(1), "surface": "impervious",
        "unit_parts": counts.to_numpy()})


_SOURCE_KEYS = ["parameter", "source", "soil_class", "cover_class", "surface"]


def compact_sources(sources: pd.DataFrame) -> pd.DataFrame:
    """One row per parameter, source and soil x cover x surface, with the count of unit parts.

    A source specific to one subcatchment names it in its text (``...id=S12``),
    so nothing is lost by not repeating every subcatchment's rows.
    """
    if sources.empty or not set(_SOURCE_KEYS) <= set(sources.columns):
        return sources
    counts = sources["unit_parts"] if "unit_parts" in sources.columns else pd.Series(
        1, index=sources.index)
    frame = sources[_SOURCE_KEYS].assign(unit_parts=counts.to_numpy())
    return (frame.groupby(_SOURCE_KEYS, dropna=False, sort=True)["unit_parts"].sum()
            .reset_index())


def subcatchment_attributes(project: Project, subs: gpd.GeoDataFrame) -> pd.DataFrame | None:
    """Per-subcatchment method choice and parameter values from the layer's fields (or None)."""
    return _subcatchment_attributes(project, subs)


def _subcatchment_attributes(project: Project, subs: gpd.GeoDataFrame) -> pd.DataFrame | None:
    """Per-subcatchment method choice and parameter values from the layer's fields."""
    attrs = pd.DataFrame({"subcatchment_id": subs["subcatchment_id"]})
    field_name = project.subcatchments.method_field
    if field_name:
        methods = subs[field_name].astype(object).where(subs[field_name].notna(), None)
        where = f"{project.subcatchments.path.name}:{field_name}"
        attrs["loss_method"] = [_layer_method(v, f"{where}:id={sid}")
                                for sid, v in zip(attrs["subcatchment_id"], methods, strict=True)]
    for name in project.subcatchments.parameter_fields:
        attrs[name] = subs[name].to_numpy()
    values = attrs.drop(columns="subcatchment_id")
    attrs = attrs[values.notna().any(axis=1).to_numpy()] if values.shape[1] else attrs.iloc[:0]
    return attrs if len(attrs) else None


def _layer_method(value: object, where: str) -> str | None:
    """A subcatchment's loss method from the method field: a name, or None (empty) for the default.

    Raises
    ------
    VectorError
        A value that is not text (a number, a date): it is not silently the default.
    """
    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    if not isinstance(value, str):
        raise VectorError(where, f"method {value!r} is not a loss method name",
                          f"write one of {', '.join(ENGINES)} as text, or leave it empty for "
                          "the run's method")
    return method_name(value, where=where, error=VectorError)


def run_storm(
    params: pd.DataFrame,
    hyetograph: Hyetograph,
    dt_s: float,
    *,
    sub_ids: NDArray[np.object_],
    rain_scale: NDArray[np.float64] | None = None,
    rain_per_step_m: NDArray[np.float64] | None = None,
    runon_to: str | None = None,
) -> StormResult:
    """Run every unit through one storm and aggregate to subcatchments (all SI).

    ``rain_per_step_m`` is the storm already resampled onto ``dt_s`` (resampled
    here when not given): ``(steps,)``, or ``(steps, len(sub_ids))`` for a storm with areal
    rain (:func:`gisrun.workflow.rain.run_rain`), each unit then taking its subcatchment's
    column. ``rain_scale`` is a factor per unit (row of ``params``). ``runon_to``
    (``"unit"`` or ``"subcatchment"``) routes the ``disconnected_fraction`` of impervious
    runoff onto pervious parts (:func:`gisrun.runon.run_with_runon`); None runs every part
    on its rain alone.
    """
    rain = (run_rain(hyetograph, dt_s, sub_ids) if rain_per_step_m is None
            else rain_per_step_m)
    rain_units = unit_rain(rain, params["subcatchment_id"], sub_ids, rain_scale)
    if runon_to is None:
        loss = run_losses(params, rain_units, dt_s)
    else:
        loss = run_with_runon(params, rain_units, dt_s, runon_to=runon_to)
    totals = step_totals(loss, params, sub_ids)  # the step arrays read once
    units = summarize_units(loss, params, dt_s, totals=totals)
    series = subcatchment_series(loss, params, sub_ids, dt_s, totals=totals)
    subs = summarize_subcatchments(loss, params, sub_ids, dt_s, totals=totals)
    for name in ("rain", "infiltration", "excess"):
        series[f"{name}_intensity_m_per_s"] = series[f"{name}_m"] / dt_s
    return StormResult(hyetograph=hyetograph, step_rain=StepRain.held(rain),
                       layer_name=storm_layer_name(hyetograph.name),
                       file_stem=layer_name(hyetograph.name), subcatchments=subs,
                       series=series, units=units, loss=loss)


def add_composite_comparison(project: Project, inputs: Inputs, params: pd.DataFrame,
                             results: list[StormResult], sub_ids: NDArray[np.object_]
                             ) -> list[StormResult]:
    """Run area-weighted composite parameters too, and add their figures beside each result.

    Returns each result with ``composite_runoff_depth_m``,
    ``composite_time_to_ponding_s`` and ``aggregation_difference_m`` (composite
    minus per-unit runoff depth) added to its subcatchment table, so the bias of
    lumping a subcatchment's soils into one parameter set is visible.
    """
    composite = composite_parameters(params).reset_index(drop=True)
    scale = rain_scale_for_units(project, inputs, composite)
    out = []
    for result in results:
        lumped = run_storm(composite, result.hyetograph, project.time_step_s, sub_ids=sub_ids,
                           rain_scale=scale, rain_per_step_m=result.rain_per_step_m).subcatchments
        subs = result.subcatchments.assign(
            composite_runoff_depth_m=lumped["runoff_depth_m"].to_numpy(),
            composite_time_to_ponding_s=lumped["time_to_ponding_s"].to_numpy())
        subs["aggregation_difference_m"] = (subs["composite_runoff_depth_m"]
                                            - subs["runoff_depth_m"])
        out.append(dataclasses.replace(result, subcatchments=subs))
    return out


def rain_scale_for_units(project: Project, inputs: Inputs, params: pd.DataFrame
                         ) -> NDArray[np.float64] | None:
    """Per-unit factor on storm depth from the subcatchment attribute, if the project names one.

    Raises
    ------
    ParameterError
        Naming the first subcatchment whose factor is not a non-negative number.
    """
    field_name = project.rain_scale_field
    if not field_name:
        return None
    subs = inputs.subcatchments
    factor = pd.to_numeric(subs[field_name], errors="coerce")
    bad = subs.loc[~np.isfinite(factor) | (factor < 0), "subcatchment_id"]
    if len(bad):
        raise ParameterError(
            f"{project.subcatchments.path.name}:{field_name}:id={bad.iloc[0]}",
            "is not a non-negative number", "give every subcatchment a rain depth factor",
        )
    by_id = pd.Series(factor.to_numpy(), index=subs["subcatchment_id"])
    return by_id.reindex(params["subcatchment_id"]).to_numpy(dtype=np.float64)


def lumped_parameter_table(project: Project, inputs: Inputs, params: pd.DataFrame,
                           results: list[StormResult], sub_ids: NDArray[np.object_]
                           ) -> pd.DataFrame:
    """Lumped parameters of these subcatchments beside the runoff they give (SI, long form).

    Made as ``[method] lumped_parameters`` asks (``"solve"``: area-weighted,
    equivalent and fitted sets; ``"area_weighted"``: that set only; ``"off"``:
    none) and only for ``combine = "units"`` (a composite run is lumped already:
    its parameters are the ``unit_parameters`` layer). See
    :mod:`gisrun.parameters.equivalent`.
    """
    if project.lumped_parameters == "off" or project.combine != "units":
        return pd.DataFrame({c: [] for c in LUMPED_COLUMNS})
    storms = [StormRunoff(r.name, r.rain_per_step_m,
                          r.subcatchments["runoff_depth_m"].to_numpy(dtype=np.float64))
              for r in results]
    scale = rain_scale_for_units(project, inputs, pd.DataFrame({"subcatchment_id": sub_ids}))
    return lumped_parameters(params, sub_ids, storms, project.time_step_s,
                             default_method=project.method, rain_scale=scale,
                             solve=project.lumped_parameters in ("solve", "auto"))
