"""Least squares solved exactly in rational arithmetic on the binary values of float64 data.

Every float64 is an integer times a power of two, so a design column is an
integer column times one power of two, and its powers (polynomial terms) are
the powers of those integers: no rounding anywhere. The normal equations
``GᵀG γ = Gᵀy`` of the integer design are solved by Gauss-Jordan elimination
in :class:`fractions.Fraction`; residuals, their sum of squares and the
diagonal of ``(XᵀX)⁻¹`` follow exactly, and each is rounded to float64 once.
The cost grows with n·p and the bit length of the entries, so the engine
uses this path only for small problems (see ``leastsq.EXACT_LIMIT``).
"""

from __future__ import annotations

import math
import operator
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

__all__ = ["ExactColumn", "ExactSolution", "exact_inverse", "exact_solve", "scaled_integers"]


@dataclass(frozen=True)
class ExactColumn:
    """A column of exact values ``ints[i] / 2**shift``."""

    ints: list[int]
    shift: int

    def power(self, k: int) -> ExactColumn:
        """The column raised element-wise to the power k, still exact."""
        return ExactColumn([v**k for v in self.ints], self.shift * k)


@dataclass(frozen=True)
class ExactSolution:
    """What the exact solve hands back, each value rounded once to float64."""

    coef: np.ndarray
    resid: np.ndarray
    fitted: np.ndarray
    ssr: float
    tss: float
    r2: float
    inv_diag: np.ndarray
    inv: np.ndarray


def scaled_integers(values: np.ndarray) -> ExactColumn:
    """Write a float64 vector exactly as integers over one common power of two."""
    pairs = [float(v).as_integer_ratio() for v in values]
    shift = max((d.bit_length() - 1 for _, d in pairs), default=0)
    return ExactColumn([n << (shift - (d.bit_length() - 1)) for n, d in pairs], shift)


def _dot(a: list[int], b: list[int]) -> int:
    return sum(map(operator.mul, a, b))


def _gauss_jordan(gram: list[list[int]], rhs: list[int]
                  ) -> tuple[list[Fraction], list[list[Fraction]]]:
    """Solve ``gram · γ = rhs`` exactly; also return ``gram⁻¹``.

    Raises ZeroDivisionError when gram is exactly singular.
    """
    p = len(gram)
    rows = [
        [Fraction(v) for v in gram[i]]
        + [Fraction(rhs[i])]
        + [Fraction(int(i == j)) for j in range(p)]
        for i in range(p)
    ]
    _eliminate(rows, p)
    gamma = [rows[i][p] for i in range(p)]
    inverse = [rows[i][p + 1:] for i in range(p)]
    return gamma, inverse


def _eliminate(rows: list[list[Fraction]], p: int) -> None:
    """Gauss-Jordan on the first p columns of an augmented matrix, in place."""
    for col in range(p):
        pivot = next((r for r in range(col, p) if rows[r][col] != 0), None)
        if pivot is None:
            raise ZeroDivisionError("exactly singular normal equations")
        rows[col], rows[pivot] = rows[pivot], rows[col]
        inv = 1 / rows[col][col]
        rows[col] = [v * inv for v in rows[col]]
        prow = rows[col]
        for r in range(p):
            if r != col and rows[r][col] != 0:
                f = rows[r][col]
                rows[r] = [a - f * b for a, b in zip(rows[r], prow, strict=True)]


def exact_inverse(matrix: list[list[Fraction]]) -> list[list[Fraction]]:
    """Inverse of a square matrix of exact rationals; ZeroDivisionError when singular."""
    p = len(matrix)
    rows = [list(matrix[i]) + [Fraction(int(i == j)) for j in range(p)] for i in range(p)]
    _eliminate(rows, p)
    return [row[p:] for row in rows]


def exact_solve(cols: list[ExactColumn], y: ExactColumn, centred: bool) -> ExactSolution:
    """Least squares of y on the exact columns; R² centred about the mean or about zero."""
    n, p = len(y.ints), len(cols)
    a = [c.ints for c in cols]
    gram = [[_dot(a[i], a[j]) if j >= i else 0 for j in range(p)] for i in range(p)]
    for i in range(p):
        for j in range(i):
            gram[i][j] = gram[j][i]
    rhs = [_dot(col, y.ints) for col in a]
    gamma, g_inv = _gauss_jordan(gram, rhs)

    # One common denominator keeps the residuals in integer arithmetic.
    den = math.lcm(*(g.denominator for g in gamma))
    nums = [g.numerator * (den // g.denominator) for g in gamma]
    scale_y = 1 << y.shift
    fitted_int = [sum(a[j][i] * nums[j] for j in range(p)) for i in range(n)]
    resid_int = [yi * den - fi for yi, fi in zip(y.ints, fitted_int, strict=True)]
    denom = den * scale_y
    resid = np.array([r / denom for r in resid_int])  # int / int rounds correctly
    fitted = np.array([f / denom for f in fitted_int])
    ssr = Fraction(sum(r * r for r in resid_int), denom * denom)
    sum_y = sum(y.ints)
    sum_y2 = sum(v * v for v in y.ints)
    if centred:
        tss = Fraction(n * sum_y2 - sum_y * sum_y, n * scale_y * scale_y)
    else:
        tss = Fraction(sum_y2, scale_y * scale_y)
    r2 = float(1 - ssr / tss) if tss != 0 else math.nan
    # β_j = γ_j · 2^(shift_j − shift_y); diag (XᵀX)⁻¹_jj = 4^shift_j · (GᵀG)⁻¹_jj.
    coef = np.array(
        [float(g * Fraction(2) ** (c.shift - y.shift)) for g, c in zip(gamma, cols, strict=True)]
    )
    # (XᵀX)⁻¹_jk = 2^(shift_j + shift_k) · (GᵀG)⁻¹_jk, each entry rounded once.
    inv = np.array([[float(g_inv[j][k] * (1 << (cols[j].shift + cols[k].shift)))
                     for k in range(p)] for j in range(p)])
    return ExactSolution(coef, resid, fitted, float(ssr), float(tss), r2, np.diag(inv).copy(),
                         inv)
