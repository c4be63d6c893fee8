"""Compiled kernel of :mod:`gisrun.units`: rounding to significant digits in one pass.

Every value written is rounded (:func:`gisrun.units.round_significant`); a large run writes
hundreds of millions of them per storm. Done with whole-array numpy calls it took eight passes
and as many temporaries (absolute value, logarithm, floor, shift, power look-up, multiply,
round, divide). :func:`round_to_digits` does the same arithmetic value by value: the decimal
exponent ``floor(log10(|v|))`` read from the binary exponent and one comparison with a power of
ten (the logarithm itself only within 1e-9 of a power of ten, where the comparison could
disagree with it), the same table of powers of ten, round half to even, no fused
multiply-add; its results are the numpy computation's to the last bit
(``tests/test_units_kernels.py``).
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

__all__ = ["round_to_digits", "DECIMAL_EXPONENT_FLOOR", "POWERS_AROUND"]

#: floor(e * log10(2)) for binary exponents e = -1023 ... 1023 (index e + 1023): the decimal
#: exponent of 2 ** e; a value in [2 ** e, 2 ** (e + 1)) has this one or the next.
DECIMAL_EXPONENT_FLOOR = np.floor(np.arange(-1023, 1024) * np.log10(2.0)).astype(np.int64)
#: Offset of 10 ** 0 in :data:`POWERS_AROUND`.
_ZERO = 340
with np.errstate(over="ignore"):
    #: 10.0 ** k for k = -340 ... 340 (index k + 340; inf above 1e308).
    POWERS_AROUND = 10.0 ** np.arange(-_ZERO, _ZERO + 1, dtype=np.float64)
#: Relative distance from a power of ten within which the logarithm decides the exponent.
_NEAR = 1e-9


@numba.njit(cache=True, nogil=True)
def _decimal_exponent(a: float, bits: int, floors: NDArray[np.int64],
                      powers: NDArray[np.float64]) -> int:
    """``floor(log10(a))`` for a finite ``a`` > 0 whose bits are ``bits``."""
    e2 = ((bits >> 52) & 0x7FF) - 1023
    if e2 == -1023:  # subnormal
        return np.int64(np.floor(np.log10(a)))
    k = floors[e2 + 1023]
    above, at = powers[k + 1 + _ZERO], powers[k + _ZERO]
    if a >= above * (1.0 + _NEAR):
        return k + 1
    if a > above * (1.0 - _NEAR) or a < at * (1.0 + _NEAR):
        return np.int64(np.floor(np.log10(a)))  # next to a power of ten: the formula itself
    return k


@numba.njit(cache=True, nogil=True)
def round_to_digits(x: NDArray[np.float64], digits: int, powers: NDArray[np.float64],
                    floors: NDArray[np.int64], around: NDArray[np.float64]
                    ) -> NDArray[np.float64]:
    """``x`` (1-D) rounded to ``digits`` significant digits; NaN, inf and 0 as they are.

    ``powers[k]`` is ``10.0 ** k`` (k = 0 ... at least 330 + ``digits``): a value is
    multiplied by ``10 ** shift`` (or divided by ``10 ** -shift``), rounded to a whole
    number, half to even, and scaled back, where ``shift = digits - 1 - floor(log10(|v|))``.
    ``floors`` and ``around`` are :data:`DECIMAL_EXPONENT_FLOOR` and :data:`POWERS_AROUND`.
    """
    out = np.empty_like(x)
    bits = x.view(np.int64)
    for i in range(x.size):
        v = x[i]
        if v == 0.0 or not np.isfinite(v):
            out[i] = v
            continue
        shift = (digits - 1) - _decimal_exponent(np.abs(v), bits[i], floors, around)
        if shift >= 0:
            scale = powers[shift]
            out[i] = np.rint(v * scale) / scale
        else:
            scale = powers[-shift]
            out[i] = np.rint(v / scale) * scale
    return out
