"""Ordinary least squares, accurate to the last digit float64 can hold.

Two ways to the same answer, chosen by size:

* **small problems** (rows × parameters ≤ ``EXACT_LIMIT``): the normal equations
  are solved exactly in rational arithmetic on the binary values of the data
  (polynomial terms are exact powers of the data), and every statistic is
  rounded to float64 once. This is what lets ill-conditioned designs such as
  a degree-10 polynomial keep 13+ correct digits.
* **large problems**: XᵀX is accumulated in double-double arithmetic and the
  small p × p matrix is inverted exactly; the solution is then refined with the
  residual ``y − Xβ`` and the product ``Xᵀr`` carried in double-double (and
  polynomial powers carried with their rounding error). Sums of squares are
  accumulated the same way. Cost stays O(n·p²), vectorised: 200,000 rows × 6
  parameters take about 0.3 s.

Both paths first check the inputs and the numerical rank of the scaled design
(singular values from the float QR), so a collinear design is refused with the
names of the attributes involved rather than fitted.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from fractions import Fraction
from functools import cached_property

import numpy as np

from sheetfit.errors import CollinearError, DataError, SettingError
from sheetfit.fit._dd import (
    dd_dot,
    dd_gram,
    dd_powers,
    dd_residual,
    dd_sum,
    dd_sum_squares,
    two_sum,
)
from sheetfit.fit._exact import ExactColumn, exact_inverse, exact_solve, scaled_integers

__all__ = ["DEGREE_RANGE", "EXACT_LIMIT", "RANK_TOL", "LeastSquares", "LeastSquaresResult"]

#: Problems with rows × parameters up to this are solved in exact rational arithmetic.
EXACT_LIMIT = 5000
#: A scaled design whose smallest/largest singular value ratio is at or below this is
#: treated as rank deficient (about 450 float64 epsilons: the columns cannot be told apart).
RANK_TOL = 1e-13
#: Allowed polynomial degrees (inclusive).
DEGREE_RANGE = (1, 10)
_MAX_REFINE = 8
_EPS = float(np.finfo(np.float64).eps)


class LeastSquares:
    """Least-squares line, plane or polynomial; the constructor only stores the settings."""

    def __init__(self, intercept: bool = True, degree: int = 1) -> None:
        self.intercept = intercept
        self.degree = degree

    def _check_settings(self) -> None:
        if not isinstance(self.intercept, bool | np.bool_):
            raise SettingError(
                f"setting intercept: allowed true or false, given {self.intercept!r}"
            )
        lo, hi = DEGREE_RANGE
        deg = self.degree
        if isinstance(deg, bool) or not isinstance(deg, int | np.integer) or not lo <= deg <= hi:
            raise SettingError(
                f"setting degree: allowed a whole number from {lo} to {hi}, given {deg!r}"
            )

    def fit(
        self, X: np.ndarray, y: np.ndarray, names: Sequence[str] | None = None
    ) -> LeastSquaresResult:
        """Fit y on the attribute columns of X and return the fitted result."""
        self._check_settings()
        intercept, degree = bool(self.intercept), int(self.degree)
        X, y, names = _check_arrays(X, y, names)
        n, m = X.shape
        if degree > 1 and m != 1:
            raise DataError(
                f"degree {degree} needs exactly one attribute, given {m} ({', '.join(names)})",
                hint="use degree 1 with several attributes, or one attribute for a polynomial",
            )
        terms = _term_names(names, intercept, degree)
        p = len(terms)
        if n < p:
            raise DataError(
                f"{n} rows of data but the model has {p} parameters ({', '.join(terms)})",
                hint=f"supply at least {p} rows or fewer terms",
            )
        if intercept:
            for j, name in enumerate(names):
                if n and np.all(X[:, j] == X[0, j]):
                    raise DataError(
                        f"attribute {name} is constant (every row is {X[0, j]:g}); "
                        "with an intercept it cannot be estimated",
                        hint="remove it, or fit without intercept",
                    )
        design = _design(X, intercept, degree)
        sol = _solve(X, y, design, intercept, degree, terms, is_poly=degree > 1)
        return LeastSquaresResult(
            coef=sol.coef,
            terms=terms,
            names=names,
            intercept=intercept,
            degree=degree,
            design=design,
            y=y,
            solution=sol,
        )


@dataclass(frozen=True)
class _Solution:
    """Accurately computed primitives from which the result's statistics are derived."""

    coef: np.ndarray
    fitted: np.ndarray
    resid: np.ndarray
    ssr: float
    tss: float
    r2: float
    inv_diag: np.ndarray
    condition_number: float
    method_note: str
    solver: str


def _readonly(a: np.ndarray) -> np.ndarray:
    a.setflags(write=False)
    return a


class LeastSquaresResult:
    """A fitted least-squares model: coefficients, and statistics computed on first use."""

    def __init__(
        self,
        *,
        coef: np.ndarray,
        terms: list[str],
        names: list[str],
        intercept: bool,
        degree: int,
        design: np.ndarray,
        y: np.ndarray,
        solution: _Solution,
    ) -> None:
        self.coef_ = _readonly(np.array(coef, dtype=np.float64))
        self.terms = list(terms)
        self.names = list(names)
        self.intercept = intercept
        self.degree = degree
        self.design = _readonly(design)
        self.y = _readonly(y)
        self._sol = solution

    def __repr__(self) -> str:
        coefs = ", ".join(f"{t}={c:.6g}" for t, c in zip(self.terms, self.coef_, strict=True))
        return f"LeastSquaresResult(n={self.n}, {coefs}, r2={self.r2:.6g})"

    @cached_property
    def n(self) -> int:
        """Number of rows fitted."""
        return int(self.design.shape[0])

    @cached_property
    def p(self) -> int:
        """Number of parameters (intercept included)."""
        return int(self.design.shape[1])

    @cached_property
    def df_resid(self) -> int:
        """Residual degrees of freedom, n − p."""
        return self.n - self.p

    @cached_property
    def fitted(self) -> np.ndarray:
        """Fitted values Xβ (each accurate to float64 rounding)."""
        return _readonly(self._sol.fitted)

    @cached_property
    def resid(self) -> np.ndarray:
        """Residuals y − Xβ (each accurate to float64 rounding)."""
        return _readonly(self._sol.resid)

    @cached_property
    def ssr(self) -> float:
        """Residual sum of squares Σ resid²."""
        return self._sol.ssr

    @cached_property
    def tss(self) -> float:
        """Total sum of squares: about the mean with intercept, about zero without."""
        return self._sol.tss

    @cached_property
    def ess(self) -> float:
        """Explained (regression) sum of squares, tss − ssr."""
        return self.tss - self.ssr

    @cached_property
    def rmse(self) -> float:
        """Root mean squared residual, sqrt(ssr / n)."""
        return math.sqrt(self.ssr / self.n)

    @cached_property
    def resid_sd(self) -> float:
        """Residual standard deviation sqrt(ssr / (n − p)); nan when n == p."""
        return math.sqrt(self.ssr / self.df_resid) if self.df_resid > 0 else math.nan

    @cached_property
    def r2_uncentred(self) -> bool:
        """True when R² is taken about zero (no intercept), False when about the mean."""
        return not self.intercept

    @cached_property
    def r2(self) -> float:
        """R² = 1 − ssr / tss (uncentred when there is no intercept)."""
        return self._sol.r2

    @cached_property
    def xtx_inv_diag(self) -> np.ndarray:
        """Diagonal of (XᵀX)⁻¹, the unscaled variances of the coefficients."""
        return _readonly(self._sol.inv_diag)

    @cached_property
    def coef_se(self) -> np.ndarray:
        """Standard errors of the coefficients, resid_sd · sqrt(diag (XᵀX)⁻¹)."""
        return _readonly(
            np.sqrt(self.ssr / self.df_resid * self.xtx_inv_diag)
            if self.df_resid > 0
            else np.full(self.p, math.nan)
        )

    @cached_property
    def condition_number(self) -> float:
        """2-norm condition number of the design with columns scaled to unit length."""
        return self._sol.condition_number

    @cached_property
    def solver(self) -> str:
        """Which path solved it: "exact" (rational arithmetic) or "refined" (float + refinement)."""
        return self._sol.solver

    @cached_property
    def method_note(self) -> str:
        """How the solution was obtained and checked, in one sentence."""
        return self._sol.method_note

    def predict(self, X_new: np.ndarray) -> np.ndarray:
        """Fitted values for new attribute rows (same columns as in fit); never refits."""
        X_new = np.asarray(X_new, dtype=np.float64)
        if X_new.ndim == 1:
            X_new = X_new.reshape(-1, 1) if len(self.names) == 1 else X_new.reshape(1, -1)
        if X_new.ndim != 2 or X_new.shape[1] != len(self.names):
            raise DataError(
                f"new rows need {len(self.names)} attribute columns ({', '.join(self.names)}), "
                f"given shape {X_new.shape}"
            )
        bad = ~np.isfinite(X_new)
        if bad.any():
            i, j = np.argwhere(bad)[0]
            raise DataError(f"new row {i + 1}: attribute {self.names[j]} is not a finite number")
        d = _design(X_new, self.intercept, self.degree)
        hi, lo = dd_residual(np.zeros(d.shape[0]), d, -self.coef_)
        return hi + lo


def _check_arrays(
    X: np.ndarray, y: np.ndarray, names: Sequence[str] | None
) -> tuple[np.ndarray, np.ndarray, list[str]]:
    X = np.array(X, dtype=np.float64)
    y = np.array(y, dtype=np.float64)
    if X.ndim == 1:
        X = X.reshape(-1, 1)
    if X.ndim != 2 or y.ndim != 1:
        raise DataError(
            f"attributes must be a table and the response one column, "
            f"given shapes {X.shape} and {y.shape}"
        )
    if X.shape[0] != y.shape[0]:
        raise DataError(
            f"the response has {y.shape[0]} rows but the attributes have "
            f"{X.shape[0]}; they must cover the same rows"
        )
    m = X.shape[1]
    if m == 0:
        raise DataError("no attribute columns given")
    names = [f"x{j + 1}" for j in range(m)] if names is None else [str(s) for s in names]
    if len(names) != m:
        raise DataError(f"{len(names)} attribute names given for {m} attribute columns")
    if len(set(names)) != m:
        raise DataError(f"attribute names repeat: {', '.join(names)}")
    bad_y = np.flatnonzero(~np.isfinite(y))
    if bad_y.size:
        raise DataError(f"row {bad_y[0] + 1}: the response is not a finite number ({y[bad_y[0]]})")
    bad = np.argwhere(~np.isfinite(X))
    if bad.size:
        i, j = bad[0]
        raise DataError(f"row {i + 1}: attribute {names[j]} is not a finite number ({X[i, j]})")
    return X, y, names


def _term_names(names: list[str], intercept: bool, degree: int) -> list[str]:
    terms = ["intercept"] if intercept else []
    if degree == 1:
        return terms + names
    return terms + [names[0]] + [f"{names[0]}^{k}" for k in range(2, degree + 1)]


def _design(X: np.ndarray, intercept: bool, degree: int) -> np.ndarray:
    cols = [X[:, 0] ** k for k in range(1, degree + 1)] if degree > 1 else list(X.T)
    if intercept:
        cols.insert(0, np.ones(X.shape[0]))
    return np.column_stack(cols) if cols else np.empty((X.shape[0], 0))


def _fmt(v: float) -> str:
    return f"{v:.6g}"


def _collinear_error(
    null: np.ndarray, norms: np.ndarray, terms: list[str], is_poly: bool
) -> CollinearError:
    """Build the refusal from a null vector of the scaled design."""
    v = null / np.max(np.abs(null))
    involved = [j for j in range(len(v)) if abs(v[j]) >= 1e-3]
    w = v / norms  # the same relation in the original units
    kind = "terms" if is_poly else "attributes"
    named = [j for j in involved if terms[j] != "intercept"]
    if len(named) == 1:
        j = named[0]
        if np.all(norms[j] == 0) or len(involved) == 1:
            return CollinearError(f"attribute {terms[j]} is zero in every row", hint="remove it")
    target = named[-1] if named else involved[-1]
    relation = ""
    for j in involved:
        if j == target:
            continue
        c = -w[j] / w[target]
        mag = _fmt(abs(c))
        if terms[j] == "intercept":
            piece = mag
        else:
            piece = terms[j] if mag == "1" else f"{mag}·{terms[j]}"
        sign = "−" if c < 0 else "+"
        relation += f" {sign} {piece}" if relation else ("−" if c < 0 else "") + piece
    relation = f"{terms[target]} = {relation}"
    listed = [terms[j] for j in named]
    who = (
        " and ".join(listed)
        if len(listed) <= 2
        else (", ".join(listed[:-1]) + " and " + listed[-1])
    )
    return CollinearError(
        f"{kind} {who} are collinear ({relation})",
        hint="remove one of them; their coefficients cannot be told apart",
    )


def _solve(
    X: np.ndarray,
    y: np.ndarray,
    design: np.ndarray,
    intercept: bool,
    degree: int,
    terms: list[str],
    is_poly: bool,
) -> _Solution:
    n, p = design.shape
    norms = np.sqrt(np.einsum("ij,ij->j", design, design))
    if np.any(norms == 0):
        j = int(np.flatnonzero(norms == 0)[0])
        raise CollinearError(f"attribute {terms[j]} is zero in every row", hint="remove it")
    scaled = design / norms
    r = np.linalg.qr(scaled, mode="r")
    _, sv, vt = np.linalg.svd(r)
    cond = float(sv[0] / sv[-1]) if sv[-1] > 0 else math.inf
    if not sv[-1] > RANK_TOL * sv[0]:
        raise _collinear_error(vt[-1], norms, terms, is_poly)
    if n * p <= EXACT_LIMIT:
        try:
            return _solve_exact(X, y, intercept, degree, cond)
        except ZeroDivisionError:
            raise _collinear_error(vt[-1], norms, terms, is_poly) from None
    design_lo = None
    if degree > 1:  # the float64 powers are rounded; carry what rounding drops
        _, lo = dd_powers(X[:, 0], degree)
        design_lo = np.column_stack([np.zeros(n), lo]) if intercept else lo
    return _solve_float(y, design, design_lo, intercept, cond)


def _solve_exact(
    X: np.ndarray, y: np.ndarray, intercept: bool, degree: int, cond: float
) -> _Solution:
    n = X.shape[0]
    if degree > 1:
        base = scaled_integers(X[:, 0])
        cols = [base.power(k) for k in range(1, degree + 1)]
    else:
        cols = [scaled_integers(X[:, j]) for j in range(X.shape[1])]
    if intercept:
        cols.insert(0, ExactColumn([1] * n, 0))
    s = exact_solve(cols, scaled_integers(y), centred=intercept)
    note = (
        f"normal equations solved exactly in rational arithmetic on the float64 data "
        f"(rows × parameters = {n * len(cols)} ≤ {EXACT_LIMIT}); each statistic rounded once"
    )
    return _Solution(s.coef, s.fitted, s.resid, s.ssr, s.tss, s.r2, s.inv_diag, cond, note, "exact")


def _solve_float(
    y: np.ndarray,
    design: np.ndarray,
    design_lo: np.ndarray | None,
    intercept: bool,
    cond: float,
) -> _Solution:
    n, p = design.shape
    # Corrections solve XᵀX δ = Xᵀr with XᵀX accumulated in double-double and inverted
    # exactly (p × p is small), so refinement converges even when cond(X)² ≫ 1/eps.
    g_hi, g_lo = dd_gram(design, design_lo)
    gram = [[Fraction(g_hi[j, k]) + Fraction(g_lo[j, k]) for k in range(p)] for j in range(p)]
    try:
        g_inv = exact_inverse(gram)
    except ZeroDivisionError:
        raise CollinearError("the attributes are collinear (singular normal equations)") from None

    beta = np.zeros(p)  # the first step is then the normal-equations solution itself
    steps, last, size = 0, math.inf, math.inf
    for steps in range(1, _MAX_REFINE + 1):
        hi, lo = dd_residual(y, design, beta, design_lo)
        lo_cols = [None] * p if design_lo is None else list(design_lo.T)
        g = [Fraction(dd_dot(design[:, j], hi, lo, lo_cols[j])) for j in range(p)]
        delta = np.array([float(sum(a * b for a, b in zip(row, g, strict=True))) for row in g_inv])
        beta = beta + delta
        size = float(np.max(np.abs(delta) / np.maximum(np.abs(beta), np.finfo(float).tiny)))
        if size <= _EPS / 4 or size >= last:
            break
        last = size
    hi, lo = dd_residual(y, design, beta, design_lo)
    f, e = two_sum(y, -hi)
    fitted = f + (e - lo)
    ssr = dd_sum_squares(hi, lo)
    if intercept:
        mean = dd_sum(y) / n
        d_hi, d_lo = two_sum(y, np.full(n, -mean))
        tss = dd_sum_squares(d_hi, d_lo)
    else:
        tss = dd_sum_squares(y, np.zeros(n))
    r2 = 1.0 - ssr / tss if tss > 0 else math.nan
    inv_diag = np.array([float(g_inv[j][j]) for j in range(p)])
    note = (
        f"normal equations with XᵀX accumulated in double-double and inverted exactly, "
        f"{steps} refinement step(s) with double-double residuals (last relative correction "
        f"{size:.1e}); rank checked by QR of the unit-scaled columns"
    )
    return _Solution(beta, fitted, hi + 0.0, ssr, tss, r2, inv_diag, cond, note, "refined")
