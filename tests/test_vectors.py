"""Vectors made a block at a time (sheetfit.vectors) and the exact sums that read them."""

from __future__ import annotations

import math

import numpy as np
import pytest

from sheetfit.fit._sums import exact_dot, exact_parts, exact_sum
from sheetfit.vectors import BLOCK, Lazy, blocks, is_numeric, whole


def _counted(v: np.ndarray) -> tuple[Lazy, list[tuple[int, int]]]:
    asked: list[tuple[int, int]] = []

    def make(a: int, b: int) -> np.ndarray:
        asked.append((a, b))
        return v[a:b] * 1.0  # a new array, as a recipe makes one

    return Lazy(len(v), make, v.dtype), asked


def test_slices_items_and_the_whole_vector() -> None:
    v = np.arange(10.0) / 3
    lz, asked = _counted(v)
    assert len(lz) == 10 and is_numeric(lz)
    assert np.array_equal(lz[2:5], v[2:5]) and asked == [(2, 5)]
    assert lz[-1] == v[-1] and lz[0] == v[0]
    assert np.array_equal(lz[8:40], v[8:]) and len(lz[7:3]) == 0  # clipped like a list
    assert np.array_equal(np.asarray(lz), v) and np.asarray(lz, dtype=object).dtype == object
    with pytest.raises(IndexError):
        lz[10]
    with pytest.raises(ValueError):
        lz[::2]
    texts = Lazy(3, lambda a, b: ["a", "", 1.5][a:b], None)
    assert not is_numeric(texts) and whole(texts) == ["a", "", 1.5]
    assert np.asarray(texts).dtype == object


def test_blocks_cover_the_vector_in_order() -> None:
    v = np.arange(2 * BLOCK + 5, dtype=np.int64)
    lz, asked = _counted(v)
    got = list(blocks(lz))
    assert [len(b) for b in got] == [BLOCK, BLOCK, 5]
    assert np.array_equal(np.concatenate(got), v)
    assert asked == [(0, BLOCK), (BLOCK, 2 * BLOCK), (2 * BLOCK, 2 * BLOCK + 5)]


def test_exact_sums_read_a_lazy_vector_block_by_block() -> None:
    """The exactly rounded sums of a lazy vector equal math.fsum of the whole array (the
    reference: Python's correctly rounded sum), and no block is larger than BLOCK."""
    rng = np.random.default_rng(11)
    v = rng.normal(0, 1e6, 3 * BLOCK + 17) * rng.choice([1e-8, 1.0, 1e8], 3 * BLOCK + 17)
    w = rng.normal(size=len(v))
    lz, asked = _counted(v)
    assert exact_sum(lz) == math.fsum(v.tolist())
    assert max(b - a for a, b in asked) == BLOCK
    assert exact_dot(lz, w) == math.fsum((v * w).tolist())
    assert exact_dot(w, lz) == exact_dot(w, v)
    with pytest.raises(ValueError):
        exact_dot(lz, w[:-1])


def test_exact_parts_of_blocks_sum_to_the_correctly_rounded_total() -> None:
    """The parts of each block, summed by math.fsum, give math.fsum of every element
    (Python's correctly rounded sum is the reference) on values spanning 10^-300 to
    10^300 that cancel, where the sum of the blocks' own rounded sums is off."""
    rng = np.random.default_rng(3)
    v = rng.normal(size=5000) * 10.0 ** rng.integers(-300, 300, size=5000)
    v = np.concatenate([v, -v[:2500], [1e-300, 3.0, 2.0 ** -60]])
    rng.shuffle(v)
    want = math.fsum(v.tolist())
    cuts = [v[a:a + 97] for a in range(0, len(v), 97)]
    parts = [p for c in cuts for p in exact_parts(c)]
    assert math.fsum(parts) == want
    assert math.fsum(math.fsum(c.tolist()) for c in cuts) != want  # rounding per block is not enough
    assert exact_parts(np.zeros(3)) == [] and exact_parts(np.array([2.5])) == [2.5]
