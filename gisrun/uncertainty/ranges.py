"""The range of every uncertain parameter of every unit part, and which draw it shares.

Published ranges (pervious parts; impervious parts are not sampled):

``suction_head_m``, ``effective_porosity``
    Rawls, Brakensiek and Miller (1983), about one standard deviation either
    side, by texture (``data/green_ampt_texture_ranges.csv``); the effective
    porosity scales the moisture deficit (effective porosity x (1 - initial
    saturation)), so it is sampled only where the deficit came from it.
``ks_m_per_s``
    The publication gives no range for conductivity: gisrun's choice is the
    texture's suction-head log spread (the same ratio ``high / central``).
``curve_number``
    The antecedent runoff condition: the curve numbers for conditions I and III
    (NEH 630 Ch. 10, Table 10-1, through the engine's conversion
    :func:`gisrun.engine.curve_number.adjust_for_antecedent_condition`) read as
    the 10th and 90th percentiles of the curve number (Hjelmfelt et al. 1982, as
    NEH 630 Ch. 10 reports it; from memory). One draw for the whole run: the
    condition is the catchment's wetness before the storm. Not sampled when the
    run fixes the condition (``[method] antecedent_condition`` 1 or 3).
``horton_fc_m_per_s``, ``constant_loss_m_per_s``, ``phi_index_m_per_s``
    The group's minimum infiltration (transmission) rate range, TR-55 (1986)
    App. A (``data/hsg_conductivity.csv``), uniform: the group is defined by it.

Every other parameter (Horton f0 and decay, depression storage, initial loss) has
no shipped range and is held at its value. User override rows may give a range for
any parameter of :data:`gisrun.uncertainty.spread.SPREADS` with ``<column>_low`` and
``<column>_high`` (any unit alias, e.g. ``ks_mm_per_h_low``); it applies where the row
applies, with the usual precedence. A value an override row or attribute sets
without a range is taken as known (zero width), except the curve number, whose
antecedent-condition range is kept.

Units whose range comes from the same table row or override row share one *draw*:
in a sample the whole texture (group, override row) takes one value, as the
uncertainty is in the class's typical value, not in each unit's.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..engine import ENGINES
from ..engine.curve_number import adjust_for_antecedent_condition
from ..errors import GisrunWarning, ParameterError
from ..parameters.precedence import ATTRIBUTE_RANK, attribute_table, override_layers
from ..parameters.soils import resolve_soils
from ..parameters.tables import green_ampt_ranges_by_texture, hsg_conductivity
from .spread import SPREADS

__all__ = ["RangeSettings", "Ranges", "parameter_ranges", "ANTECEDENT_DRAW"]

#: The draw every curve number shares (the catchment's antecedent runoff condition).
ANTECEDENT_DRAW = "curve_number|antecedent runoff condition"
_GROUP_RATES = ("horton_fc_m_per_s", "constant_loss_m_per_s", "phi_index_m_per_s")


@dataclass(frozen=True)
class RangeSettings:
    """The run's choices that ranges depend on (from the project)."""

    classification: str
    dual_group_condition: str = "undrained"
    initial_saturation: float = 0.3
    initial_water_content: float | None = None
    antecedent_condition: int = 2


@dataclass
class Ranges:
    """Per row of the distinct unit parts and per column of ``SPREADS``: the range and draw.

    ``central``, ``low``, ``high`` are SI arrays; ``draw`` names the shared draw
    (``""`` where the width is zero: not sampled); ``source`` says where the range
    came from. ``effective_porosity`` is the central effective porosity behind
    the moisture deficit.
    """

    central: dict[str, np.ndarray] = field(default_factory=dict)
    low: dict[str, np.ndarray] = field(default_factory=dict)
    high: dict[str, np.ndarray] = field(default_factory=dict)
    draw: dict[str, np.ndarray] = field(default_factory=dict)
    source: dict[str, np.ndarray] = field(default_factory=dict)

    def sampled(self, column: str) -> np.ndarray:
        """Rows whose ``column`` is sampled (non-zero width)."""
        return self.draw[column] != ""

    def draw_names(self) -> list[str]:
        """Every draw name in use, sorted."""
        return sorted({d for col in self.draw.values() for d in col if d})


def parameter_ranges(rows: pd.DataFrame, settings: RangeSettings, *,
                     overrides: pd.DataFrame | None = None,
                     attributes: pd.DataFrame | None = None) -> Ranges:
    """Ranges of every sampled parameter on the given unit parts (SI).

    Parameters
    ----------
    rows : DataFrame
        Unit parameter rows (the unit parameter frame or its distinct rows):
        ``subcatchment_id``, ``soil_class``, ``cover_class``, ``surface``,
        ``hydrologic_soil_group``, ``loss_method`` and the SI parameter columns.
    settings : RangeSettings
    overrides, attributes : DataFrame, optional
        The run's override table and per-subcatchment attributes (as given to
        :func:`gisrun.parameters.assign_parameters`).

    Raises
    ------
    ParameterError
        An override range that does not contain the value the run uses.
    """
    rows = rows.reset_index(drop=True)
    out = Ranges()
    uses = _uses(rows)
    for column in SPREADS:
        central = _central(rows, column, settings)
        out.central[column] = central
        out.low[column], out.high[column] = central.copy(), central.copy()
        out.draw[column] = np.full(len(rows), "", dtype=object)
        out.source[column] = np.full(len(rows), "held at its value (no range)", dtype=object)
    _published(rows, out, settings)
    _user_ranges(rows, out, settings, overrides, attributes)
    for column in SPREADS:
        unused = ~uses[column] | (out.low[column] == out.high[column])
        out.draw[column][unused] = ""
    return out


def _uses(rows: pd.DataFrame) -> dict[str, np.ndarray]:
    """Rows whose loss method reads each column, on pervious ground."""
    methods = rows["loss_method"].to_numpy(dtype=object)
    pervious = (rows["surface"] == "pervious").to_numpy()
    out = {}
    for column in SPREADS:
        names = [m for m, module in ENGINES.items()
                 if column in {p.column for p in module.PARAMETERS}]
        out[column] = pervious & np.isin(methods, names)
    return out


def _central(rows: pd.DataFrame, column: str, settings: RangeSettings) -> np.ndarray:
    if column != "effective_porosity":
        return rows[column].to_numpy(dtype=np.float64).copy()
    keep = 1.0 - settings.initial_saturation
    deficit = rows["moisture_deficit"].to_numpy(dtype=np.float64)
    return deficit / keep if keep > 0 else np.zeros(len(rows))


def _published(rows: pd.DataFrame, out: Ranges, settings: RangeSettings) -> None:
    pervious = (rows["surface"] == "pervious").to_numpy()
    _texture_ranges(rows, out, settings, pervious)
    for column in _GROUP_RATES:
        _group_range(rows, out, column, pervious)
    if settings.antecedent_condition == 2:
        cn = out.central["curve_number"]
        _set(out, "curve_number", pervious, adjust_for_antecedent_condition(cn, np.ones(len(cn))),
             adjust_for_antecedent_condition(cn, np.full(len(cn), 3)), ANTECEDENT_DRAW,
             "antecedent runoff conditions I and III as 10th and 90th percentiles "
             "(NEH 630 Ch. 10)")


def _texture_ranges(rows: pd.DataFrame, out: Ranges, settings: RangeSettings,
                    pervious: np.ndarray) -> None:
    notes: list[GisrunWarning] = []
    labels = rows.loc[pervious, "soil_class"].unique()
    soils = resolve_soils(labels, settings.classification, settings.dual_group_condition, notes)
    table = green_ampt_ranges_by_texture()
    textures = rows["soil_class"].map({k: v.texture for k, v in soils.items()})
    known = pervious & textures.isin(table.index).to_numpy()
    t = table.reindex(textures.where(known).to_numpy())
    psi_mean = np.sqrt(t["suction_head_m_low"].to_numpy() * t["suction_head_m_high"].to_numpy())
    lo_ratio = t["suction_head_m_low"].to_numpy() / psi_mean
    hi_ratio = t["suction_head_m_high"].to_numpy() / psi_mean
    names = [str(t) for t in textures]
    cite = _texts("Rawls, Brakensiek and Miller (1983), {}", names)
    for column in ("suction_head_m", "ks_m_per_s"):
        c = out.central[column]
        why = _texts("Rawls, Brakensiek and Miller (1983), {}" + (
            ", one standard deviation" if column == "suction_head_m" else
            ": no published range; the suction head's log spread (gisrun's choice)"), names)
        _set(out, column, known, c * lo_ratio, c * hi_ratio,
             _texts(column + "|texture {}", names), why)
    derived = known if settings.initial_water_content is None else np.zeros_like(known)
    mid = 0.5 * (t["effective_porosity_low"].to_numpy() + t["effective_porosity_high"].to_numpy())
    c = out.central["effective_porosity"]
    _set(out, "effective_porosity", derived & np.isclose(c, mid, rtol=1e-9, atol=1e-12),
         t["effective_porosity_low"].to_numpy(), t["effective_porosity_high"].to_numpy(),
         _texts("effective_porosity|texture {}", names),
         _texts("{}, one standard deviation", list(cite)))


def _group_range(rows: pd.DataFrame, out: Ranges, column: str, pervious: np.ndarray) -> None:
    table = hsg_conductivity()
    group = rows["hydrologic_soil_group"].astype(object)
    known = pervious & group.isin(table.index).to_numpy()
    t = table.reindex(group.where(known).to_numpy())
    low = t["min_infiltration_low_m_per_s"].to_numpy()
    high = t["min_infiltration_high_m_per_s"].to_numpy()
    mid = t["min_infiltration_mid_m_per_s"].to_numpy()
    shipped = known & np.isclose(out.central[column], mid, rtol=1e-9, atol=0.0)
    groups = [str(g) for g in group]
    _set(out, column, shipped, low, high, _texts(column + "|group {}", groups),
         _texts("group {} minimum infiltration range, TR-55 (1986) App. A", groups))


def _texts(template: str, values: list[str]) -> np.ndarray:
    """``template`` filled with each value, as an object array."""
    return np.array([template.format(v) for v in values], dtype=object)


def _set(out: Ranges, column: str, where: np.ndarray, low: np.ndarray, high: np.ndarray,
         draw: object, source: object) -> None:
    """Give the rows ``where`` a range, a draw name and a source (arrays or scalars)."""
    if not np.any(where):
        return
    for target, value in ((out.low, low), (out.high, high), (out.draw, draw),
                          (out.source, source)):
        values = np.broadcast_to(np.asarray(value, dtype=target[column].dtype), where.shape)
        target[column][where] = values[where]


def _user_ranges(rows: pd.DataFrame, out: Ranges, settings: RangeSettings,
                 overrides: pd.DataFrame | None, attributes: pd.DataFrame | None) -> None:
    """Override rows and attributes in precedence order: a range replaces, a value pins."""
    layers = list(override_layers(overrides, settings.classification))
    table = attribute_table(attributes)
    if table is not None:
        layers += [(ATTRIBUTE_RANK, row) for row in table.to_dict("records")]
    for _, layer in layers:
        _check_sampled(layer)
        match = np.ones(len(rows), dtype=bool)
        for key in ("subcatchment_id", "soil_class", "cover_class"):
            if layer.get(key) is not None:
                match &= (rows[key] == layer[key]).to_numpy()
        match &= (rows["surface"] == (layer.get("surface") or "pervious")).to_numpy()
        if match.any():
            _apply_user_layer(out, layer, match)


def _check_sampled(layer: dict) -> None:
    """A range for a parameter gisrun holds fixed (no distribution stated) is an error."""
    for key in layer:
        stem = key.removesuffix("_low")
        if key.endswith("_low") and stem not in SPREADS and _given(layer, key):
            raise ParameterError(
                f"{layer['override_source']}:{stem}_low/_high",
                "gives a range for a parameter the uncertainty runs do not sample",
                f"remove the two columns; ranges are read for {', '.join(SPREADS)}")


def _given(layer: dict, key: str) -> bool:
    value = layer.get(key)
    return value is not None and not (isinstance(value, float) and np.isnan(value))


def _apply_user_layer(out: Ranges, layer: dict, match: np.ndarray) -> None:
    where = layer["override_source"]
    for column in SPREADS:
        if _given(layer, f"{column}_low"):
            low, high = float(layer[f"{column}_low"]), float(layer[f"{column}_high"])
            central = out.central[column][match]
            outside = (central < low * (1 - 1e-12)) | (central > high * (1 + 1e-12))
            if outside.any():
                raise ParameterError(
                    f"{where}:{column}_low/_high",
                    f"range {low:g}..{high:g} (SI) does not contain the value used, "
                    f"{float(central[outside][0]):g}",
                    "give the value in the same row, or a range that contains it")
            _set(out, column, match, low, high, f"{column}|{where}", f"{where} (your range)")
        elif _given(layer, column) or (column == "effective_porosity"
                                       and _given(layer, "moisture_deficit")):
            if column == "curve_number":
                continue  # the antecedent-condition range applies to any curve number
            value = out.central[column]
            _set(out, column, match, value, value, "", f"{where} (a value given, no range)")
