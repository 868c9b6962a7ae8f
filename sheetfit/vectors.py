"""Vectors made a block of items at a time.

A million-row model plans a dozen columns the length of its data (fitted values,
residuals, leverages, studentized residuals, ...). Held as arrays from planning until
their sheet is written they cost 8 bytes a row each, the largest part of a refresh's
memory beyond the data itself. A :class:`Lazy` vector instead keeps the recipe: its
length and a function giving items a..b-1 from arrays the fit holds anyway. The writer
asks for 4,096 rows at a time; sums over the whole vector go through :func:`blocks`.

The recipe must be element-wise (item i depends on row i alone), so a block's items are
bit for bit the items of the whole vector made at once: numpy's element-wise operations
round each element the same way whatever the length of the array.
"""

from __future__ import annotations

import operator
from collections.abc import Callable, Iterator, Sequence
from typing import Any

import numpy as np

__all__ = ["BLOCK", "Lazy", "blocks", "is_numeric", "whole"]

#: Items made at a time by :func:`blocks` (512 KB of float64).
BLOCK = 1 << 16


class Lazy:
    """``n`` items made by ``make(a, b)`` (items a..b-1, 0 <= a <= b <= n) when asked for.

    ``dtype`` is the numpy type of the arrays ``make`` returns (float64, int64); None when
    it returns a list of scalars (texts, blanks among numbers). Slicing with step 1 gives
    the block, indexing one item, ``np.asarray`` the whole vector (made then, not kept).
    """

    __slots__ = ("dtype", "make", "n")

    def __init__(self, n: int, make: Callable[[int, int], Any],
                 dtype: Any = np.float64) -> None:
        if n < 0:
            raise ValueError("a vector of negative length")
        self.n = n
        self.make = make
        self.dtype = None if dtype is None else np.dtype(dtype)

    def __len__(self) -> int:
        return self.n

    def __getitem__(self, k: Any) -> Any:
        if isinstance(k, slice):
            a, b, step = k.indices(self.n)
            if step != 1:
                raise ValueError("a lazy vector is sliced with step 1")
            return self.make(a, max(a, b))
        i = operator.index(k)
        if i < 0:
            i += self.n
        if not 0 <= i < self.n:
            raise IndexError(k)
        return self.make(i, i + 1)[0]

    def __iter__(self) -> Iterator[Any]:
        """The items as Python scalars, made a block at a time."""
        for x in blocks(self):
            yield from (x.tolist() if isinstance(x, np.ndarray) else x)

    def __array__(self, dtype: Any = None, copy: Any = None) -> np.ndarray:
        out = self.make(0, self.n)
        return np.asarray(out, dtype=dtype if dtype is not None else
                          (self.dtype if self.dtype is not None else object))

    def __repr__(self) -> str:
        return f"Lazy(n={self.n}, dtype={self.dtype})"


def is_numeric(v: Any) -> bool:
    """Whether ``v`` is a vector of numbers (an integer or float array, or a Lazy of one)."""
    dtype = getattr(v, "dtype", None)
    return isinstance(v, (np.ndarray, Lazy)) and dtype is not None and dtype.kind in "fiu"


def blocks(v: np.ndarray | Lazy | Sequence[Any], size: int = BLOCK) -> Iterator[Any]:
    """Consecutive slices of ``size`` items (the last may be shorter)."""
    for a in range(0, len(v), size):
        yield v[a:a + size]


def whole(v: np.ndarray | Lazy | Sequence[Any]) -> Any:
    """The vector itself, a Lazy made whole (an array, or a list of scalars)."""
    return v.make(0, v.n) if isinstance(v, Lazy) else v
