"""Run-on: runoff of disconnected impervious area spread onto pervious ground, step by step.

Part of a unit's impervious area may drain onto pervious ground instead of into
the drains (roofs to lawns). The unit parameter frame says how much per
impervious part (``disconnected_fraction``, 0-1, of the part's area). In every
time step that share of the part's runoff depth ``e_d`` leaves it as a volume
``s_d e_d A_d`` and is added to the rain input of the receiving pervious parts,
as a depth scaled by area (``s_d e_d A_d / A_p``), where it infiltrates by the
receiving part's own loss method:

- ``runon_to = "unit"``: the pervious part of the same subcatchment x soil x
  cover unit;
- ``runon_to = "subcatchment"``: every pervious part of the subcatchment, the
  same depth on each (volume shared by area).

Two passes: every part runs on its rain (so the donors' runoff is known and a
part that receives nothing gets exactly what :func:`~gisrun.engine.run_losses`
gives), then the receiving parts run again on rain plus run-on. Impervious parts
never receive, so one pass of donors suffices.

Bookkeeping (all SI, per part): ``rain_m`` is the rain on the part;
``runon_m`` the run-on it received; ``routed_m`` the depth it sent onto pervious
ground, taken out of its ``excess_m`` (what reaches the drains). Per part
``rain + runon = infiltration + excess + routed + storage``; per subcatchment
the run-on received equals the volume routed, so ``rain = infiltration +
runoff + storage`` holds there as without run-on.

Share 0 everywhere gives exactly the result of :func:`~gisrun.engine.run_losses`.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray

from .engine import LossResult, run_losses

__all__ = ["run_with_runon", "runon_matrix", "RUNON_COLUMN"]

#: The unit parameter column holding each impervious part's disconnected share.
RUNON_COLUMN = "disconnected_fraction"


def run_with_runon(params: pd.DataFrame, rain_m: ArrayLike, dt_s: float, *,
                   runon_to: str = "unit") -> LossResult:
    """Run every part; route the disconnected share of impervious runoff onto pervious parts.

    Parameters
    ----------
    params : DataFrame
        Unit parameters with ``subcatchment_id``, ``soil_class``, ``cover_class``,
        ``surface``, ``area_m2`` and ``disconnected_fraction`` (0-1; NaN or absent: 0).
    rain_m : array_like, shape (n_steps,) or (n_steps, n_units)
        Rain per step, m.
    dt_s : float
        Time step, s.
    runon_to : {"unit", "subcatchment"}
        Which pervious parts receive.

    Returns
    -------
    LossResult
        With ``runon_m`` and ``routed_m`` (steps x units) filled.

    Raises
    ------
    ValueError
        A part with a disconnected share has nothing to drain onto (the parameter step
        connects such parts before the run) or a share outside 0-1.
    """
    first = run_losses(params, rain_m, dt_s)
    share = _shares(params)
    donors = np.flatnonzero(share > 0)
    zeros = np.zeros(first.excess_m.shape)
    if donors.size == 0:
        return dataclasses.replace(first, runon_m=zeros, routed_m=zeros)
    routed = zeros.copy()
    routed[:, donors] = first.excess_m[:, donors] * share[donors]
    collect, spread = runon_matrix(params, runon_to)
    runon = np.asarray(spread @ (collect @ routed.T)).T
    receivers = np.flatnonzero(np.diff(spread.indptr) > 0)
    rain = np.broadcast_to(first.rain_m, first.excess_m.shape)
    second = run_losses(params.iloc[receivers], rain[:, receivers] + runon[:, receivers], dt_s)
    arrays = {name: np.array(getattr(first, name)) for name in
              ("infil_m", "excess_m", "capacity_m_per_s", "storage_m", "time_to_ponding_s")}
    for name, value in arrays.items():
        value[..., receivers] = getattr(second, name)
    arrays["excess_m"][:, donors] -= routed[:, donors]
    return dataclasses.replace(first, **arrays, runon_m=runon, routed_m=routed)


def _shares(params: pd.DataFrame) -> NDArray[np.float64]:
    if RUNON_COLUMN not in params.columns:
        return np.zeros(len(params))
    share = np.nan_to_num(params[RUNON_COLUMN].to_numpy(dtype=np.float64), nan=0.0)
    if np.any((share < 0) | (share > 1)):
        raise ValueError(f"{RUNON_COLUMN} outside 0-1")
    impervious = params["surface"].to_numpy() == "impervious"
    if np.any((share > 0) & ~impervious):
        raise ValueError(f"{RUNON_COLUMN} set on a part that is not impervious")
    return share


def runon_matrix(params: pd.DataFrame, runon_to: str) -> tuple[sp.csr_matrix, sp.csr_matrix]:
    """Two sparse maps: donors' routed depth -> volume per receiving group -> run-on depth.

    ``collect`` (groups x parts) holds each donor's area ``A_d``; ``spread``
    (parts x groups) holds ``1 / A`` for each receiving pervious part, where ``A``
    is its group's pervious area. A group is the donor's unit (``"unit"``) or its
    subcatchment (``"subcatchment"``). ``spread @ collect`` maps routed depths to
    run-on depths, and each donor's volume is received whole.

    Examples
    --------
    >>> frame = pd.DataFrame({"subcatchment_id": ["S", "S"], "soil_class": ["A", "A"],
    ...                       "cover_class": ["c", "c"], "surface": ["pervious", "impervious"],
    ...                       "area_m2": [300.0, 100.0], "disconnected_fraction": [0.0, 0.5]})
    >>> collect, spread = runon_matrix(frame, "unit")
    >>> (spread @ collect).toarray().round(4).tolist()
    [[0.0, 0.3333], [0.0, 0.0]]
    """
    if runon_to not in ("unit", "subcatchment"):
        raise ValueError(f"runon_to {runon_to!r}")
    share = _shares(params)
    area = params["area_m2"].to_numpy(dtype=np.float64)
    pervious = params["surface"].to_numpy() == "pervious"
    keys = ["subcatchment_id"] if runon_to == "subcatchment" else [
        "subcatchment_id", "soil_class", "cover_class"]
    group = params.groupby(keys, sort=False, observed=True).ngroup().to_numpy()
    n, n_groups = len(params), int(group.max(initial=-1)) + 1
    receiving = np.bincount(group, weights=np.where(pervious, area, 0.0), minlength=n_groups)
    donors = np.flatnonzero(share > 0)
    if np.any(receiving[group[donors]] <= 0):
        raise ValueError("a disconnected impervious part has no pervious ground to drain onto")
    collect = sp.csr_matrix((area[donors], (group[donors], donors)), shape=(n_groups, n))
    fed = np.zeros(n_groups, dtype=bool)
    fed[group[donors]] = True
    receivers = np.flatnonzero(pervious & fed[group])
    spread = sp.csr_matrix((1.0 / receiving[group[receivers]], (receivers, group[receivers])),
                           shape=(n, n_groups))
    return collect, spread
