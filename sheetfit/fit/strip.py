"""Graph of averages: the mean response of the rows in a vertical strip around each x.

For a centre c and a half-width w, the strip holds the rows with
``abs(x - c) <= w * (1 + 1e-12)``; the relative allowance of 1e-12 absorbs the rounding of
``x - c`` at the edge, so a row that is exactly w away in decimal terms (x = 0.4, c = 0.1,
w = 0.3) is counted in. Each strip's sum is correctly rounded (``math.fsum``) and its mean
is sum / count; an empty strip has no mean (nan), not zero.

The centres are the distinct x values when there are at most 200 of them, otherwise 101
evenly spaced centres ``lo + j * step`` with ``step = (hi - lo) / 100``. Each row is
fitted leave-one-out from the strip at its lookup centre (its own x on the distinct grid,
the nearest even centre otherwise): the mean of the OTHER rows in that strip.
"""

from __future__ import annotations

import math
from functools import cached_property

import numpy as np

from sheetfit.errors import DataError, SettingError
from sheetfit.fit import checks
from sheetfit.fit._arrays import divide, readonly
from sheetfit.fit._sums import exact_dot

__all__ = ["EDGE_ALLOWANCE", "EVEN_CENTRES", "MAX_DISTINCT", "StripMean", "StripMeanResult"]

#: Relative allowance at a strip's edge: abs(x − c) <= width · (1 + EDGE_ALLOWANCE) is inside.
EDGE_ALLOWANCE = 1e-12
#: The "auto" grid uses the distinct x values when there are at most this many.
MAX_DISTINCT = 200
#: Number of centres on the even grid (j = 0 … EVEN_CENTRES − 1).
EVEN_CENTRES = 101
_GRIDS = ("auto", "distinct", "even")


class StripMean:
    """Graph of averages: the mean of y in a strip of half-width ``width`` around each centre."""

    def __init__(self, width: float, centres: str = "auto") -> None:
        self.width = width
        self.centres = centres

    def _check_settings(self) -> tuple[float, str]:
        w = checks.check_positive("width", self.width)
        if self.centres not in _GRIDS:
            raise SettingError(
                f"setting centres: allowed {', '.join(_GRIDS)}, given {self.centres!r}"
            )
        return w, str(self.centres)

    def fit(self, x: np.ndarray, y: np.ndarray) -> StripMeanResult:
        """Strip counts, sums and means on the grid, and each row's leave-one-out fit."""
        width, kind = self._check_settings()
        X, names = checks.as_table(x)
        checks.one_attribute(X, names, "a strip mean")
        x = X[:, 0]
        y = checks.response(y, x.shape[0], "the attribute has")
        checks.enough_rows(x.shape[0], 2, "a strip mean (leave-one-out)")
        distinct = np.unique(x)
        if kind == "auto":
            kind = "distinct" if distinct.size <= MAX_DISTINCT else "even"
        lo, hi = float(distinct[0]), float(distinct[-1])
        if kind == "even":
            if hi == lo:
                raise DataError(f"every x is {lo:.15g}; an even grid needs two or more values")
            step = (hi - lo) / (EVEN_CENTRES - 1)
            centres = lo + np.arange(EVEN_CENTRES, dtype=np.float64) * step
        else:
            step = math.nan
            centres = distinct
        allowance = width * (1 + EDGE_ALLOWANCE)
        count, total = _strips(x, y, centres, allowance)
        return StripMeanResult(
            x=x, y=y, width=width, allowance=allowance, grid_kind=kind, lo=lo, step=step,
            centres=centres, count=count, total=total,
        )  # fmt: skip


def _strips(
    x: np.ndarray, y: np.ndarray, centres: np.ndarray, allowance: float
) -> tuple[np.ndarray, np.ndarray]:
    """Row count and fsum of y in each strip.

    fl(x − c) never decreases as x grows, so each strip is one run of the rows sorted by x:
    found by binary search, then its ends moved past any row the rounding puts on the
    other side.
    """
    order = np.argsort(x, kind="stable")
    xs, ys = x[order], y[order]
    n = xs.size

    def inside(i: int, c: float) -> bool:
        return bool(abs(xs[i] - c) <= allowance)

    count = np.zeros(centres.size, dtype=np.int64)
    total = np.zeros(centres.size)
    starts = np.searchsorted(xs, centres - allowance, side="left")
    stops = np.searchsorted(xs, centres + allowance, side="right")
    for g, c in enumerate(centres.tolist()):
        i, j = int(starts[g]), int(stops[g])
        while i > 0 and inside(i - 1, c):
            i -= 1
        while i < n and xs[i] <= c and not inside(i, c):
            i += 1
        while j < n and inside(j, c):
            j += 1
        while j > i and xs[j - 1] >= c and not inside(j - 1, c):
            j -= 1
        if j > i:
            count[g] = j - i
            total[g] = math.fsum(ys[i:j].tolist())
    return count, total


class StripMeanResult:
    """A fitted graph of averages: the strip means on the grid and leave-one-out fits."""

    def __init__(
        self,
        *,
        x: np.ndarray,
        y: np.ndarray,
        width: float,
        allowance: float,
        grid_kind: str,
        lo: float,
        step: float,
        centres: np.ndarray,
        count: np.ndarray,
        total: np.ndarray,
    ) -> None:
        self.x_ = readonly(x)
        self.y_ = readonly(y)
        self.width_ = width
        self.allowance_ = allowance
        self.grid_kind_ = grid_kind
        self.lo_ = lo
        self.step_ = step
        self.centres_ = readonly(centres)
        self.count_ = readonly(count)
        self.sum_ = readonly(total)

    def __repr__(self) -> str:
        return (
            f"StripMeanResult(n={self.n_}, width={self.width_:g}, grid={self.grid_kind_}, "
            f"centres={self.centres_.size}, rmse={self.rmse_:.6g})"
        )

    @cached_property
    def n_(self) -> int:
        """Number of rows."""
        return int(self.x_.shape[0])

    @cached_property
    def mean_(self) -> np.ndarray:
        """Mean of y in each strip, sum_ / count_; nan for an empty strip."""
        return readonly(divide(self.sum_, self.count_))

    @cached_property
    def row_centre_(self) -> np.ndarray:
        """Index of each row's lookup centre (its own x, or the nearest even centre)."""
        return readonly(self.centre_index(self.x_))

    @cached_property
    def in_strip_(self) -> np.ndarray:
        """Whether each row lies in the strip at its own lookup centre."""
        return readonly(np.abs(self.x_ - self.centres_[self.row_centre_]) <= self.allowance_)

    @cached_property
    def fitted_(self) -> np.ndarray:
        """Leave-one-out strip mean: (sum − y) / (count − 1) inside the strip, else the mean."""
        g = self.row_centre_
        loo = divide(self.sum_[g] - self.y_, self.count_[g] - 1)
        return readonly(np.where(self.in_strip_, loo, self.mean_[g]))

    @cached_property
    def resid_(self) -> np.ndarray:
        """Residuals y − fitted_ (nan where a row has no fitted value)."""
        return readonly(self.y_ - self.fitted_)

    @cached_property
    def n_fitted_(self) -> int:
        """Number of rows with a fitted value."""
        return int(np.count_nonzero(np.isfinite(self.fitted_)))

    @cached_property
    def rmse_(self) -> float:
        """Root mean squared residual over the rows with a fitted value (nan if none)."""
        r = self.resid_[np.isfinite(self.resid_)]
        return math.sqrt(exact_dot(r, r) / r.size) if r.size else math.nan

    def centre_index(self, x_new: np.ndarray) -> np.ndarray:
        """Lookup centre of each x: on the even grid floor((x − lo) / step + 0.5) within
        0 … 100; on the distinct grid the equal centre, else the nearest (the lower on a tie).
        """
        x = checks.new_rows(x_new, ["x"])[:, 0]
        if self.grid_kind_ == "even":
            j = np.floor((x - self.lo_) / self.step_ + 0.5)
            return np.clip(j, 0, EVEN_CENTRES - 1).astype(np.int64)
        c = self.centres_
        right = np.clip(np.searchsorted(c, x, side="left"), 0, c.size - 1)
        left = np.maximum(right - 1, 0)
        take_left = (c[right] != x) & (x - c[left] <= c[right] - x)
        return np.where(take_left, left, right).astype(np.int64)

    def means_at(self, centres: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Row count and mean of y in the strip around each given centre (nan if empty).

        The same strips as the grid's: at the grid centres these are ``count_`` and ``mean_``.
        """
        c = checks.new_rows(centres, ["centre"])[:, 0]
        count, total = _strips(self.x_, self.y_, c, self.allowance_)
        return readonly(count), readonly(divide(total, count))

    def predict(self, x_new: np.ndarray) -> np.ndarray:
        """Strip mean at each new x's lookup centre (all training rows count); never refits."""
        x = checks.new_rows(x_new, ["x"])
        checks.warn_outside(np.array([self.lo_]), np.array([float(self.x_.max())]), x)
        return self.mean_[self.centre_index(x)]
