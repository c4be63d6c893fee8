"""Soil and cover labels: check them and resolve soils to a group and a texture.

References
----------
.. [1] USDA NRCS (2009). National Engineering Handbook Part 630, Ch. 7,
   Hydrologic Soil Groups (dual groups A/D, B/D, C/D).
.. [2] USDA SCS (1986). TR-55, Appendix A (hydrologic soil group by texture).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass

from ..errors import GisrunWarning, ParameterError
from ..options import did_you_mean
from .tables import (
    DUAL_GROUPS,
    HYDROLOGIC_SOIL_GROUPS,
    NON_INFILTRATING_SOILS,
    TEXTURE_CLASSES,
    UNSPECIFIED_COVER,
    cover_table,
    green_ampt_by_texture,
    group_defaults,
)

__all__ = ["CLASSIFICATIONS", "SoilClassification", "SoilInfo", "valid_soil_labels",
           "check_soil_labels", "check_cover_labels", "resolve_soils"]

_SILT_SURROGATE = "silt loam"


@dataclass(frozen=True)
class SoilInfo:
    """What a soil label means: group and texture for its pervious parts."""

    infiltrates: bool
    group: str | None
    group_source: str
    texture: str | None
    green_ampt_source: str


@dataclass(frozen=True)
class SoilClassification:
    """What the soil labels of one ``[soil] classification`` are and how each resolves.

    Attributes
    ----------
    labels : tuple of str
        The labels that infiltrate, in table order (``water`` and ``rock`` are
        valid in every classification and take no water).
    resolve : callable
        ``resolve(label, dual_group_condition, warnings) -> SoilInfo``.
    """

    labels: tuple[str, ...]
    resolve: Callable[[str, str, list[GisrunWarning]], SoilInfo]


def valid_soil_labels(classification: str) -> list[str]:
    """Soil labels allowed for a classification, in table order."""
    return [*CLASSIFICATIONS[classification].labels, *NON_INFILTRATING_SOILS]


def check_soil_labels(labels: Iterable[str], classification: str, where: str) -> None:
    """Raise :class:`ParameterError` naming the first label that is not valid."""
    valid = valid_soil_labels(classification)
    for label in labels:
        if label not in valid:
            _unknown(where, label, valid, "soil class",
                     "map the raster code to a valid label in [soil.codes]")


def check_cover_labels(labels: Iterable[str], where: str) -> None:
    """Raise :class:`ParameterError` naming the first unknown cover class."""
    valid = [*cover_table().index, UNSPECIFIED_COVER]
    for label in labels:
        if label not in valid:
            _unknown(where, label, valid, "cover class",
                     "map the raster code to a shipped cover class in [cover.codes]")


def _unknown(where: str, label: str, valid: list[str], kind: str, todo: str) -> None:
    near = did_you_mean(label, valid)
    hint = f"{near} " if near.startswith("did") else ""
    raise ParameterError(where, f"unknown {kind} {label!r}",
                         f"{hint}{todo}; valid: {', '.join(valid)}")


def resolve_soils(labels: Iterable[str], classification: str, dual_condition: str,
                  warnings: list[GisrunWarning]) -> dict[str, SoilInfo]:
    """Map each soil label to a :class:`SoilInfo`.

    Raises
    ------
    ParameterError
        For a label that is not valid for the classification.
    """
    labels = list(labels)
    check_soil_labels(labels, classification, "unit table: soil_class")
    out: dict[str, SoilInfo] = {}
    for label in labels:
        if label in NON_INFILTRATING_SOILS:
            out[label] = SoilInfo(False, None, f"{label}: takes no water", None, "")
        else:
            out[label] = CLASSIFICATIONS[classification].resolve(label, dual_condition, warnings)
    return out


def _texture_soil(label: str, dual_condition: str, warnings: list[GisrunWarning]
                  ) -> SoilInfo:
    texture = label
    if label == "silt":
        texture = _SILT_SURROGATE
        warnings.append(GisrunWarning(
            "soil class 'silt': Rawls et al. (1983) give no Green-Ampt values for silt; "
            "silt loam values are used (override them in the parameter CSV if you have better)"))
    group = green_ampt_by_texture().at[texture, "hydrologic_soil_group"]
    return SoilInfo(
        True, group, f"texture {texture} -> group {group}, TR-55 (1986) App. A", texture,
        f"Rawls et al. (1983) / Chow et al. (1988) Table 4.3.1, {texture}")


def _group_soil(label: str, dual_condition: str, warnings: list[GisrunWarning]
                ) -> SoilInfo:
    group, source = label, f"soil class {label}"
    if label in DUAL_GROUPS:
        group = label[0] if dual_condition == "drained" else "D"
        source = f"dual group {label}, {dual_condition} -> {group} (NRCS NEH 630 Ch. 7, 2009)"
    texture = group_defaults().at[group, "representative_texture"]
    return SoilInfo(
        True, group, source, texture,
        f"Rawls et al. (1983) / Chow et al. (1988) Table 4.3.1, {texture}, representative"
        f" texture of group {group} (gisrun default, common practice)")


#: Soil classification (``[soil] classification``) -> its labels and how they resolve.
#: A new classification is a new entry here (and its table in ``data/``).
CLASSIFICATIONS: dict[str, SoilClassification] = {
    "hydrologic_soil_group": SoilClassification(
        (*HYDROLOGIC_SOIL_GROUPS, *DUAL_GROUPS), _group_soil),
    "texture": SoilClassification(TEXTURE_CLASSES, _texture_soil),
}
