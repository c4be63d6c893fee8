"""Compiled kernel of :mod:`gisrun.units`: rounding to significant digits in one pass.

Every value written is rounded (:func:`gisrun.units.round_significant`); a large run writes
hundreds of millions of them per storm. Done with whole-array numpy calls it took eight passes
and as many temporaries (absolute value, logarithm, floor, shift, power look-up, multiply,
round, divide); :func:`round_to_digits` does the same arithmetic value by value (the same
``floor(log10(|v|))``, the same table of powers of ten, round half to even, no fused
multiply-add), so its results are the numpy computation's to the last bit
(``tests/test_units_kernels.py``).
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

__all__ = ["round_to_digits"]


@numba.njit(cache=True, nogil=True)
def round_to_digits(x: NDArray[np.float64], digits: int, powers: NDArray[np.float64]
                    ) -> NDArray[np.float64]:
    """``x`` (1-D) rounded to ``digits`` significant digits; NaN, inf and 0 as they are.

    ``powers[k]`` is ``10.0 ** k`` (k = 0 ... at least 330 + ``digits``): a value is
    multiplied by ``10 ** shift`` (or divided by ``10 ** -shift``), rounded to a whole
    number, half to even, and scaled back, where ``shift = digits - 1 - floor(log10(|v|))``.
    """
    out = np.empty_like(x)
    for i in range(x.size):
        v = x[i]
        if v == 0.0 or not np.isfinite(v):
            out[i] = v
            continue
        shift = (digits - 1) - np.int64(np.floor(np.log10(np.abs(v))))
        if shift >= 0:
            scale = powers[shift]
            out[i] = np.rint(v * scale) / scale
        else:
            scale = powers[-shift]
            out[i] = np.rint(v / scale) * scale
    return out
