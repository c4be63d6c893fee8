"""Rounding to significant digits, compiled, against the whole-array numpy computation it replaced.

The reference below is the numpy code gisrun used before the kernel (numpy's ``log10``,
``floor`` and ``round``, round half to even); the kernel must give its results to the last bit
(DEVELOPERS.md, "Compiled kernels (numba)"), including next to every power of ten, where
``floor(log10(|v|))`` decides the digit the rounding keeps.
"""

import numpy as np
import pytest

from gisrun.units import _POWERS_OF_TEN, round_significant
from gisrun.units_kernels import DECIMAL_EXPONENT_FLOOR, POWERS_AROUND, round_to_digits


def numpy_round_significant(values, digits=6):
    """The whole-array numpy computation (gisrun.units before the compiled kernel)."""
    x = np.array(values, dtype=np.float64)
    keep = np.isfinite(x) & (x != 0.0)
    if not keep.any():
        return x
    v = x[keep]
    shift = (digits - 1) - np.floor(np.log10(np.abs(v))).astype(np.int64)
    up = shift >= 0
    with np.errstate(over="ignore", invalid="ignore"):
        scale = _POWERS_OF_TEN.take(np.abs(shift))
        x[keep] = np.where(up, np.round(v * scale) / scale, np.round(v / scale) * scale)
    return x


def _same_bits(a, b):
    return np.array_equal(np.asarray(a).view(np.int64), np.asarray(b).view(np.int64))


@pytest.mark.parametrize("digits", [1, 3, 6, 9, 15])
def test_random_values_round_as_numpy_does(digits):
    rng = np.random.default_rng(digits)
    x = np.exp(rng.normal(0.0, 12.0, 200_000)) * rng.choice([-1.0, 1.0], 200_000)
    x[::97] = 0.0
    x[::101] = np.nan
    x[::103] = -0.0
    x[::107] = np.inf
    assert _same_bits(round_significant(x, digits), numpy_round_significant(x, digits))


def test_next_to_powers_of_ten_and_halves():
    p = 10.0 ** np.arange(-300, 300)
    below = [np.nextafter(p, 0.0)]
    for _ in range(4):
        below.append(np.nextafter(below[-1], 0.0))
    halves = np.arange(1, 200_000) * 0.5 * 10.0 ** -5  # exact ties at the 6th digit, and not
    # the kernel reads the exponent from the bits: powers of two, their neighbours, subnormals
    two = 2.0 ** np.arange(-1074, 1024)
    bits = [two, np.nextafter(two, 0.0), np.nextafter(two, np.inf), 5e-324 * np.arange(1, 999)]
    x = np.concatenate([p, *below, np.nextafter(p, np.inf), p * (1 - 5e-7), p * (1 + 1e-9),
                        p * (1 - 1e-9), -p, halves, *bits, [123456.5, 1234565.0, 0.1234565]])
    x = x[np.isfinite(x)]
    assert _same_bits(round_significant(x), numpy_round_significant(x))


def test_kernel_is_the_public_function_and_keeps_shape():
    x = np.linspace(-3.0, 7.0, 24).reshape(2, 3, 4) / 7.0
    out = round_significant(x)
    assert out.shape == (2, 3, 4)
    assert _same_bits(out.ravel(), round_to_digits(x.ravel(), 6, _POWERS_OF_TEN,
                                                    DECIMAL_EXPONENT_FLOOR, POWERS_AROUND))
    assert round_significant([2.5e-7, 0.19999999999999998])[1] == 0.2
    assert round_significant(1234565.0, 6) == 1234560.0  # a tie: half to even (numpy.round)
