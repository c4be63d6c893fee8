"""Published parameter tables shipped with gisrun, read and converted to SI.

Each table is a CSV file in ``gisrun/parameters/data/``. Its first lines are
comments: ``# source: ...`` names the publication and table, ``# units: ...``
the published units, ``# note: ...`` anything a reader must know. Values are
entered as published and converted to SI here, on load. Files are read only
through :mod:`importlib.resources`; this module opens no user path.

A table added for a new loss method needs no code here: its first column is
the key (``hydrologic_soil_group``, ``texture`` or ``cover_class``), its value
columns are named like override columns (``<parameter>_<published unit>``), a
``# title:`` line names it, and the method's parameter declares
``default="table:<file stem>"`` (see :mod:`gisrun.parameters.defaults`).

Tables
------
``green_ampt_texture``
    Green-Ampt parameters for the 11 USDA texture classes (Rawls, Brakensiek
    and Miller 1983; Chow, Maidment and Mays 1988, Table 4.3.1) and the
    texture's hydrologic soil group (NRCS TR-55 1986, Appendix A).
``hsg_conductivity``
    Saturated conductivity class limits by hydrologic soil group (NRCS NEH
    Part 630 Ch. 7, 2009, Table 7-1) and minimum infiltration rates (TR-55
    1986, Appendix A).
``horton_hsg``
    Horton f0, fc, decay and recovery constants by hydrologic soil group.
``hsg_defaults``
    gisrun's documented choices per group: representative Green-Ampt texture
    and initial soil loss (common practice).
``green_ampt_texture_ranges``
    The ranges (about one standard deviation) of effective porosity and
    suction head for the same textures (Rawls, Brakensiek and Miller 1983),
    read by :mod:`gisrun.uncertainty`.
``cover_curve_numbers``
    Curve numbers and impervious share of cover classes (NRCS TR-55 1986,
    Tables 2-2a to 2-2c) with pervious-part curve numbers and depression
    storage.

References
----------
.. [1] Rawls, W.J., Brakensiek, D.L., Miller, N. (1983). Green-Ampt
   infiltration parameters from soils data. J. Hydraul. Eng. 109(1), 62-70.
.. [2] Chow, V.T., Maidment, D.R., Mays, L.W. (1988). Applied Hydrology.
   McGraw-Hill, Table 4.3.1.
.. [3] USDA SCS (1986). Urban Hydrology for Small Watersheds, TR-55, 2nd ed.
.. [4] USDA NRCS (2009). National Engineering Handbook Part 630, Ch. 7,
   Hydrologic Soil Groups, Table 7-1.
.. [5] Akan, A.O. (1993). Urban Stormwater Hydrology. Technomic.
"""

from __future__ import annotations

import io
from functools import cache
from importlib import resources
from typing import NamedTuple

import pandas as pd

from ..units import to_si

__all__ = [
    "HYDROLOGIC_SOIL_GROUPS",
    "DUAL_GROUPS",
    "TEXTURE_CLASSES",
    "NON_INFILTRATING_SOILS",
    "UNSPECIFIED_COVER",
    "UNSPECIFIED_COVER_STANDS_FOR",
    "IMPERVIOUS_CURVE_NUMBER",
    "DEFAULT_IMPERVIOUS_DEPRESSION_STORAGE_M",
    "DEFAULT_INITIAL_ABSTRACTION_RATIO",
    "DEFAULT_ANTECEDENT_CONDITION",
    "ShippedTable",
    "list_tables",
    "read_shipped_table",
    "green_ampt_by_texture",
    "hsg_conductivity",
    "horton_by_group",
    "group_defaults",
    "cover_table",
    "green_ampt_ranges_by_texture",
]

#: The four hydrologic soil groups (NRCS NEH Part 630 Ch. 7, 2009).
HYDROLOGIC_SOIL_GROUPS: tuple[str, ...] = ("A", "B", "C", "D")
#: Dual groups: first letter when drained, D when undrained (NEH 630 Ch. 7, 2009).
DUAL_GROUPS: tuple[str, ...] = ("A/D", "B/D", "C/D")
#: The 12 USDA texture classes, as labels in a project's soil code table.
TEXTURE_CLASSES: tuple[str, ...] = (
    "sand", "loamy sand", "sandy loam", "loam", "silt loam", "silt", "sandy clay loam",
    "clay loam", "silty clay loam", "sandy clay", "silty clay", "clay",
)
#: Soil labels that take no water; their area behaves as impervious.
NON_INFILTRATING_SOILS: tuple[str, ...] = ("water", "rock")
#: Cover label used when a project has no cover raster.
UNSPECIFIED_COVER = "unspecified"
#: The shipped cover whose pervious curve number an unspecified cover gets.
UNSPECIFIED_COVER_STANDS_FOR = "open_space_good"
#: Curve number of impervious surfaces (TR-55 1986, Table 2-2a).
IMPERVIOUS_CURVE_NUMBER = 98.0
#: Depression storage of impervious surfaces, 1.5 mm (common practice).
DEFAULT_IMPERVIOUS_DEPRESSION_STORAGE_M = 0.0015
#: Ia/S of the curve numbers tabulated in TR-55 (1986).
DEFAULT_INITIAL_ABSTRACTION_RATIO = 0.2
#: Antecedent runoff condition of the tabulated curve numbers (TR-55 1986: II).
DEFAULT_ANTECEDENT_CONDITION = 2

_TITLES: dict[str, str] = {
    "green_ampt_texture": "Green-Ampt parameters by USDA soil texture",
    "hsg_conductivity": "Conductivity classes and minimum infiltration by hydrologic soil group",
    "horton_hsg": "Horton parameters by hydrologic soil group",
    "hsg_defaults": "Representative texture and initial soil loss by hydrologic soil group",
    "cover_curve_numbers": "Runoff curve numbers and impervious share by cover class",
    "green_ampt_texture_ranges": "Green-Ampt parameter ranges (about one standard deviation) "
                                 "by USDA soil texture",
}


class ShippedTable(NamedTuple):
    """One shipped table, as published (not converted)."""

    name: str
    title: str
    source_lines: list[str]
    frame: pd.DataFrame


def read_shipped_table(name: str) -> ShippedTable:
    """Read a shipped table as published, with its comment lines.

    Parameters
    ----------
    name : str
        File stem in ``gisrun/parameters/data/`` (``"green_ampt_texture"``).

    Returns
    -------
    ShippedTable
        ``source_lines`` are the leading ``#`` lines without the ``#``.
    """
    text = _read_text(name)
    lines = text.splitlines()
    n_comment = next(i for i, line in enumerate(lines) if not line.startswith("#"))
    comments = [line.lstrip("#").strip() for line in lines[:n_comment]]
    frame = pd.read_csv(io.StringIO("\n".join(lines[n_comment:])), keep_default_na=True)
    titles = [c.removeprefix("title:").strip() for c in comments if c.startswith("title:")]
    return ShippedTable(name, _TITLES.get(name) or (titles[0] if titles else name), comments,
                        frame)


def list_tables() -> list[ShippedTable]:
    """Every shipped table with its title, source lines and published values.

    Returns
    -------
    list of ShippedTable
        ``(name, title, source_lines, frame)`` tuples, for ``gisrun tables``.

    Examples
    --------
    >>> [t.name for t in list_tables()][:2]
    ['green_ampt_texture', 'hsg_conductivity']
    """
    data = resources.files("gisrun.parameters").joinpath("data")
    others = sorted(f.name.removesuffix(".csv") for f in data.iterdir()
                    if f.name.endswith(".csv") and f.name.removesuffix(".csv") not in _TITLES)
    return [read_shipped_table(name) for name in (*_TITLES, *others)]


@cache
def _read_text(name: str) -> str:
    return resources.files("gisrun.parameters").joinpath("data", f"{name}.csv").read_text("utf-8")


@cache
def _green_ampt() -> pd.DataFrame:
    raw = read_shipped_table("green_ampt_texture").frame.set_index("texture")
    return pd.DataFrame(
        {
            "total_porosity": raw["total_porosity"].astype(float),
            "effective_porosity": raw["effective_porosity"].astype(float),
            "suction_head_m": to_si(raw["suction_head_cm"].to_numpy(), "cm"),
            "ks_m_per_s": to_si(raw["ks_cm_per_h"].to_numpy(), "cm_per_h"),
            "hydrologic_soil_group": raw["hydrologic_soil_group"],
        },
        index=raw.index,
    )


def green_ampt_by_texture() -> pd.DataFrame:
    """Green-Ampt parameters in SI, indexed by texture (Rawls et al. 1983).

    Returns
    -------
    DataFrame
        ``total_porosity``, ``effective_porosity`` (-), ``suction_head_m`` (m),
        ``ks_m_per_s`` (m/s), ``hydrologic_soil_group`` (TR-55 1986 App. A).
    """
    return _green_ampt().copy()


@cache
def _hsg() -> pd.DataFrame:
    raw = read_shipped_table("hsg_conductivity").frame.set_index("hydrologic_soil_group")
    out = pd.DataFrame(index=raw.index)
    for col in raw.columns:
        if col.startswith("ksat_"):
            out[col.replace("um_per_s", "m_per_s")] = to_si(raw[col].to_numpy(), "um_per_s")
        else:
            out[col.replace("in_per_h", "m_per_s")] = to_si(raw[col].to_numpy(), "in_per_h")
    out["min_infiltration_mid_m_per_s"] = 0.5 * (
        out["min_infiltration_low_m_per_s"] + out["min_infiltration_high_m_per_s"]
    )
    return out


def hsg_conductivity() -> pd.DataFrame:
    """Conductivity class limits and minimum infiltration by group, in m/s.

    Returns
    -------
    DataFrame
        Indexed by group ``A``-``D``; ``ksat_*_m_per_s`` class limits (NaN = no
        limit; NEH 630 Ch. 7, 2009, Table 7-1), ``min_infiltration_low_m_per_s``,
        ``min_infiltration_high_m_per_s`` and their midpoint
        ``min_infiltration_mid_m_per_s`` (TR-55 1986, App. A).
    """
    return _hsg().copy()


@cache
def _horton() -> pd.DataFrame:
    raw = read_shipped_table("horton_hsg").frame.set_index("hydrologic_soil_group")
    return pd.DataFrame(
        {
            "horton_f0_m_per_s": to_si(raw["f0_in_per_h"].to_numpy(), "in_per_h"),
            "horton_fc_m_per_s": to_si(raw["fc_in_per_h"].to_numpy(), "in_per_h"),
            "horton_decay_per_s": raw["decay_per_h"].to_numpy(float) / 3600.0,
            "horton_recovery_per_s": raw["recovery_per_h"].to_numpy(float) / 3600.0,
        },
        index=raw.index,
    )


def horton_by_group() -> pd.DataFrame:
    """Horton parameters in SI (m/s, 1/s), indexed by hydrologic soil group."""
    return _horton().copy()


@cache
def _defaults() -> pd.DataFrame:
    raw = read_shipped_table("hsg_defaults").frame.set_index("hydrologic_soil_group")
    return pd.DataFrame(
        {
            "representative_texture": raw["representative_texture"],
            "initial_soil_loss_m": to_si(raw["initial_soil_loss_mm"].to_numpy(), "mm"),
        },
        index=raw.index,
    )


def group_defaults() -> pd.DataFrame:
    """Return the representative texture and initial soil loss (m) by group (common practice)."""
    return _defaults().copy()


@cache
def _cover() -> pd.DataFrame:
    raw = read_shipped_table("cover_curve_numbers").frame.set_index("cover_class")
    out = pd.DataFrame(index=raw.index)
    out["description"] = raw["description"]
    out["tr55_table"] = raw["tr55_table"]
    out["impervious_fraction"] = raw["impervious_percent"].astype(float) / 100.0
    for group in HYDROLOGIC_SOIL_GROUPS:
        out[f"cn_{group}"] = raw[f"cn_{group.lower()}"].astype(float)
        out[f"pervious_cn_{group}"] = raw[f"pervious_cn_{group.lower()}"].astype(float)
    out["pervious_depression_storage_m"] = to_si(
        raw["pervious_depression_storage_mm"].to_numpy(float), "mm"
    )
    return out


def cover_table() -> pd.DataFrame:
    """Cover classes in SI, indexed by ``cover_class`` (TR-55 1986, Tables 2-2a-c).

    Returns
    -------
    DataFrame
        ``description``, ``tr55_table`` (table number in TR-55 1986, or
        ``none``), ``impervious_fraction`` (0-1), ``cn_A``..``cn_D`` (table CN),
        ``pervious_cn_A``..``pervious_cn_D`` (CN of the pervious part, NaN if
        none) and ``pervious_depression_storage_m`` (m, common practice).
    """
    return _cover().copy()



@cache
def _green_ampt_ranges() -> pd.DataFrame:
    raw = read_shipped_table("green_ampt_texture_ranges").frame.set_index("texture")
    out = pd.DataFrame(index=raw.index)
    for end in ("low", "high"):
        out[f"effective_porosity_{end}"] = raw[f"effective_porosity_{end}"].astype(float)
        out[f"suction_head_m_{end}"] = to_si(raw[f"suction_head_cm_{end}"].to_numpy(), "cm")
    return out


def green_ampt_ranges_by_texture() -> pd.DataFrame:
    """Published ranges (about one standard deviation) of Green-Ampt parameters, SI.

    Returns
    -------
    DataFrame
        Indexed by texture: ``effective_porosity_low``/``_high`` (-) and
        ``suction_head_m_low``/``_high`` (m), Rawls, Brakensiek and Miller (1983).
    """
    return _green_ampt_ranges().copy()
