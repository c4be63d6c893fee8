"""From sample figures to bands: percentiles, ponding probability, first-to-pond stability.

Percentiles of runoff depth are linear interpolations between samples
(:func:`numpy.percentile`); runoff volume is depth x modelled area, so its
percentiles are the depth's times the area. Time to ponding takes the sample
value at each percentile (``method="inverted_cdf"``): a subcatchment that does
not pond in a sample counts as ponding never (later than any time), and a
percentile that falls among those is empty (NaN). The probability of ponding is
the share of samples in which any pervious part of the subcatchment ponds.

First-to-pond stability: in each sample the subcatchments are ordered by time to
ponding (earliest first, those that never pond left out, ties by layer order)
and the first ``k`` kept; each subcatchment's share of samples in which it is
among them says how firm its place in the run's ponding-first list is.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from numpy.typing import NDArray

__all__ = ["band_table", "percentile_label", "first_k", "merge_first_k", "first_k_share"]

FloatArray = NDArray[np.float64]


def percentile_label(q: float) -> str:
    """``10`` -> ``"p10"``, ``2.5`` -> ``"p2_5"`` (a column-safe name)."""
    return "p" + f"{q:g}".replace(".", "_")


def band_table(sub_ids: NDArray[np.object_], area_m2: FloatArray, depth_m: FloatArray,
               ponding_s: FloatArray, percentiles: Sequence[float]) -> pd.DataFrame:
    """Per subcatchment: percentiles of depth, volume and time to ponding; ponding probability.

    Parameters
    ----------
    sub_ids : ndarray
        Subcatchment ids (columns of the sample arrays).
    area_m2 : ndarray
        Modelled area of each subcatchment, m2.
    depth_m, ponding_s : ndarray, shape (samples, subcatchments)
        Runoff depth (m) and time to ponding (s, NaN = does not pond) of each sample.
    percentiles : sequence of float
        In (0, 100), ascending.

    Returns
    -------
    DataFrame
        ``subcatchment_id``, ``runoff_depth_<p>_m``, ``runoff_volume_<p>_m3``,
        ``time_to_ponding_<p>_s`` per percentile, ``runoff_depth_band_m`` (highest
        minus lowest percentile), ``ponding_probability`` and ``samples``.
    """
    q = np.asarray(percentiles, dtype=np.float64)
    depth = np.percentile(depth_m, q, axis=0)
    never = np.where(np.isnan(ponding_s), np.inf, ponding_s)
    ponding = np.percentile(never, q, axis=0, method="inverted_cdf")
    ponding[np.isinf(ponding)] = np.nan
    out = {"subcatchment_id": sub_ids}
    for i, p in enumerate(q):
        out[f"runoff_depth_{percentile_label(p)}_m"] = depth[i]
    for i, p in enumerate(q):
        out[f"runoff_volume_{percentile_label(p)}_m3"] = depth[i] * area_m2
    for i, p in enumerate(q):
        out[f"time_to_ponding_{percentile_label(p)}_s"] = ponding[i]
    frame = pd.DataFrame(out)
    frame["runoff_depth_band_m"] = depth[-1] - depth[0]
    frame["ponding_probability"] = np.isfinite(ponding_s).mean(axis=0)
    frame["samples"] = depth_m.shape[0]
    return frame


def first_k(ponding_s: FloatArray, positions: NDArray[np.intp], k: int
            ) -> tuple[FloatArray, NDArray[np.intp]]:
    """Each sample's ``k`` earliest ponding times and their layer positions (a chunk's part).

    Returns arrays of shape (samples, k), padded with ``inf`` and ``-1`` where fewer
    than ``k`` subcatchments pond.
    """
    n_samples = ponding_s.shape[0]
    times = np.where(np.isnan(ponding_s), np.inf, ponding_s)
    pos = np.broadcast_to(np.asarray(positions, dtype=np.intp), times.shape)
    return _keep_first(times, pos, k, n_samples)


def merge_first_k(parts: Sequence[tuple[FloatArray, NDArray[np.intp]]], k: int
                  ) -> tuple[FloatArray, NDArray[np.intp]]:
    """The ``k`` earliest of several chunks' :func:`first_k` (same samples)."""
    times = np.concatenate([t for t, _ in parts], axis=1)
    pos = np.concatenate([p for _, p in parts], axis=1)
    return _keep_first(times, pos, k, times.shape[0])


def _keep_first(times: FloatArray, pos: NDArray[np.intp], k: int, n_samples: int
                ) -> tuple[FloatArray, NDArray[np.intp]]:
    out_t = np.full((n_samples, k), np.inf)
    out_p = np.full((n_samples, k), -1, dtype=np.intp)
    for s in range(n_samples):
        order = np.lexsort((pos[s], times[s]))[:k]  # by time, then layer position
        order = order[np.isfinite(times[s][order])]
        out_t[s, :order.size], out_p[s, :order.size] = times[s][order], pos[s][order]
    return out_t, out_p


def first_k_share(first_positions: NDArray[np.intp], n_subcatchments: int) -> FloatArray:
    """Share of samples in which each subcatchment (by layer position) is among the first k."""
    n_samples = first_positions.shape[0]
    counts = np.bincount(first_positions[first_positions >= 0], minlength=n_subcatchments)
    return counts / max(n_samples, 1)
