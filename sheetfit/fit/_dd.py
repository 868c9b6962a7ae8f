"""Vectorised double-double helpers: residuals and dot products carried to ~32 digits.

Error-free transformations (Knuth's two-sum, Dekker's two-product) keep the
rounding error of each float64 operation as a second float64, so a residual
``y − Xβ`` and a product ``Xᵀr`` come out accurate even when the terms cancel.
Used by the float path of the least-squares engine for problems too big for
exact rational arithmetic.
"""

from __future__ import annotations

from typing import Any, TypeAlias

import numpy as np

__all__ = [
    "dd_dot",
    "dd_gram",
    "dd_powers",
    "dd_residual",
    "dd_sum",
    "dd_sum_pair",
    "dd_sum_squares",
    "two_prod",
    "two_sum",
]

#: An array or a scalar: the error-free transformations work element-wise on either.
_Num: TypeAlias = "np.ndarray | np.floating[Any] | float"

_SPLIT = 134217729.0  # 2**27 + 1, Dekker's splitting constant for float64


def two_sum(a: _Num, b: _Num) -> tuple[Any, Any]:
    """s, e with s = fl(a + b) and s + e = a + b exactly."""
    s = a + b
    bb = s - a
    e = (a - (s - bb)) + (b - bb)
    return s, e


def _split(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    c = _SPLIT * a
    hi = c - (c - a)
    return hi, a - hi


def two_prod(a: np.ndarray, b: _Num) -> tuple[np.ndarray, np.ndarray]:
    """p, e with p = fl(a · b) and p + e = a · b exactly (barring overflow)."""
    p = a * b
    ah, al = _split(a)
    bh, bl = _split(np.broadcast_to(b, np.shape(a)))
    e = ((ah * bh - p) + ah * bl + al * bh) + al * bl
    return p, e


def dd_sum_pair(x: np.ndarray) -> tuple[float, float]:
    """Sum of a vector as a double-double (hi, lo), by a pairwise two-sum cascade.

    The error is about eps²·Σ|x|·log n: the rounding errors of the cascade are kept
    and summed separately.
    """
    hi = np.asarray(x, dtype=np.float64).ravel()
    if hi.size == 0:
        return 0.0, 0.0
    lo = 0.0
    while hi.size > 1:
        if hi.size % 2:
            hi = np.append(hi, 0.0)
        hi, err = two_sum(hi[0::2], hi[1::2])
        lo += float(np.sum(err))
    s = float(hi[0]) + lo
    return s, lo - (s - float(hi[0]))


def dd_sum(x: np.ndarray) -> float:
    """Sum of a vector, accurate to about one rounding (see :func:`dd_sum_pair`)."""
    hi, lo = dd_sum_pair(x)
    return hi + lo


def dd_gram(X: np.ndarray, X_lo: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(X + X_lo)ᵀ(X + X_lo) as double-double matrices (hi, lo), entries good to ~eps²."""
    p = X.shape[1]
    hi = np.zeros((p, p))
    lo = np.zeros((p, p))
    for j in range(p):
        for k in range(j, p):
            prod, err = two_prod(X[:, j], X[:, k])
            h, low = dd_sum_pair(prod)
            if X_lo is not None:
                err = err + X[:, j] * X_lo[:, k] + X_lo[:, j] * X[:, k]
            s, t = two_sum(np.float64(h), np.float64(low + float(np.sum(err))))
            hi[j, k] = hi[k, j] = s
            lo[j, k] = lo[k, j] = t
    return hi, lo


def dd_powers(x: np.ndarray, degree: int) -> tuple[np.ndarray, np.ndarray]:
    """Columns x, x², …, x^degree as double-double (hi, lo): hi is the float64 power."""
    hi = np.empty((x.shape[0], degree))
    lo = np.zeros((x.shape[0], degree))
    hi[:, 0] = x
    for k in range(1, degree):
        p, e = two_prod(hi[:, k - 1], x)
        hi[:, k], lo[:, k] = two_sum(p, e + lo[:, k - 1] * x)
    return hi, lo


def dd_residual(
    y: np.ndarray, X: np.ndarray, beta: np.ndarray, X_lo: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Residual ``y − (X + X_lo)β`` as a double-double pair (hi, lo)."""
    hi = np.array(y, dtype=np.float64)
    lo = np.zeros_like(hi)
    for j in range(X.shape[1]):
        p, e = two_prod(X[:, j], np.float64(beta[j]))
        hi, t = two_sum(hi, -p)
        lo += t - e
        if X_lo is not None:
            lo -= X_lo[:, j] * beta[j]
    s = hi + lo
    return s, lo - (s - hi)


def dd_dot(a: np.ndarray, hi: np.ndarray, lo: np.ndarray, a_lo: np.ndarray | None = None) -> float:
    """Dot product of two double-double vectors (a + a_lo)·(hi + lo), accurately rounded."""
    p, e = two_prod(a, hi)
    small = e + a * lo if a_lo is None else e + a * lo + a_lo * hi
    return dd_sum(p) + float(np.sum(small))


def dd_sum_squares(hi: np.ndarray, lo: np.ndarray) -> float:
    """Σ (hi + lo)² for a double-double vector, accurately rounded."""
    p, e = two_prod(hi, hi)
    return dd_sum(p) + float(np.sum(e + 2.0 * hi * lo))
