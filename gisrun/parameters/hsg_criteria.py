"""Hydrologic soil group from measured soil properties (NRCS NEH Part 630, Ch. 7, 2009).

When a soil's group is not given, it follows from three properties of the
soil profile: the saturated hydraulic conductivity (Ksat) of its least
transmissive layer, the depth to a water-impermeable layer and the depth to a
high water table.

Criteria (Table 7-1 of [1]_):

- depth to a water-impermeable layer under 50 cm, or a high water table under
  60 cm: group D (but see dual groups);
- impermeable layer at 50-100 cm, or water table at 60-100 cm: Ksat of the least
  transmissive layer above 40 um/s -> A, above 10 up to 40 -> B, above 1 up to
  10 -> C, 1 or less -> D;
- impermeable layer and water table both deeper than 100 cm (or absent):
  Ksat above 10 um/s -> A, above 4 up to 10 -> B, above 0.4 up to 4 -> C,
  0.4 or less -> D;
- dual groups: a soil in D only because its water table lies within 60 cm,
  which could be drained, gets A/D, B/D or C/D, the first letter from its Ksat
  as drained (the thresholds of the row its impermeable-layer depth falls in);
  one whose drained group would be D stays D.

Limits are inclusive on the side the table gives ("greater than 40", "less than
or equal to 40 and greater than 10"); a depth of exactly 50 cm (impermeable
layer) or 60 cm (water table) is in the 50-100 / 60-100 row, exactly 100 cm
too; above 100 cm is the deeper row.

Source of the figures: NEH Part 630 Chapter 7 (January 2009), Table 7-1 (page
7-3 as recalled), from memory. A public copy of the chapter was found
(studylib.net document 8433259) but only its front matter could be read, not
the table page; the thresholds agree with an independent public implementation
of the criteria (a soil-database query that computes the group from the same
three properties), which is not a publication and not cited as one.

References
----------
.. [1] USDA NRCS (2009). National Engineering Handbook Part 630 Hydrology,
   Chapter 7, Hydrologic Soil Groups, Table 7-1.

Examples
--------
>>> um = 1e-6
>>> group_from_properties([50 * um, 20 * um, 5 * um], [0.8, 2.0, 2.0],
...                       [float("nan"), float("nan"), 0.3]).tolist()
['A', 'A', 'B/D']
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["SHALLOW_LIMITS_UM_PER_S", "DEEP_LIMITS_UM_PER_S", "IMPERMEABLE_D_BELOW_M",
           "WATER_TABLE_D_BELOW_M", "DEEP_BELOW_M", "CRITERIA_SOURCE", "group_from_properties"]

#: Ksat lower limits (exclusive) of groups A, B, C, micrometres per second, when a
#: water-impermeable layer lies at 50-100 cm or a water table at 60-100 cm (NEH 630
#: Ch. 7, 2009, Table 7-1; from memory).
SHALLOW_LIMITS_UM_PER_S: tuple[float, float, float] = (40.0, 10.0, 1.0)
#: The same when both lie deeper than 100 cm (NEH 630 Ch. 7, 2009, Table 7-1; from memory).
DEEP_LIMITS_UM_PER_S: tuple[float, float, float] = (10.0, 4.0, 0.4)
#: A water-impermeable layer shallower than this makes the soil D (m).
IMPERMEABLE_D_BELOW_M = 0.50
#: A high water table shallower than this makes the soil D, or dual when drainable (m).
WATER_TABLE_D_BELOW_M = 0.60
#: Deeper than this, the impermeable layer or water table no longer restricts (m).
DEEP_BELOW_M = 1.00
#: What a derived group cites.
CRITERIA_SOURCE = "NRCS NEH 630 Ch. 7 (2009) Table 7-1 criteria"

_GROUPS = np.array(["A", "B", "C", "D"], dtype=object)


def _group_by_ksat(ksat_um: NDArray[np.float64], shallow: NDArray[np.bool_]) -> NDArray[np.object_]:
    """A-D from Ksat (um/s), with the 50-100 cm row where ``shallow`` and the deep row elsewhere."""
    limits = np.where(shallow[:, None], np.array(SHALLOW_LIMITS_UM_PER_S)[None, :],
                      np.array(DEEP_LIMITS_UM_PER_S)[None, :])
    # the number of limits the value does not exceed: 0 -> A ... 3 -> D
    index = np.sum(ksat_um[:, None] <= limits, axis=1)
    return _GROUPS[index]


def group_from_properties(ksat_m_per_s: ArrayLike, impermeable_depth_m: ArrayLike,
                          water_table_depth_m: ArrayLike) -> NDArray[np.object_]:
    """Hydrologic soil group of each soil from its profile (Table 7-1 of NEH 630 Ch. 7).

    Parameters
    ----------
    ksat_m_per_s : array_like
        Saturated hydraulic conductivity of the least transmissive layer, m/s
        (NaN: unknown).
    impermeable_depth_m : array_like
        Depth to a water-impermeable layer, m (NaN: none within the profile).
    water_table_depth_m : array_like
        Depth to the high water table, m (NaN: none within the profile).

    Returns
    -------
    ndarray of str or None
        ``"A"`` ... ``"D"``, ``"A/D"``, ``"B/D"``, ``"C/D"``; None where the
        group needs a Ksat that is unknown.
    """
    ksat_um = np.atleast_1d(np.asarray(ksat_m_per_s, dtype=np.float64)) / 1e-6
    imp = np.atleast_1d(np.asarray(impermeable_depth_m, dtype=np.float64))
    table = np.atleast_1d(np.asarray(water_table_depth_m, dtype=np.float64))
    ksat_um, imp, table = np.broadcast_arrays(ksat_um, imp, table)
    imp = np.where(np.isnan(imp), np.inf, imp)
    table = np.where(np.isnan(table), np.inf, table)
    shallow = (imp <= DEEP_BELOW_M) | (table <= DEEP_BELOW_M)
    undrained = _group_by_ksat(ksat_um, shallow)
    drained = _group_by_ksat(ksat_um, imp <= DEEP_BELOW_M)
    dual = np.where(drained == "D", "D", drained.astype(str) + "/D").astype(object)
    out = np.where(table < WATER_TABLE_D_BELOW_M, dual, undrained)
    out = np.where(imp < IMPERMEABLE_D_BELOW_M, "D", out).astype(object)
    needs_ksat = ~(imp < IMPERMEABLE_D_BELOW_M)
    out[needs_ksat & np.isnan(ksat_um)] = None
    return out
