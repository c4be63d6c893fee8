"""Latin hypercube samples, one stratified column per named draw, reproducible from a seed.

Each *draw* is one uncertain quantity of the run: a parameter of one soil texture,
of one hydrologic soil group, of one override row, or the antecedent runoff
condition (see :mod:`gisrun.uncertainty.ranges`). A Latin hypercube over ``d``
draws is ``d`` independent stratified columns: each column puts exactly one of the
``n`` samples in each of the ``n`` equal strata of (0, 1), in a random order of its
own. Here each column is made by :class:`scipy.stats.qmc.LatinHypercube` with
``d = 1``, seeded from the run's seed and the draw's name, so a draw gets the same
column in every chunk of the run and whatever other draws exist: chunks computed
apart (or on other machines) agree, and adding a soil class does not reshuffle
the others. The draws are independent (Rawls, Brakensiek and Miller 1983 tabulate
no correlation between the parameters of a texture).
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterable

import numpy as np
from numpy.typing import NDArray
from scipy.stats import qmc

__all__ = ["draw_columns", "draw_seed"]


def draw_seed(seed: int, name: str) -> np.random.SeedSequence:
    """The seed sequence of one named draw: the run's seed and a digest of the name."""
    digest = hashlib.sha256(name.encode("utf-8")).digest()
    words = [int.from_bytes(digest[i:i + 4], "little") for i in range(0, 16, 4)]
    return np.random.SeedSequence([int(seed) & 0xFFFFFFFF, *words])


def draw_columns(names: Iterable[str], n_samples: int, seed: int
                 ) -> dict[str, NDArray[np.float64]]:
    """One Latin hypercube column of ``n_samples`` uniform numbers in (0, 1) per draw name.

    Examples
    --------
    Every stratum of width 1/n holds exactly one sample:

    >>> u = draw_columns(["ks_m_per_s|texture loam"], 8, seed=1)["ks_m_per_s|texture loam"]
    >>> sorted((u * 8).astype(int).tolist())
    [0, 1, 2, 3, 4, 5, 6, 7]
    """
    out = {}
    for name in dict.fromkeys(names):
        rng = np.random.default_rng(draw_seed(seed, name))
        out[name] = qmc.LatinHypercube(d=1, rng=rng).random(n_samples)[:, 0]
    return out
