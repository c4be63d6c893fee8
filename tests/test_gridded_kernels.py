"""The rain-grid kernels against the numpy/scipy computation they replace, to the bit.

Reference (the plain computation of :func:`gisrun.storm.areal.weighted_mean`, as the areal rain
was made before the kernels): gather the used cells, take each step's minimum with numpy,
subtract it, multiply by the weights with scipy's CSR product, add the minimum back. The
kernels (:mod:`gisrun.storm.mix_kernels`, :mod:`gisrun.storm.gridded_kernels`) must give the
same float64 values bit for bit (``np.array_equal``), whatever the block size, the rows asked
for and their order, the order of the cells; and stop on the same value with the same message
for nodata and negative rain.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pytest
from scipy import sparse

from gisrun.errors import StormError
from gisrun.grid.rain_weights import RainGridWeights
from gisrun.storm import weighted_mean
from gisrun.storm.gridded import grid_areal_depth, grid_rain_mix
from gisrun.storm.gridded_kernels import BLOCK_NEGATIVE, BLOCK_NODATA, BLOCK_OK, scan_block
from gisrun.storm.mix_kernels import gather_block

HEIGHT, WIDTH = 30, 40


@dataclass(frozen=True)
class StackInMemory:
    """A rain stack held in memory (depth per step in m, ``(steps, height, width)``)."""

    values: np.ndarray
    where: str = "memory.nc:rain"
    step_s: float = 300.0
    crs: object = None
    transform: object = None

    @property
    def steps(self) -> int:
        return self.values.shape[0]

    @property
    def height(self) -> int:
        return self.values.shape[1]

    @property
    def width(self) -> int:
        return self.values.shape[2]

    #: A stored value times this is a depth in m (1.0: stored as depths).
    to_depth_m: float = 1.0

    def read_stored(self, first: int, stop: int) -> np.ndarray:
        return self.values[first:stop].copy()

    def step_label(self, step: int) -> str:
        return f"2026-07-01 step {step + 1}"


def random_weights(rng: np.random.Generator, n: int, m: int, *, empty_row: bool = False,
                   sorted_indices: bool = True) -> RainGridWeights:
    """``n`` subcatchments over ``m`` used cells (in random grid order), 1-9 cells each."""
    cells = rng.choice(HEIGHT * WIDTH, size=m, replace=False).astype(np.int64)
    counts = rng.integers(1, 10, size=n)
    if empty_row:
        counts[n // 2] = 0
    indptr = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    indices = np.concatenate([rng.choice(m, size=c, replace=False) for c in counts])
    if sorted_indices:
        for s in range(n):
            indices[indptr[s]:indptr[s + 1]].sort()
    data = rng.uniform(0.01, 1.0, size=indices.size) ** 3  # weights spanning decades
    data /= np.add.reduceat(data, indptr[:-1])[np.repeat(np.arange(n), counts)]
    matrix = sparse.csr_array((data, indices.astype(np.int64), indptr), shape=(n, m))
    ids = tuple(f"S{i}" for i in range(n))
    return RainGridWeights(ids, cells, matrix, "memory.nc:rain", WIDTH)


def random_rain(rng: np.random.Generator, steps: int) -> np.ndarray:
    """Rain depths in m: a third of the cells dry, the rest from 1e-7 to 0.03 m."""
    values = 10.0 ** rng.uniform(-7, np.log10(0.03), size=(steps, HEIGHT, WIDTH))
    values[rng.uniform(size=values.shape) < 1 / 3] = 0.0
    return values


def scipy_means(values: np.ndarray, weights: RainGridWeights) -> np.ndarray:
    """The computation replaced: numpy minimum, scipy CSR product, ``(steps, subcatchments)``."""
    return weighted_mean(values.reshape(values.shape[0], -1)[:, weights.cells], weights.matrix)


def kernel_means(values: np.ndarray, weights: RainGridWeights, rows: np.ndarray) -> np.ndarray:
    """The kernels' means of the subcatchments ``rows``, ``(steps, len(rows))``."""
    return grid_rain_mix(weights, StackInMemory(values))[0].columns(rows)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_kernels_give_scipys_product_to_the_bit_whatever_the_rows(seed):
    # Rows of 0 to 9 cells: the kernel's own loops for 1 to 4 cells and the general one.
    rng = np.random.default_rng(seed)
    weights = random_weights(rng, 300, 700, empty_row=True, sorted_indices=seed != 2)
    values = random_rain(rng, 23)
    expected = scipy_means(values, weights)
    for rows in (np.arange(300), rng.permutation(300)[:57], np.array([150]), np.arange(0)):
        assert np.array_equal(kernel_means(values, weights, rows), expected[:, rows])


def test_gather_keeps_the_used_cells_by_series_and_finds_numpys_minimum():
    rng = np.random.default_rng(10)
    weights = random_weights(rng, 80, 333)
    block = random_rain(rng, 11).reshape(11, -1)
    kept = np.full((weights.cells.size, 20), np.nan)
    low = np.empty(11)
    assert gather_block(block, weights.cells, 4, 1.0, kept, low)
    assert np.array_equal(kept[:, 4:15], block[:, weights.cells].T)
    assert np.isnan(kept[:, :4]).all() and np.isnan(kept[:, 15:]).all()  # other steps left
    assert np.array_equal(low, block[:, weights.cells].min(axis=1))
    for bad in (np.nan, -1e-9, np.inf):  # any bad used value is seen
        spoiled = block.copy()
        spoiled[7, weights.cells[200]] = bad
        assert not gather_block(spoiled, weights.cells, 4, 1.0, kept, low)


@pytest.mark.parametrize("factor", [5 / 60 / 1000, 0.0254 / 12, 1e-3, 7.0])
def test_gather_of_stored_float32_gives_the_depths_read_steps_gives_to_the_bit(factor):
    # RainStack.read_steps widens the stored float32 to float64, then multiplies by the
    # stack's factor; the gather does both per value and must keep the same bits.
    rng = np.random.default_rng(11)
    weights = random_weights(rng, 80, 333)
    stored = (random_rain(rng, 9) * 1e4).astype(np.float32).reshape(9, -1)
    depths = np.array(stored, dtype=np.float64)
    depths *= factor
    kept = np.empty((weights.cells.size, 9))
    low = np.empty(9)
    assert gather_block(stored, weights.cells, 0, factor, kept, low)
    assert np.array_equal(kept, depths[:, weights.cells].T)
    assert np.array_equal(low, depths[:, weights.cells].min(axis=1))
    for bad in (np.nan, -1e-30, -np.inf):  # a tiny negative float32 stays negative
        spoiled = stored.copy()
        spoiled[3, weights.cells[17]] = bad
        assert not gather_block(spoiled, weights.cells, 0, factor, kept, low)


def test_a_stack_of_stored_values_gives_the_mix_of_its_depths_to_the_bit():
    rng = np.random.default_rng(12)
    weights = random_weights(rng, 200, 500)
    stored = (random_rain(rng, 15) * 1e4).astype(np.float32)
    factor = 5 / 60 / 1000
    depths = np.array(stored, dtype=np.float64)
    depths *= factor
    as_stored = replace(StackInMemory(stored), to_depth_m=factor)
    got = grid_rain_mix(weights, as_stored, block_bytes=4 * 8 * HEIGHT * WIDTH)[0]
    want = grid_rain_mix(weights, StackInMemory(depths))[0]
    assert np.array_equal(got.values_m, want.values_m)
    assert np.array_equal(got.columns(), scipy_means(depths, weights))


def test_areal_depth_by_blocks_gives_scipys_product_to_the_bit():
    rng = np.random.default_rng(4)
    weights = random_weights(rng, 500, 900)
    stack = StackInMemory(random_rain(rng, 37))
    expected = scipy_means(stack.values, weights)
    step_bytes = 8 * HEIGHT * WIDTH
    for steps_a_block in (1, 5, 36, 37, 100):  # several blocks, a short last one, one block
        got = grid_areal_depth(weights, stack, block_bytes=steps_a_block * step_bytes)
        assert got.flags.f_contiguous and got.shape == (37, 500)
        assert np.array_equal(got, expected)


def test_a_uniform_grid_gives_its_value_exactly():
    # Exact by construction (common practice for a weighted mean): x - min is 0 in every cell,
    # so the mean is min + 0, whatever the rounding of the weights.
    rng = np.random.default_rng(6)
    weights = random_weights(rng, 250, 800)
    values = np.full((9, HEIGHT, WIDTH), 0.1)  # 0.1 m: not a binary fraction
    values[3] = 7.3e-5
    values[5] = 0.0
    got = grid_areal_depth(weights, StackInMemory(values))
    assert np.all(got == values[:, :1, 0])


def test_scan_finds_numpys_minimum_and_accepts_minus_zero():
    rng = np.random.default_rng(7)
    weights = random_weights(rng, 50, 300)
    values = random_rain(rng, 6)
    values[2] += 0.001  # a step without a dry cell
    values.reshape(6, -1)[4, weights.cells[17]] = -0.0  # passes ``>= 0``, as before
    block = values.reshape(6, -1)
    low = np.empty(6)
    assert scan_block(block, weights.cells, low) == (BLOCK_OK, -1, -1)
    assert np.array_equal(low, block[:, weights.cells].min(axis=1))
    assert np.array_equal(kernel_means(values, weights, np.arange(50)),
                          scipy_means(values, weights))


def numpy_first_bad(values: np.ndarray, weights: RainGridWeights) -> tuple[int, int, int]:
    """The check replaced: any value not finite first (by step, then column), else negative."""
    used = values.reshape(values.shape[0], -1)[:, weights.cells]
    for status, bad in ((BLOCK_NODATA, ~np.isfinite(used)), (BLOCK_NEGATIVE, used < 0)):
        if bad.any():
            step, col = (int(v) for v in np.argwhere(bad)[0])
            return status, step, col
    return BLOCK_OK, -1, -1


@pytest.mark.parametrize("bad", [
    [(4, 9, np.nan)],
    [(4, 9, np.inf), (4, 3, np.nan)],  # the first by column within a step
    [(1, 2, -1e-6), (5, 0, np.nan)],  # nodata anywhere comes before a negative value
    [(3, 8, -np.inf)],
    [(2, 11, -2e-4), (2, 4, -3e-4), (6, 1, -1.0)],
])
def test_scan_stops_on_the_value_numpys_check_stops_on(bad):
    rng = np.random.default_rng(8)
    weights = random_weights(rng, 60, 200)
    values = random_rain(rng, 8)
    flat = values.reshape(8, -1)
    for step, col, value in bad:
        flat[step, weights.cells[col]] = value
    flat[0, np.setdiff1d(np.arange(HEIGHT * WIDTH), weights.cells)[0]] = np.nan  # unused: no matter
    low = np.empty(8)
    assert scan_block(flat, weights.cells, low) == numpy_first_bad(values, weights)


def test_nodata_and_negative_rain_stop_with_the_messages_of_before():
    rng = np.random.default_rng(9)
    weights = random_weights(rng, 40, 100)
    values = random_rain(rng, 10)
    col = int(weights.matrix.indices[50])  # a used cell
    cell = int(weights.cells[col])
    name = f"r{cell // WIDTH}_c{cell % WIDTH}"
    first_user = weights.subcatchment_ids[int(np.flatnonzero(weights.matrix.toarray()[:, col])[0])]
    values.reshape(10, -1)[7, cell] = -0.0025
    with pytest.raises(StormError) as err:  # negative: value, time and cell, as before
        grid_areal_depth(weights, StackInMemory(values), block_bytes=3 * 8 * HEIGHT * WIDTH)
    assert str(err.value) == (f"memory.nc:rain: has rain -0.0025 m < 0 at 2026-07-01 step 8 "
                              f"in cell {name}; give rain depths or intensities >= 0, or "
                              "declare a value that marks missing data as the file's nodata "
                              "(NetCDF _FillValue or missing_value, the GeoTIFF's nodata)")
    values.reshape(10, -1)[8, cell] = np.nan
    with pytest.raises(StormError) as err:  # nodata in the same block comes first
        grid_areal_depth(weights, StackInMemory(values), block_bytes=3 * 8 * HEIGHT * WIDTH)
    assert str(err.value) == (
        f"memory.nc:rain: has no rain value (nodata) at 2026-07-01 step 9 in cell {name} used "
        f"by subcatchment {first_user!r}; fill the gap in the rain grid, or give a grid without "
        "nodata over the subcatchments")


def test_fill_gaps_takes_the_mean_of_the_neighbours_that_have_a_value():
    # By hand: values on a 1/1024 grid, so each neighbour sum is exact and the mean is one
    # rounding, whatever the order of summation. Cell (5, 7) in step 2: eight neighbours, one
    # of them nodata too (counted out); cell (0, 0) in step 4: a corner, three neighbours.
    rng = np.random.default_rng(11)
    values = rng.integers(0, 50, size=(6, HEIGHT, WIDTH)) / 1024.0
    cells = np.array([5 * WIDTH + 7, 0, 5 * WIDTH + 8, 1], dtype=np.int64)
    matrix = sparse.csr_array(np.array([[0.5, 0.5, 0.0, 0.0], [0.0, 0.0, 0.25, 0.75]]))
    weights = RainGridWeights(("A", "B"), cells, matrix, "memory.nc:rain", WIDTH)
    gappy = values.copy()
    gappy[2, 5, 7] = gappy[2, 4, 6] = gappy[4, 0, 0] = np.nan
    by_hand = gappy.copy()
    around = [gappy[2, r, c] for r in (4, 5, 6) for c in (6, 7, 8)
              if (r, c) != (5, 7) and np.isfinite(gappy[2, r, c])]
    by_hand[2, 5, 7] = sum(around) / 7
    by_hand[4, 0, 0] = (gappy[4, 0, 1] + gappy[4, 1, 0] + gappy[4, 1, 1]) / 3
    mix, notes = grid_rain_mix(weights, StackInMemory(gappy), fill_gaps=True)
    assert np.array_equal(mix.columns(), scipy_means(by_hand, weights))
    assert notes == ("2 missing value(s) of the rain grid in cells the subcatchments use were "
                     "filled with the mean of the cells around them (fill_gaps = true), the "
                     "first at 2026-07-01 step 3 in cell r5_c7",)
    with pytest.raises(StormError, match="has no rain value"):  # not asked to fill
        grid_rain_mix(weights, StackInMemory(gappy))
    assert grid_rain_mix(weights, StackInMemory(values), fill_gaps=True)[1] == ()


def test_fill_gaps_leaves_negative_rain_and_lonely_gaps_as_errors():
    rng = np.random.default_rng(12)
    weights = random_weights(rng, 40, 100)
    values = random_rain(rng, 5)
    cell = int(weights.cells[weights.matrix.indices[0]])
    r, c = divmod(cell, WIDTH)
    lonely = values.copy()
    lonely[3, max(r - 1, 0):r + 2, max(c - 1, 0):c + 2] = np.nan  # the cell and all around it
    with pytest.raises(StormError, match=r"step 4 in cell r\d+_c\d+ used by subcatchment "
                                         r"'S\d+', nor any of the cells around it"):
        grid_rain_mix(weights, StackInMemory(lonely), fill_gaps=True)
    negative = values.copy()
    negative[1, r, c] = -0.001
    negative[2, r, c] = np.nan
    with pytest.raises(StormError, match="has rain -0.001 m < 0"):
        grid_rain_mix(weights, StackInMemory(negative), fill_gaps=True)
