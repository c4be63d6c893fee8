"""Compiled kernels of :mod:`gisrun.aggregate`: a storm's step arrays read once.

A storm's per-unit step arrays (steps x units) are the largest arrays of a run. Summing them
into each subcatchment's series as sparse products (``weights @ excess_m.T``) copied each one
into unit-major order first, and the first step of runoff of every unit took two more passes
and a boolean array. :func:`series_and_first_steps` reads the three arrays once, in their
own (step-major) order, finds each unit's first step of runoff on the way, and adds in the
order the sparse product adds (each subcatchment's
units in ascending order, each product ``share * depth`` added to a sum starting at zero, no
fused multiply-add), so its sums are the product's to the last bit
(``tests/test_aggregate_kernels.py``).
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

__all__ = ["series_and_first_steps"]


@numba.njit(cache=True, nogil=True)
def series_and_first_steps(rain: NDArray[np.float64], infil: NDArray[np.float64],
                           excess: NDArray[np.float64], rows: NDArray[np.int64],
                           share: NDArray[np.float64], n_subs: int
                           ) -> tuple[NDArray[np.float64], NDArray[np.int64]]:
    """Area-weighted series per subcatchment, and each unit's first step of excess.

    Parameters
    ----------
    rain, infil, excess : ndarray, shape (steps, units)
        Depths per step, m (any strides: a rain shared by every unit may be a broadcast).
    rows : ndarray of int64, shape (units,)
        The subcatchment (0 ... ``n_subs`` - 1) of each unit.
    share : ndarray, shape (units,)
        Each unit's share of its subcatchment's area.
    n_subs : int
        Number of subcatchments.

    Returns
    -------
    series : ndarray, shape (3, n_subs, steps)
        Rain, infiltration and excess per subcatchment and step: ``sum(share * depth)``.
    first : ndarray of int64, shape (units,)
        Each unit's first step with excess above 0; -1 for none.
    """
    n_steps, n_units = excess.shape
    sums = np.zeros((3, n_steps, n_subs))  # step-major, as the input: writes stay close
    first = np.full(n_units, -1, dtype=np.int64)
    for t in range(n_steps):
        for u in range(n_units):
            s, w, e = rows[u], share[u], excess[t, u]
            sums[0, t, s] += w * rain[t, u]
            sums[1, t, s] += w * infil[t, u]
            sums[2, t, s] += w * e
            if e > 0.0 and first[u] < 0:
                first[u] = t
    series = np.empty((3, n_subs, n_steps))
    for k in range(3):
        for s in range(n_subs):
            for t in range(n_steps):
                series[k, s, t] = sums[k, t, s]
    return series, first
