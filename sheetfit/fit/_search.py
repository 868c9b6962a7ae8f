"""Nearest-neighbour search with exact distances and the 12-digit tie rule.

* **distance** between rows i and j: ``sqrt(fsum((Z[i,c] - Z[j,c]) * (Z[i,c] - Z[j,c])))``,
  what ``SQRT(SUMXMY2(row_i, row_j))`` gives. A square is always the product ``d * d``.
* **order**: by distance rounded to 12 significant digits, then by row index; distances
  that agree to 12 digits are ties and the lower row comes first. Training rows are
  searched leave-one-out: a row is never its own neighbour (a duplicate of it is).

A k-d tree proposes candidates; they are re-measured with the exact formula and the set
is widened until no row tied at the k-th place can be missing. All pairs are never
compared.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # scipy's neighbour search is imported when a neighbour model is fitted
    from scipy.spatial import cKDTree

from sheetfit.fit._sums import fsum_rows

__all__ = ["TIE_DIGITS", "exact_distances", "order", "search", "tie_keys"]

#: Distances that agree to this many significant digits are ties (lower row first).
TIE_DIGITS = 12
# Two distances whose relative gap exceeds this cannot round to the same 12 digits
# (the gap between 12-digit decimals is at most 1e-11 relative); margin of two.
_TIE_GAP = 2e-11
# Relative widening of the k-th distance when gathering candidates: far above the
# ~1e-15 gap between the tree's distances and the exact formula, far below any real gap.
_WIDEN = 1e-9
_MARGIN = 5
_CHUNK = 1_000_000  # elements per block of candidate differences (measured: 4M held ~80 MiB more and was no faster)


def tie_keys(D: np.ndarray) -> np.ndarray:
    """Each distance rounded to 12 significant digits, formatted only where it matters.

    Rounding is monotone, so a distance with no other distance within the tie gap in its
    row keeps its own value as its key without changing any order or any tie.
    """
    S = np.sort(D, axis=1)
    a, b = S[:, :-1], S[:, 1:]
    close = (b != a) & np.isfinite(b) & (b - a <= _TIE_GAP * b)
    keys = D.copy()
    if close.any():
        vals = np.unique(np.concatenate([a[close], b[close]]))
        rounded = np.array([float(f"{v:.{TIE_DIGITS}g}") for v in vals.tolist()])
        pos = np.minimum(np.searchsorted(vals, D), vals.size - 1)
        hit = vals[pos] == D
        keys[hit] = rounded[pos[hit]]
    return keys


def exact_distances(Q: np.ndarray, Z: np.ndarray, J: np.ndarray) -> np.ndarray:
    """Distance of each query row to its candidate rows J by the exact formula."""
    r, K = J.shape
    diff = Q[:, None, :] - Z[J]
    sq = (diff * diff).reshape(r * K, -1)
    return np.sqrt(fsum_rows(sq)).reshape(r, K)


def order(D: np.ndarray, J: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sort each row's candidates by (12-digit distance, row index)."""
    idx = np.lexsort((J, tie_keys(D)), axis=-1)
    return np.take_along_axis(D, idx, axis=1), np.take_along_axis(J, idx, axis=1)


def search(
    tree: cKDTree, Z: np.ndarray, Q: np.ndarray, kk: int, self_rows: np.ndarray | None
) -> tuple[np.ndarray, np.ndarray]:
    """The first kk neighbours (indices, exact distances) of each query row, in order.

    With ``self_rows`` the query rows are training rows and each is excluded from its own
    list. A row is finished when the tree's farthest candidate lies beyond its kk-th
    exact distance widened by 1e-9; otherwise it is searched again with twice as many.
    """
    n, m = Z.shape
    r = Q.shape[0]
    J_out = np.empty((r, kk), dtype=np.int64)
    D_out = np.empty((r, kk))
    pending = np.arange(r)
    K = min(n, kk + (self_rows is not None) + _MARGIN)
    while pending.size:
        retry = []
        step = max(1, _CHUNK // (K * max(m, 1)))
        for start in range(0, pending.size, step):
            rows = pending[start : start + step]
            dt, jt = tree.query(Q[rows], k=K, workers=-1)
            dt, jt = dt.reshape(rows.size, K), jt.reshape(rows.size, K).astype(np.int64)
            D = exact_distances(Q[rows], Z, jt)
            if self_rows is not None:
                own = jt == self_rows[rows][:, None]
                D[own] = np.inf
                jt[own] = n
            Ds, Js = order(D, jt)
            done = (dt[:, -1] > Ds[:, kk - 1] * (1 + _WIDEN)) if K < n else np.ones(rows.size, bool)
            J_out[rows[done]] = Js[done, :kk]
            D_out[rows[done]] = Ds[done, :kk]
            retry.append(rows[~done])
        pending = np.concatenate(retry)
        K = min(n, 2 * K)
    return J_out, D_out
