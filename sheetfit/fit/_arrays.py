"""Small array helpers the numeric core shares: read-only results and safe division."""

from __future__ import annotations

import math

import numpy as np

__all__ = ["divide", "readonly"]


def readonly(a: np.ndarray) -> np.ndarray:
    """The array itself, made read-only (results never change after the fit)."""
    a.setflags(write=False)
    return a


def divide(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    """num / den element by element, nan where den is 0."""
    out = np.full(np.shape(num), math.nan)
    ok = den != 0
    out[ok] = num[ok] / den[ok]
    return out
