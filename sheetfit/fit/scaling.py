"""Standard units: each attribute minus its mean, divided by its population SD.

Means and sums of squares are correctly rounded sums (``math.fsum``) divided by n, the
arithmetic of AVERAGE and STDEV.P, so a sheet can repeat every z value.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from sheetfit.errors import DataError
from sheetfit.fit import checks
from sheetfit.fit._arrays import readonly
from sheetfit.fit._sums import exact_dot, exact_sum

__all__ = ["Scaling", "attribute_stats", "standard_units"]


@dataclass(frozen=True)
class Scaling:
    """Standard units: per-attribute mean and population SD (mean 0 and SD 1 when off)."""

    mean_: np.ndarray
    sd_: np.ndarray
    on: bool

    def transform(self, X: np.ndarray) -> np.ndarray:
        """(X − mean_) / sd_ element by element in float64; a copy of X when scaling is off."""
        m = self.mean_.shape[0]
        X = checks.new_rows(X, [f"x{j + 1}" for j in range(m)])
        return (X - self.mean_) / self.sd_ if self.on else X.copy()


def attribute_stats(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean and population SD of each column: fsum / n and sqrt(fsum(dev · dev) / n)."""
    n, m = X.shape
    mean = np.empty(m)
    sd = np.empty(m)
    for j in range(m):
        col = X[:, j]
        mean[j] = exact_sum(col) / n
        dev = col - mean[j]
        sd[j] = math.sqrt(exact_dot(dev, dev) / n)
    return mean, sd


def standard_units(
    X_train: np.ndarray, on: bool = True, names: Sequence[str] | None = None
) -> Scaling:
    """The scaling that puts each training attribute in standard units (or none when off)."""
    X, names_ = checks.as_table(X_train, names)
    n, m = X.shape
    if not on:
        return Scaling(readonly(np.zeros(m)), readonly(np.ones(m)), False)
    if n == 0:
        raise DataError("no rows to take standard units from")
    checks.not_constant(X, names_, "it has no standard units",
                        hint="remove it, or turn standard units off")
    mean, sd = attribute_stats(X)
    return Scaling(readonly(mean), readonly(sd), True)
