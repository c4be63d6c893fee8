"""The parameter sheet: the loss parameters actually used, per soil x cover x surface.

One table per loss method the run used (and only those), rows per soil class,
cover class and surface, columns the method's parameters in the run's display
units (mm/h, mm, 1/h; in/h and in for US units), the number of unit parts and
numbered references to the sources, listed under the table. Where a soil x
cover x surface carries more than one value (per-subcatchment overrides), the
cell shows the range.
"""

from __future__ import annotations

import pandas as pd

from ..engine import ENGINES
from ..model import RunResult
from .display import header, human, human_range, method_name, present_units
from .html import esc, table

__all__ = ["method_parameters", "parameter_sheet", "PARAMETER_WORDS"]

#: Plain names of the unit parameter columns (SI names; the unit is added from the column).
PARAMETER_WORDS = {
    "ks_m_per_s": "conductivity Ks", "suction_head_m": "suction head",
    "moisture_deficit": "moisture deficit", "depression_storage_m": "depression storage",
    "horton_f0_m_per_s": "initial capacity f0", "horton_fc_m_per_s": "final capacity fc",
    "horton_decay_per_s": "decay constant", "horton_recovery_per_s": "recovery constant",
    "curve_number": "curve number", "initial_abstraction_ratio": "Ia/S",
    "antecedent_condition": "antecedent condition", "initial_loss_m": "initial loss",
    "constant_loss_m_per_s": "constant loss rate", "phi_index_m_per_s": "phi-index",
}

_KEYS = ("soil_class", "cover_class", "surface")


def method_parameters(method: str) -> list[str]:
    """The unit parameter columns a method uses (from its declared parameters)."""
    return [p.column for p in ENGINES[method].PARAMETERS if p.in_frame]


def _display_name(column: str, system_frame: pd.DataFrame, si_column: str) -> str:
    word = PARAMETER_WORDS.get(si_column, si_column)
    shown = header(column)
    unit = shown[shown.rfind("("):] if shown.endswith(")") else ""
    return f"{word} {unit}".strip()


def _sources(result: RunResult) -> dict[tuple[str, ...], list[str]]:
    """(soil, cover, surface, parameter) -> its distinct sources."""
    ps = result.parameter_sources
    keys = [k for k in _KEYS if k in ps.columns]
    if "parameter" not in ps.columns or "source" not in ps.columns:
        return {}
    grouped = ps.groupby([*keys, "parameter"], sort=False)["source"].unique()
    return {tuple(map(str, k)): [str(s) for s in v] for k, v in grouped.items()}


def _method_table(result: RunResult, method: str, sources: dict[tuple[str, ...], list[str]]
                  ) -> str:
    params = result.parameters
    cols = [c for c in method_parameters(method) if c in params.columns]
    rows = params[params["loss_method"].astype(str) == method]
    keys = [k for k in _KEYS if k in rows.columns]
    grouped = rows.groupby(keys, sort=True)
    low = present_units(grouped[cols].min().reset_index(), result.project.units)
    high = present_units(grouped[cols].max().reset_index(), result.project.units)
    counts = grouped.size().to_numpy()
    shown = [c for c in low.columns if c not in keys]
    refs: dict[str, int] = {}
    out = []
    for i in range(len(low)):
        key = tuple(str(low.at[i, k]) for k in keys)
        row = {k.replace("_class", ""): low.at[i, k] for k in keys}
        for c, si in zip(shown, cols, strict=True):
            row[_display_name(c, low, si)] = human_range(low.at[i, c], high.at[i, c])
        row["unit parts"] = human(int(counts[i]))
        found = [s for si in cols for s in sources.get((*key, si), [])]
        numbers = sorted({refs.setdefault(s, len(refs) + 1) for s in found})
        row["sources"] = ", ".join(str(n) for n in numbers) or "-"
        out.append(row)
    listed = "".join(f"<li>{esc(s)}</li>" for s in refs)
    return (table(pd.DataFrame(out), left=len(keys), empty="No unit used this method.")
            + (f'<p class="small">Sources:</p><ol class="small">{listed}</ol>' if listed else ""))


def _sources_only(result: RunResult, method: str) -> str:
    ps = result.parameter_sources
    used = ps[ps["parameter"].isin(method_parameters(method))]
    listed = "".join(f"<li>{esc(s)}</li>" for s in pd.unique(used["source"].astype(str)))
    return ("<p>This run streamed its unit parameters into the GeoPackage "
            "(layer <code>unit_parameters</code>); their sources:</p>"
            + (f'<ol class="small">{listed}</ol>' if listed else "<p>None recorded.</p>"))


def parameter_sheet(result: RunResult) -> str:
    """HTML: one table of the values used and their sources per loss method used."""
    used = [m for m in ENGINES if result.method_counts.get(m, 0) > 0]
    sources = _sources(result)
    parts = [f"<p>The loss parameters actually used, per soil x cover x surface, for the "
             f"method{'s' if len(used) > 1 else ''} this run used "
             f"({esc(', '.join(method_name(m) for m in used))}), in "
             f"{esc(result.project.units.name.upper())} display units. Every unit's own values "
             "are in the GeoPackage layer <code>unit_parameters</code>.</p>"]
    for method in used:
        parts.append(f"<h3>{esc(method_name(method))}</h3>")
        if result.parameters is None or "loss_method" not in result.parameters.columns:
            parts.append(_sources_only(result, method))
        else:
            parts.append(_method_table(result, method, sources))
    return "\n".join(parts)
