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
    "dd_fitted",
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


#: Rows handled at a time by the whole-column functions below: arrays of this length stay
#: in the processor's cache through the dozen element-wise steps of a two_prod, where
#: million-element arrays go to memory and back at every step (and are held at once).
_ROWS = 1 << 16


def _blocks(n: int) -> range:
    return range(0, n, _ROWS)


def _prod_err(a: tuple[np.ndarray, np.ndarray], b: tuple[np.ndarray, np.ndarray],
              p: np.ndarray) -> np.ndarray:
    """The error of ``p = fl(a · b)`` from the split halves of a and b (as ``two_prod``)."""
    (ah, al), (bh, bl) = a, b
    return ((ah * bh - p) + ah * bl + al * bh) + al * bl


def dd_gram(X: np.ndarray, X_lo: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(X + X_lo)ᵀ(X + X_lo) as double-double matrices (hi, lo), entries good to ~eps².

    Taken ``_ROWS`` rows at a time, each column split once per block; each block's sums
    are added into a double-double total (for one block the same operations as before)."""
    n, p = X.shape
    hi = np.zeros((p, p))
    lo = np.zeros((p, p))
    for a in _blocks(n):
        B = X[a:a + _ROWS]
        L = None if X_lo is None else X_lo[a:a + _ROWS]
        parts = [_split(np.ascontiguousarray(B[:, j])) for j in range(p)]
        for j in range(p):
            for k in range(j, p):
                prod = B[:, j] * B[:, k]
                err = _prod_err(parts[j], parts[k], prod)
                h, low = dd_sum_pair(prod)
                if L is not None:
                    err = err + B[:, j] * L[:, k] + L[:, j] * B[:, k]
                s, e = two_sum(np.float64(hi[j, k]), np.float64(h))
                hi[j, k] = s
                lo[j, k] += e + (low + float(np.sum(err)))
    for j in range(p):
        for k in range(j, p):
            s, t = two_sum(np.float64(hi[j, k]), np.float64(lo[j, k]))
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
    """Residual ``y − (X + X_lo)β`` as a double-double pair (hi, lo); element-wise, so
    taking ``_ROWS`` rows at a time changes no bit."""
    n = len(y)
    out_hi = np.empty(n)
    out_lo = np.empty(n)
    for a in _blocks(n):
        hi = np.array(y[a:a + _ROWS], dtype=np.float64)
        lo = np.zeros_like(hi)
        for j in range(X.shape[1]):
            p, e = two_prod(X[a:a + _ROWS, j], np.float64(beta[j]))
            hi, t = two_sum(hi, -p)
            lo += t - e
            if X_lo is not None:
                lo -= X_lo[a:a + _ROWS, j] * beta[j]
        s = hi + lo
        out_hi[a:a + _ROWS] = s
        out_lo[a:a + _ROWS] = lo - (s - hi)
    return out_hi, out_lo


def dd_dot(a: np.ndarray, hi: np.ndarray, lo: np.ndarray, a_lo: np.ndarray | None = None) -> float:
    """Dot product of two double-double vectors (a + a_lo)·(hi + lo), accurately rounded
    (``_ROWS`` rows at a time; for one block the same operations as in one piece)."""
    acc, acc_lo, small_sum = np.float64(0.0), 0.0, 0.0
    for k in _blocks(len(a)):
        ab, hb, lb = a[k:k + _ROWS], hi[k:k + _ROWS], lo[k:k + _ROWS]
        p, e = two_prod(ab, hb)
        small = e + ab * lb if a_lo is None else e + ab * lb + a_lo[k:k + _ROWS] * hb
        h, low = dd_sum_pair(p)
        acc, err = two_sum(acc, np.float64(h))
        acc_lo += float(err) + low
        small_sum += float(np.sum(small))
    return (float(acc) + acc_lo) + small_sum


def dd_sum_squares(hi: np.ndarray, lo: np.ndarray | None = None,
                   shift: float | None = None) -> float:
    """Σ (hi + lo)² for a double-double vector, accurately rounded; with ``shift`` (and no
    ``lo``) Σ (hi − shift)², each difference carried as a double-double. ``_ROWS`` rows at
    a time, each block's sum added into a double-double total (for one block the same
    operations as in one piece)."""
    acc, acc_lo, small_sum = np.float64(0.0), 0.0, 0.0
    for a in _blocks(len(hi)):
        h = hi[a:a + _ROWS]
        if shift is not None:
            h, low = two_sum(h, -np.float64(shift))
        else:
            low = np.zeros_like(h) if lo is None else lo[a:a + _ROWS]
        p, e = two_prod(h, h)
        s_hi, s_lo = dd_sum_pair(p)
        acc, err = two_sum(acc, np.float64(s_hi))
        acc_lo += float(err) + s_lo
        small_sum += float(np.sum(e + 2.0 * h * low))
    return (float(acc) + acc_lo) + small_sum


def dd_fitted(y: np.ndarray, hi: np.ndarray, lo: np.ndarray) -> np.ndarray:
    """``y − (hi + lo)`` rounded once: the fitted values from a double-double residual
    (element-wise, ``_ROWS`` rows at a time: no million-row temporaries)."""
    out = np.empty(len(y))
    for a in _blocks(len(y)):
        f, e = two_sum(y[a:a + _ROWS], -hi[a:a + _ROWS])
        out[a:a + _ROWS] = f + (e - lo[a:a + _ROWS])
    return out
