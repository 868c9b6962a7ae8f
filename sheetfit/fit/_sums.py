"""Correctly rounded row sums, vectorised: what math.fsum gives for each row, proved row by row.

Each row is summed in double-double arithmetic; where the rounding of hi + lo cannot be
proved to be the correctly rounded sum (rare: about one row in 10^5), that row falls back
to ``math.fsum``. Distances and neighbour means use these sums so that a spreadsheet's
SUM, SUMXMY2 and AVERAGE (which round once per operation but agree to the last digit in
practice on these sizes) and Python agree on every cached value.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Iterator, Sequence

import numpy as np

from sheetfit.fit._dd import two_sum
from sheetfit.vectors import Lazy

__all__ = ["exact_dot", "exact_parts", "exact_sum", "fsum_rows", "iter_prefix_fsums",
           "prefix_fsums"]

_EPS = float(np.finfo(np.float64).eps)
#: Elements turned into Python floats at a time by :func:`exact_sum` and :func:`exact_dot`.
_BLOCK = 1 << 16


def exact_sum(x: np.ndarray | Sequence[float] | Lazy) -> float:
    """``math.fsum`` of an array's elements (the exactly rounded sum), fed a block at a
    time: the same result without a list of the whole array (32 bytes an element). A
    vector that makes its items a block at a time (``sheetfit.vectors.Lazy``) is read a
    block at a time."""
    return math.fsum(itertools.chain.from_iterable(b.tolist() for b in _flat_blocks(x)))


def exact_dot(a: np.ndarray | Sequence[float] | Lazy,
              b: np.ndarray | Sequence[float] | Lazy) -> float:
    """The exactly rounded sum of the rounded products ``a[i] * b[i]`` (``math.fsum`` of
    ``(a * b).tolist()``), a block at a time."""
    if _size(a) != _size(b):
        raise ValueError("exact_dot of arrays of different lengths")
    return math.fsum(itertools.chain.from_iterable(
        (u * w).tolist() for u, w in zip(_flat_blocks(a), _flat_blocks(b), strict=True)))


def _size(x: np.ndarray | Sequence[float] | Lazy) -> int:
    return len(x) if isinstance(x, Lazy) else int(np.size(x))


def _flat_blocks(x: np.ndarray | Sequence[float] | Lazy) -> Iterator[np.ndarray]:
    """The elements of ``x`` (flattened) as float64 blocks of ``_BLOCK``; a Lazy is made
    a block at a time, never whole."""
    if isinstance(x, Lazy):
        for a in range(0, len(x), _BLOCK):
            yield np.asarray(x[a:a + _BLOCK], dtype=float).ravel()
        return
    v = np.asarray(x, dtype=float).ravel()
    for a in range(0, v.size, _BLOCK):
        yield v[a:a + _BLOCK]


def exact_parts(x: np.ndarray) -> list[float]:
    """A few floats whose exact sum is the exact sum of ``x``'s elements.

    Each part is ``math.fsum`` of the elements less the parts so far (the correctly
    rounded remainder), until the remainder is exactly zero: the parts of several blocks,
    put together and summed by ``math.fsum``, give the correctly rounded sum of every
    element of every block. Usually one or two parts; never more than about 40 (each
    remainder is below half an ulp of the part before it, and a sum of doubles spans at
    most ~2,100 bits)."""
    values = np.asarray(x, dtype=float).ravel().tolist()
    parts: list[float] = []
    for _ in range(64):
        s = math.fsum(itertools.chain(values, [-p for p in parts]))
        if s == 0.0:
            return parts
        parts.append(s)
        if not math.isfinite(s):
            return parts
    raise ArithmeticError("exact_parts did not converge")  # cannot happen (see above)


def _finish(
    hi: np.ndarray, lo: np.ndarray, exact: np.ndarray, lost: np.ndarray, m: int, A: np.ndarray
) -> np.ndarray:
    """Round hi + lo; rows where that cannot be proved the correctly rounded sum use fsum.

    hi + lo is the exact sum where ``exact`` holds (rounding hi + lo once is then what
    fsum gives, halfway cases to even included); elsewhere lo is off by at most ``lost``.
    """
    s, e = two_sum(hi, lo)
    bound = lost * (1 + 4 * m * _EPS)
    # s is the rounding of the exact sum if that lies within half the gap to either
    # neighbouring float (compared doubled: half the smallest gap is not a float)
    gap = np.minimum(s - np.nextafter(s, -np.inf), np.nextafter(s, np.inf) - s)
    unsure = np.flatnonzero(~(exact | (2 * (np.abs(e) + bound) < gap)))
    out = np.asarray(s, dtype=np.float64)
    for i in unsure.tolist():
        out[i] = math.fsum(A[i, :m].tolist())
    return out


def prefix_fsums(A: np.ndarray, ks: Sequence[int]) -> dict[int, np.ndarray]:
    """For each k in ks, the correctly rounded sum of the first k columns of each row."""
    return dict(iter_prefix_fsums(A, ks))


def iter_prefix_fsums(A: np.ndarray, ks: Sequence[int]) -> Iterator[tuple[int, np.ndarray]]:
    """(k, the correctly rounded sum of the first k columns of each row) for each k in ks,
    in increasing k, each made as the running sum reaches it (the caller keeps what it
    needs: a k table of 25 sums of a million rows is 200 MB)."""
    want = set(ks)
    r = A.shape[0]
    hi = np.zeros(r)
    lo = np.zeros(r)
    lost = np.zeros(r)  # what adding the errors into lo has rounded away, in magnitude
    for c in range(max(want)):
        hi, e = two_sum(hi, A[:, c])
        lo, e2 = two_sum(lo, e)
        lost += np.abs(e2)
        if c + 1 in want:
            yield c + 1, _finish(hi, lo, lost == 0, lost, c + 1, A)


def fsum_rows(A: np.ndarray) -> np.ndarray:
    """Correctly rounded sum of each row (what math.fsum gives), vectorised."""
    m = A.shape[1]
    if m <= 2:  # one addition is a single rounding already
        return A.sum(axis=1) if m else np.zeros(A.shape[0])
    return prefix_fsums(A, [m])[m]
