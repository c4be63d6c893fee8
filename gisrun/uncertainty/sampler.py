"""Latin hypercube samples, one stratified column per named draw, reproducible from a seed.

Each *draw* is one uncertain quantity of the run: a parameter of one soil texture,
of one hydrologic soil group, of one override row, or the antecedent runoff
condition (see :mod:`gisrun.uncertainty.ranges`). A Latin hypercube over ``d``
draws is ``d`` independent stratified columns: each column puts exactly one of the
``n`` samples in each of the ``n`` equal strata of (0, 1), in a random order of its
own (McKay, Beckman and Conover 1979). Each column is seeded from the run's seed and
the draw's name, so a draw gets the same column in every chunk of the run and whatever
other draws exist: chunks computed apart (or on other machines) agree, and adding a soil
class does not reshuffle the others. The draws are independent (Rawls, Brakensiek and
Miller 1983 tabulate no correlation between the parameters of a texture).

A column is made here with numpy (:func:`latin_hypercube_column`) the way
``scipy.stats.qmc.LatinHypercube(d=1, rng=...)`` makes it (scipy >= 1.15: scrambled,
strength 1, no optimisation), number for number; the tests compare the two. Importing
``scipy.stats`` for it cost every command line about a second.
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterable

import numpy as np
from numpy.typing import NDArray

__all__ = ["draw_columns", "draw_seed", "latin_hypercube_column"]


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
        out[name] = latin_hypercube_column(draw_seed(seed, name), n_samples)
    return out


def latin_hypercube_column(seed: np.random.SeedSequence, n_samples: int
                           ) -> NDArray[np.float64]:
    """``n_samples`` numbers in (0, 1), one in each stratum ``[k/n, (k+1)/n)``, in random order.

    As scipy's ``qmc.LatinHypercube(d=1, rng=np.random.default_rng(seed)).random(n)[:, 0]``
    makes them: the generator's first child seed sequence draws ``n`` uniforms ``u``, then
    shuffles ``1..n`` into ``p``; sample ``i`` is ``(p_i - u_i) / n``.
    """
    child = np.random.Generator(np.random.PCG64(seed.spawn(1)[0]))
    u = child.uniform(size=n_samples)
    strata = np.arange(1, n_samples + 1)
    child.shuffle(strata)
    return (strata - u) / n_samples
