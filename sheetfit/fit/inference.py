"""How sure a least-squares fit is: standard errors, intervals, influence, diagnostics.

Everything here is derived from a fitted :class:`~sheetfit.fit.leastsq.LeastSquaresResult`
with the textbook formulas (e.g. Weisberg, *Applied Linear Regression*, 4th ed., ch. 3
and 9; Long and Ervin (2000) for HC3; Koenker (1981) for the studentized
Breusch–Pagan statistic). The result supplies (XᵀX)⁻¹ with each entry rounded once,
the residuals and the residual sum of squares accurate to float64; leverages come
from a Householder QR of a well-conditioned basis of the same column space (the
attributes standardized, powers of the standardized x for a polynomial), which keeps
them accurate when XᵀX is ill conditioned; new rows' leverages use the same basis.

Numeric code only: arrays in, arrays out, no workbook knowledge.
"""

from __future__ import annotations

import math
import weakref
from dataclasses import dataclass

import numpy as np

from sheetfit.fit import checks
from sheetfit.fit._arrays import readonly, row_blocks
from sheetfit.fit._dd import dd_residual
from sheetfit.fit.distributions import chi2_sf, f_sf, t_ppf, t_sf
from sheetfit.fit.leastsq import LeastSquaresResult, _design

__all__ = [
    "CoefTable",
    "Influence",
    "Intervals",
    "Overall",
    "breusch_pagan",
    "coef_table",
    "influence",
    "influence_rows",
    "intervals",
    "leverage",
    "overall",
    "t_quantile",
    "vif",
    "xtx_inverse",
]

#: A leverage this close to 1 means the row is fitted exactly whatever its value:
#: its leave-one-out quantities (studentized residual, Cook's distance, PRESS) are
#: undefined and reported as nan.
LEVERAGE_ONE = 1 - 1e-10


@dataclass(frozen=True)
class CoefTable:
    """Per coefficient: standard error, t, two-sided p-value, interval, HC3 standard error."""

    level: float
    se: np.ndarray
    t: np.ndarray
    p: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    hc3_se: np.ndarray


@dataclass(frozen=True)
class Overall:
    """Adjusted R² and the F test of all terms against the intercept-only (or zero) model."""

    adj_r2: float
    f: float
    f_p: float
    df_model: int
    df_resid: int


@dataclass(frozen=True)
class Influence:
    """Per data row: leverage, internally studentized residual, Cook's distance, PRESS."""

    leverage: np.ndarray
    student: np.ndarray
    cooks: np.ndarray
    press: np.ndarray
    loo_rmse: float


@dataclass(frozen=True)
class Intervals:
    """Per new row: prediction, leverage, interval for the mean and for one new value."""

    level: float
    pred: np.ndarray
    leverage: np.ndarray
    mean_lo: np.ndarray
    mean_hi: np.ndarray
    obs_lo: np.ndarray
    obs_hi: np.ndarray


def xtx_inverse(res: LeastSquaresResult) -> np.ndarray:
    """(XᵀX)⁻¹ of the design, intercept column included (p × p)."""
    return res.xtx_inv_


def t_quantile(level: float, df: int) -> float:
    """Two-sided Student t quantile: what T.INV.2T(1 − level, df) gives."""
    if df <= 0:
        return math.nan
    return float(t_ppf(1 - (1 - level) / 2, df))


def coef_table(res: LeastSquaresResult, level: float = 0.95) -> CoefTable:
    """Classical and HC3 standard errors, t statistics, p-values and confidence intervals."""
    level = checks.check_level(level)
    df = res.df_resid_
    coef, se = np.asarray(res.coef_), np.asarray(res.coef_se_)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = coef / se
    p = 2 * t_sf(np.abs(t), df) if df > 0 else np.full(res.p_, math.nan)
    q = t_quantile(level, df)
    return CoefTable(level, readonly(se), readonly(t), readonly(np.asarray(p, dtype=float)),
                     readonly(coef - q * se), readonly(coef + q * se), readonly(_hc3(res)))


#: Rows of the model's basis factored at a time (``_blocks``): the QR of a million-row
#: design in one piece held ~230 MiB of copies.
_QR_ROWS = 1 << 16


def _blocks(n: int) -> list[tuple[int, int]]:
    """Row ranges of about ``_QR_ROWS`` rows (nearly equal, so none is shorter than the
    basis is wide); one range when n fits in one."""
    return row_blocks(n, _QR_ROWS)


def _hc3(res: LeastSquaresResult) -> np.ndarray:
    """HC3: (XᵀX)⁻¹ Xᵀ diag(eᵢ² / (1 − hᵢ)²) X (XᵀX)⁻¹ (MacKinnon and White 1985)."""
    h = _leverage(res)
    e = np.asarray(res.resid_)
    inv = np.asarray(res.xtx_inv_)
    cov_diag = np.zeros(res.p_)
    for a, b in _blocks(res.n_):
        m = res.design_rows(a, b) @ inv
        with np.errstate(divide="ignore", invalid="ignore"):
            w = np.where(h[a:b] < LEVERAGE_ONE, (e[a:b] / (1 - h[a:b])) ** 2, math.nan)
        cov_diag += np.einsum("ij,i,ij->j", m, w, m)
    return np.sqrt(cov_diag)


class _Basis:
    """Rows of a well-conditioned basis of the model's column space (fitted rows, or new).

    With an intercept the space of 1, x, …, xᵈ (or 1, x₁, …, xₘ) is also spanned by the
    attributes centred and scaled by the fitted rows' mean and SD (for a polynomial: the
    powers of the standardized x), whose columns are far less collinear than raw powers
    of an x far from 0. Without an intercept centring would change the space, so the
    columns are only scaled to unit length. ``centred`` forces the first kind (the space
    with a constant added), as Breusch–Pagan's auxiliary regression needs.
    """

    def __init__(self, res: LeastSquaresResult, centred: bool | None = None) -> None:
        self.res = res
        self.centred = res.intercept_ if centred is None else centred
        self.first = int(res.intercept_)
        self.m = 1 if res.degree_ > 1 else len(res.names_)
        # column statistics one design column at a time (never the whole design)
        if not self.centred:
            norms = np.array([np.linalg.norm(res.design_column(j)) for j in range(res.p_)])
            self.norms = np.where(norms > 0, norms, 1.0)
            return
        stats = [(c.mean(), c.std()) for c in
                 (res.design_column(self.first + j) for j in range(self.m))]
        self.mean = np.array([m for m, _ in stats])
        sd = np.array([s for _, s in stats])
        self.sd = np.where(sd > 0, sd, 1.0)

    def rows(self, a: int, b: int) -> np.ndarray:
        """Basis rows of fitted rows a … b − 1."""
        return self._of(self.res.design_rows(a, b))

    def new(self, X: np.ndarray) -> np.ndarray:
        """Basis rows of new attribute rows ``X``."""
        res = self.res
        return self._of(_design(X, res.intercept_, res.degree_))

    def _of(self, d: np.ndarray) -> np.ndarray:
        if not self.centred:
            return d / self.norms
        z = (d[:, self.first:self.first + self.m] - self.mean) / self.sd
        cols = ([z[:, 0] ** k for k in range(1, self.res.degree_ + 1)] if self.res.degree_ > 1
                else list(z.T))
        return np.column_stack([np.ones(z.shape[0]), *cols])


def _factor(res: LeastSquaresResult) -> tuple[_Basis, list[tuple[int, int]], list[np.ndarray],
                                                np.ndarray | None, np.ndarray]:
    """The Householder QR of the basis, a block of rows at a time (TSQR: each block's R,
    then the QR of those R stacked): the basis, the blocks, their R, the Q of the stacked
    R (None for one block) and the final R."""
    basis = _Basis(res)
    blocks = _blocks(res.n_)
    rs = [np.asarray(np.linalg.qr(basis.rows(a, b), mode="r")) for a, b in blocks]
    if len(rs) == 1:
        return basis, blocks, rs, None, rs[0]
    top, r = np.linalg.qr(np.vstack(rs))
    return basis, blocks, rs, top, r


#: Leverages already computed, by fitted result (influence, HC3 and the words of a sheet
#: all need them; one refresh factored a million-row design three times for them).
_LEVERAGES: weakref.WeakKeyDictionary[LeastSquaresResult, np.ndarray] = (
    weakref.WeakKeyDictionary())


def _leverage(res: LeastSquaresResult) -> np.ndarray:
    """Diagonal of the hat matrix, Σⱼ Qᵢⱼ² with Q from the Householder QR of a
    well-conditioned basis of the same column space (``_Basis``). Above ``_QR_ROWS`` rows
    Q is put together block by block (each block's own Q times its rows of the stacked
    R's Q): the same backward-stable factorisation without Q held whole. Computed once per
    result (read-only)."""
    found = _LEVERAGES.get(res)
    if found is None or len(found) != res.n_:
        found = _LEVERAGES[res] = readonly(_leverage_of(res))
    return found


def leverage(res: LeastSquaresResult) -> np.ndarray:
    """The leverage of every data row (the hat matrix's diagonal), read-only, computed
    once per result."""
    return _leverage(res)


def _leverage_of(res: LeastSquaresResult) -> np.ndarray:
    basis, blocks, rs, top, _ = _factor(res)
    h = np.empty(res.n_)
    off = 0
    for (a, b), r in zip(blocks, rs, strict=True):
        q, _ = np.linalg.qr(basis.rows(a, b))  # the block's factorisation again
        if top is not None:
            q = q @ top[off:off + r.shape[0]]
            off += r.shape[0]
        h[a:b] = np.einsum("ij,ij->i", q, q)
    return h


def _new_leverage(res: LeastSquaresResult, X_new: np.ndarray) -> np.ndarray:
    """x₀ᵀ(XᵀX)⁻¹x₀ for new rows, as ‖R⁻ᵀb₀‖² with B = QR the basis of ``_Basis``.

    Evaluating the quadratic form with (XᵀX)⁻¹ directly cancels catastrophically on
    collinear designs (a cubic in x ≈ 1000: 83 % off; StRD Filip: 17-fold).
    """
    basis, *_, r = _factor(res)
    u = _lower_solve(r.T, basis.new(X_new).T)
    return np.einsum("ij,ij->j", u, u)


def _lower_solve(low: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve ``low @ u = b`` for a lower-triangular ``low`` by forward substitution, every
    right-hand side at once (p steps; scipy.linalg's import alone costs a small book
    a third of a second)."""
    p = low.shape[0]
    u = np.empty((p, b.shape[1]))
    for i in range(p):
        u[i] = (b[i] - low[i, :i] @ u[:i]) / low[i, i]
    return u


def overall(res: LeastSquaresResult) -> Overall:
    """Adjusted R² and the overall F statistic with its p-value (F.DIST.RT)."""
    n, p, df = res.n_, res.p_, res.df_resid_
    df_model = p - int(res.intercept_)
    r2 = res.r2_
    if df <= 0 or math.isnan(r2):
        return Overall(math.nan, math.nan, math.nan, df_model, df)
    base = n - 1 if res.intercept_ else n
    adj = 1 - (1 - r2) * base / df
    if df_model <= 0 or res.ssr_ == 0:
        f = math.inf if df_model > 0 else math.nan
        return Overall(adj, f, 0.0 if df_model > 0 else math.nan, df_model, df)
    f = (res.ess_ / df_model) / (res.ssr_ / df)
    return Overall(adj, f, float(f_sf(f, df_model, df)), df_model, df)


def breusch_pagan(res: LeastSquaresResult) -> tuple[float, float]:
    """Koenker's studentized Breusch–Pagan test: LM = n·R² of e² on the terms, χ²(p − 1).

    The auxiliary regression always has an intercept (added when the model has none).
    Returns (LM, p-value); nan when the residuals are all zero or there is no term.

    Only the column space of the auxiliary design matters, so it is built from the
    attributes centred and scaled to unit SD (for a polynomial: the powers of the
    standardized x), with a constant column, each column scaled to unit length. The raw
    powers of an x far from 0 are so collinear (condition number 5e16 for a cubic in
    x ≈ 1000) that a least-squares solve on them loses the 4th digit of LM. The
    residual of e² − mean(e²) off that space is the last diagonal entry of R in the
    Householder QR of the design with that column appended; R is found block by block
    (the R of earlier rows stacked on the next block of ``_blocks``, factored again), so
    no copy of the whole design is made: on a million rows the one-piece QR held
    ~330 MiB of copies.
    """
    n = res.n_
    k = res.degree_ if res.degree_ > 1 else len(res.names_)  # auxiliary terms besides 1
    e = np.asarray(res.resid_)
    e2_mean = float(np.mean(e * e))
    blocks = _blocks(n)
    tss = 0.0
    for a, b in blocks:
        dev = e[a:b] ** 2 - e2_mean
        tss += float(dev @ dev)
    if k == 0 or tss == 0:
        return math.nan, math.nan
    basis = _Basis(res, centred=True)

    def block(a: int, b: int) -> np.ndarray:
        return np.column_stack([basis.rows(a, b), e[a:b] ** 2 - e2_mean])

    sq = np.zeros(k + 2)  # each column's sum of squares, for the unit-length scaling
    for a, b in blocks:
        sq += np.sum(block(a, b) ** 2, axis=0)
    scale = 1.0 / np.sqrt(np.where(sq > 0, sq, 1.0))
    r: np.ndarray | None = None
    for a, b in blocks:
        piece = block(a, b) * scale
        r = np.asarray(np.linalg.qr(piece if r is None else np.vstack([r, piece]), mode="r"))
    assert r is not None
    left = float(r[k + 1, k + 1]) ** 2 if r.shape[0] > k + 1 else 0.0  # Σ residual², scaled
    # the dev column was scaled to unit length (tss is 1); R² lies in [0, 1], rounding
    # aside (a model with no sign of fanning out can give 1 − left = −1e-16)
    lm = n * min(1.0, max(0.0, 1 - left))
    return lm, float(chi2_sf(lm, k))


def vif(res: LeastSquaresResult) -> np.ndarray:
    """Variance inflation factor of each non-constant term.

    With an intercept, VIFⱼ = (XᵀX)⁻¹ⱼⱼ · Σ(xⱼ − x̄ⱼ)² (the centred R² of term j on the
    others); without one, (XᵀX)⁻¹ⱼⱼ · Σxⱼ² (uncentred), as a regression through the
    origin defines it.
    """
    first = int(res.intercept_)
    inv = np.diag(np.asarray(res.xtx_inv_))[first:]
    ss = np.empty(res.p_ - first)
    for j in range(first, res.p_):  # one design column at a time (pairwise sums)
        c = res.design_column(j)
        if res.intercept_:
            c -= c.mean()
        ss[j - first] = float(np.dot(c, c))
    return readonly(inv * ss)


def influence(res: LeastSquaresResult) -> Influence:
    """Leverage, internally studentized residuals, Cook's distance, PRESS residuals.

    Rows with leverage 1 (fitted exactly whatever their value) get nan for the
    leave-one-out quantities, and then the leave-one-out RMSE is nan too.
    """
    h = _leverage(res)
    student, cooks, press = influence_rows(res, 0, res.n_)
    ok = h < LEVERAGE_ONE
    loo = math.sqrt(float(np.mean(press**2))) if bool(ok.all()) else math.nan
    return Influence(h, readonly(student), readonly(cooks), readonly(press), loo)


def influence_rows(res: LeastSquaresResult, a: int, b: int
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The studentized residuals, Cook's distances and PRESS residuals of rows a … b − 1
    (element-wise: the same numbers as :func:`influence` gives those rows)."""
    h = _leverage(res)[a:b]
    e = np.asarray(res.resid_)[a:b]
    s = res.resid_sd_
    p = res.p_
    ok = h < LEVERAGE_ONE
    with np.errstate(divide="ignore", invalid="ignore"):
        one_minus = np.where(ok, 1 - h, math.nan)
        student = e / (s * np.sqrt(one_minus))
        cooks = student**2 * h / (p * one_minus)
        press = e / one_minus
    return student, cooks, press


def intervals(res: LeastSquaresResult, X_new: np.ndarray, level: float = 0.95) -> Intervals:
    """Point prediction, confidence interval for the mean, prediction interval for one value.

    x₀ᵀ(XᵀX)⁻¹x₀ is the new row's leverage; the half-widths are
    t · s · sqrt(lev) (mean) and t · s · sqrt(1 + lev) (one new value), t = T.INV.2T(1 − level, n − p).
    """
    level = checks.check_level(level)
    X_new = checks.new_rows(X_new, res.names_)
    d = _design(X_new, res.intercept_, res.degree_)
    hi, lo = dd_residual(np.zeros(d.shape[0]), d, -np.asarray(res.coef_))
    pred = hi + lo
    lev = _new_leverage(res, X_new)
    q = t_quantile(level, res.df_resid_)
    s = res.resid_sd_
    half_mean = q * s * np.sqrt(lev)
    half_obs = q * s * np.sqrt(1 + lev)
    return Intervals(level, readonly(pred), readonly(lev), readonly(pred - half_mean),
                     readonly(pred + half_mean), readonly(pred - half_obs),
                     readonly(pred + half_obs))
