"""Small array helpers the numeric core shares: read-only results, safe division, row
blocks."""

from __future__ import annotations

import itertools
import math

import numpy as np

__all__ = ["divide", "readonly", "row_blocks"]


def readonly(a: np.ndarray) -> np.ndarray:
    """A read-only view of the array (results never change after the fit); the array
    itself keeps its flags, as it may be the caller's own (``checks.as_table`` does not
    copy a float64 table)."""
    view = a.view()
    view.setflags(write=False)
    return view


def divide(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    """num / den element by element, nan where den is 0."""
    out = np.full(np.shape(num), math.nan)
    ok = den != 0
    out[ok] = num[ok] / den[ok]
    return out


def row_blocks(n: int, size: int) -> list[tuple[int, int]]:
    """Row ranges of about ``size`` rows covering 0..n (nearly equal, so none is much
    shorter than the others); one range when n fits in one."""
    k = max(1, -(-n // size))
    cuts = [n * i // k for i in range(k + 1)]
    return list(itertools.pairwise(cuts))
