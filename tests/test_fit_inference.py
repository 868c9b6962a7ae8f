"""Inference for least squares (fit/inference.py) against statsmodels, NIST StRD and Anscombe."""

from __future__ import annotations

import csv
import inspect
import math
from fractions import Fraction

import numpy as np
import pytest
import statsmodels.api as sm
from reference.strd import REFERENCE_DIR, lre, read_strd, strd_files
from statsmodels.stats.diagnostic import het_breuschpagan
from statsmodels.stats.outliers_influence import variance_inflation_factor

from sheetfit.fit import LeastSquares, leastsq
from sheetfit.fit.inference import (
    breusch_pagan,
    coef_table,
    influence,
    influence_rows,
    intervals,
    overall,
    vif,
    xtx_inverse,
)

# statsmodels (test-only reference) solves through a pseudo-inverse in float64; on these
# well-conditioned seeded designs its own error is about cond·eps ≈ 1e-13 or less, so
# 1e-9 relative leaves ample margin for its rounding while a wrong formula (a wrong
# degrees-of-freedom count, a missing (1 − h) factor, centring) changes digits 1–3.
RTOL = 1e-9

CASES = {
    # name: (rows, attributes, intercept, degree)
    "four attributes": (60, 4, True, 1),
    "two attributes, no intercept": (35, 2, False, 1),
    "cubic": (40, 1, True, 3),
    "large, float path": (3000, 3, True, 1),
}


def _data(rows: int, attrs: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Seeded attributes and a response whose noise grows with the first attribute."""
    rng = np.random.default_rng(seed)
    X = rng.normal(loc=3.0, scale=1.5, size=(rows, attrs))
    noise = rng.normal(scale=0.3 + 0.2 * np.abs(X[:, 0]), size=rows)
    y = 2.0 + X @ np.linspace(0.8, -0.5, attrs) + 0.1 * X[:, 0] ** 2 + noise
    return X, y


def _design(X: np.ndarray, intercept: bool, degree: int) -> np.ndarray:
    cols = [X[:, 0] ** k for k in range(1, degree + 1)] if degree > 1 else list(X.T)
    if intercept:
        cols.insert(0, np.ones(X.shape[0]))
    return np.column_stack(cols)


def _close(ours: np.ndarray | float, ref: np.ndarray | float, what: str) -> None:
    np.testing.assert_allclose(ours, ref, rtol=RTOL, atol=0, err_msg=what)


@pytest.fixture(params=sorted(CASES))
def case(request: pytest.FixtureRequest):
    name = request.param
    rows, attrs, intercept, degree = CASES[name]
    X, y = _data(rows, attrs, seed=sorted(CASES).index(name) + 31)
    ours = LeastSquares(intercept=intercept, degree=degree).fit(X, y)
    assert (ours.solver_ == "refined") == name.endswith("float path")
    d = _design(X, intercept, degree)
    return name, X, y, d, ours, sm.OLS(y, d).fit()


def test_coefficient_table_matches_statsmodels(case) -> None:
    """Source: statsmodels OLS bse, tvalues, pvalues, conf_int(0.05), HC3_se."""
    _, _, _, d, ours, ref = case
    for level in (0.95, 0.9):
        tab = coef_table(ours, level)
        _close(tab.se, ref.bse, "standard errors")
        _close(tab.t, ref.tvalues, "t")
        _close(tab.p, ref.pvalues, "p")
        ci = ref.conf_int(alpha=1 - level)
        _close(tab.lo, ci[:, 0], "interval low")
        _close(tab.hi, ci[:, 1], "interval high")
        _close(tab.hc3_se, ref.HC3_se, "HC3")
    _close(xtx_inverse(ours), np.linalg.inv(d.T @ d), "(XᵀX)⁻¹")


def test_overall_fit_matches_statsmodels(case) -> None:
    """Source: statsmodels OLS rsquared_adj, fvalue, f_pvalue (uncentred without intercept)."""
    _, _, _, _, ours, ref = case
    ov = overall(ours)
    _close(ov.adj_r2, ref.rsquared_adj, "adjusted R²")
    _close(ov.f, ref.fvalue, "F")
    _close(ov.f_p, ref.f_pvalue, "F p-value")
    assert ov.df_model == ref.df_model and ov.df_resid == ref.df_resid


def test_influence_matches_statsmodels(case) -> None:
    """Source: statsmodels OLSInfluence hat_matrix_diag, resid_studentized_internal,
    cooks_distance; PRESS eᵢ/(1 − hᵢ) and its RMSE from those."""
    _, _, _, _, ours, ref = case
    inf = ref.get_influence()
    got = influence(ours)
    _close(got.leverage, inf.hat_matrix_diag, "leverage")
    _close(got.student, inf.resid_studentized_internal, "studentized residuals")
    _close(got.cooks, inf.cooks_distance[0], "Cook's distance")
    press = ref.resid / (1 - inf.hat_matrix_diag)
    _close(got.press, press, "PRESS residuals")
    _close(got.loo_rmse, math.sqrt(float(np.mean(press**2))), "leave-one-out RMSE")


def test_breusch_pagan_and_vif_match_statsmodels(case) -> None:
    """Source: statsmodels het_breuschpagan (robust=True, Koenker) and
    variance_inflation_factor (regression of each column of the design on the others)."""
    _, _, _, d, ours, ref = case
    exog = d if ours.intercept_ else sm.add_constant(d, has_constant="add")
    lm, lm_p, _, _ = het_breuschpagan(ref.resid, exog)
    got_lm, got_p = breusch_pagan(ours)
    _close(got_lm, lm, "Breusch–Pagan LM")
    _close(got_p, lm_p, "Breusch–Pagan p")
    first = int(ours.intercept_)
    # standardize=False: the auxiliary regression on the design's own columns, as
    # statsmodels computed it before 0.15 (0.15 centres the columns by default, which
    # without an intercept gives the centred VIF of a model that has one). With an
    # intercept both agree; without, the uncentred VIF is the one of the model fitted.
    expected = [_sm_vif(d, j) for j in range(first, d.shape[1])]
    if ours.intercept_:
        _close(expected, [variance_inflation_factor(d, j) for j in range(first, d.shape[1])],
               "statsmodels' VIF with and without standardizing")
    _close(vif(ours), expected, "VIF")


def _sm_vif(d: np.ndarray, j: int) -> float:
    """statsmodels' VIF on the unstandardized design (the only kind before 0.15)."""
    if "standardize" in inspect.signature(variance_inflation_factor).parameters:
        return float(variance_inflation_factor(d, j, standardize=False))
    return float(variance_inflation_factor(d, j))


def test_prediction_intervals_match_statsmodels(case) -> None:
    """Source: statsmodels get_prediction().summary_frame(alpha): mean_ci_*, obs_ci_*."""
    name, _, _, _, ours, ref = case
    _, attrs, intercept, degree = CASES[name]
    X_new, _ = _data(9, attrs, seed=77)
    d_new = _design(X_new, intercept, degree)
    for level in (0.95, 0.8):
        frame = ref.get_prediction(d_new).summary_frame(alpha=1 - level)
        got = intervals(ours, X_new, level)
        _close(got.pred, frame["mean"].to_numpy(), "prediction")
        _close(got.mean_lo, frame["mean_ci_lower"].to_numpy(), "mean interval low")
        _close(got.mean_hi, frame["mean_ci_upper"].to_numpy(), "mean interval high")
        _close(got.obs_lo, frame["obs_ci_lower"].to_numpy(), "new-value interval low")
        _close(got.obs_hi, frame["obs_ci_upper"].to_numpy(), "new-value interval high")
        inv = np.linalg.inv(ours.design_.T @ ours.design_)
        _close(got.leverage, np.einsum("ij,jk,ik->i", d_new, inv, d_new), "x₀ᵀ(XᵀX)⁻¹x₀")


# --- NIST StRD ---------------------------------------------------------------------------

STRD = strd_files()
# 12 significant digits required (the bound); the certified values carry 15.
# Measured: at least 13.8 on every data set and both solver paths (the diagonal of
# (XᵀX)⁻¹ is rounded once per entry). Wampler1/2 certify 0 (exact fits); there the
# standard errors must be 0 to 1e-13 absolute (measured ≤ 1.3e-15).
MIN_LRE = 12.0


@pytest.mark.parametrize("path_kind", ["exact", "float"])
@pytest.mark.parametrize("path", STRD, ids=[p.stem for p in STRD])
def test_strd_certified_standard_deviations(path, path_kind: str,
                                            monkeypatch: pytest.MonkeyPatch) -> None:
    """Source: NIST StRD Linear Least Squares Regression, certified "Standard Deviation of
    Estimate" of each parameter (all 11 data sets), through coef_table(res).se."""
    assert len(STRD) == 11
    if path_kind == "float":
        monkeypatch.setattr(leastsq, "EXACT_LIMIT", 0)
    case = read_strd(path)
    res = LeastSquares(intercept=case.intercept, degree=case.degree).fit(
        case.X, case.y, names=list(case.columns))
    se = coef_table(res).se
    for k, (got, cert) in enumerate(zip(se, case.coef_sd, strict=True)):
        if cert == 0:  # Wampler1 and 2 fit exactly: the certified SDs are 0
            assert abs(got) <= 1e-13, f"{case.name} B{k}: {got!r} should be 0"
        else:
            assert lre(float(got), float(cert)) >= MIN_LRE, f"{case.name} B{k}: {got!r}"


# --- Anscombe (1973) -----------------------------------------------------------------------


def _anscombe(which: str) -> tuple[np.ndarray, np.ndarray]:
    xs, ys = [], []
    with open(REFERENCE_DIR / "anscombe.csv", newline="") as fh:
        for row in csv.DictReader(fh):
            if row["set"] == which:
                xs.append(float(row["x"]))
                ys.append(float(row["y"]))
    return np.array(xs), np.array(ys)


def test_anscombe_iii_outlier_has_the_largest_cooks_distance() -> None:
    """Source: Anscombe, F. J. (1973), Graphs in Statistical Analysis, The American
    Statistician 27(1):17-21: set III lies on a line but for one point (x = 13, y = 12.74).
    Cook's distance picks it: the largest, and above 4/n (the common-practice flag)."""
    x, y = _anscombe("III")
    inf = influence(LeastSquares().fit(x, y, names=["x"]))
    top = int(np.argmax(inf.cooks))
    assert (x[top], y[top]) == (13.0, 12.74)
    assert inf.cooks[top] > 4 / len(x)
    assert np.sum(inf.cooks > 4 / len(x)) == 1


def test_anscombe_iv_lone_point_has_leverage_one() -> None:
    """Source: Anscombe (1973), set IV: every x is 8 but one (x = 19), which alone fixes
    the slope, so its leverage is 1 (to 1e-12) and every other row's is 1/10."""
    x, y = _anscombe("IV")
    inf = influence(LeastSquares().fit(x, y, names=["x"]))
    lone = int(np.flatnonzero(x == 19.0)[0])
    assert abs(inf.leverage[lone] - 1.0) <= 1e-12
    others = np.delete(inf.leverage, lone)
    np.testing.assert_allclose(others, 0.1, rtol=1e-12)
    # its leave-one-out quantities are undefined, not huge numbers
    assert math.isnan(inf.cooks[lone]) and math.isnan(inf.student[lone])
    assert math.isnan(inf.loo_rmse)


def test_breusch_pagan_on_a_collinear_polynomial_matches_exact_arithmetic() -> None:
    """A cubic in x ≈ 1000 (raw powers nearly collinear): LM equals n·R² of e² on 1, x, x²,
    x³ computed in exact rational arithmetic (the residuals taken as given), to 1e-9.

    This once lost the 4th digit (a float least-squares solve on the raw powers, whose
    condition number is about 5e16); the reference here needs no conditioning at all.
    """
    rng = np.random.default_rng(1)
    x = rng.uniform(1000, 1010, 40)
    y = 1 + 2 * x - 0.001 * x**2 + 1e-6 * x**3 + rng.normal(0, 0.1, 40) * (x - 999)
    res = LeastSquares(degree=3).fit(x[:, None], y)
    e2 = [Fraction(float(v)) ** 2 for v in res.resid_]
    cols = [[Fraction(float(v)) ** k for v in x] for k in range(4)]
    gram = [[sum(a * b for a, b in zip(ci, cj)) for cj in cols] for ci in cols]
    rhs = [sum(a * b for a, b in zip(ci, e2)) for ci in cols]
    beta = _solve_exact(gram, rhs)
    fit = [sum(b * c[i] for b, c in zip(beta, cols)) for i in range(40)]
    mean = sum(e2) / 40
    r2 = 1 - sum((a - f) ** 2 for a, f in zip(e2, fit)) / sum((a - mean) ** 2 for a in e2)
    lm, _ = breusch_pagan(res)
    assert lm == pytest.approx(float(40 * r2), rel=1e-9)


def _solve_exact(a: list[list[Fraction]], b: list[Fraction]) -> list[Fraction]:
    """Gauss–Jordan elimination in rationals (small, nonsingular systems)."""
    m = [row[:] + [v] for row, v in zip(a, b)]
    size = len(m)
    for c in range(size):
        piv = next(r for r in range(c, size) if m[r][c] != 0)
        m[c], m[piv] = m[piv], m[c]
        m[c] = [v / m[c][c] for v in m[c]]
        for r in range(size):
            if r != c and m[r][c] != 0:
                f = m[r][c]
                m[r] = [v - f * w for v, w in zip(m[r], m[c])]
    return [row[-1] for row in m]


def test_leverages_on_a_collinear_polynomial_match_exact_arithmetic() -> None:
    """Leverages of the fitted rows and x₀ᵀ(XᵀX)⁻¹x₀ of new rows for a cubic in x ≈ 1000,
    against exact rational arithmetic on the exact powers of x (the model the core fits).

    Evaluating x₀ᵀ(XᵀX)⁻¹x₀ with the float inverse was 83 % off here (and 17-fold on StRD
    Filip); through a well-conditioned basis of the same space both are now within
    2e-15 (measured); 1e-12 allowed.
    """
    rng = np.random.default_rng(1)
    x = rng.uniform(1000, 1010, 40)
    y = 1 + 2 * x - 0.001 * x**2 + 1e-6 * x**3 + rng.normal(0, 0.1, 40) * (x - 999)
    res = LeastSquares(degree=3).fit(x[:, None], y)
    x_new = np.array([1003.0, 1011.0, 995.5])
    rows = [[Fraction(float(v)) ** k for k in range(4)] for v in x]
    gram = [[sum(r[a] * r[b] for r in rows) for b in range(4)] for a in range(4)]
    cols = [_solve_exact(gram, [Fraction(int(i == j)) for i in range(4)]) for j in range(4)]

    def quad(v: float) -> float:
        r = [Fraction(v) ** k for k in range(4)]
        return float(sum(r[a] * cols[b][a] * r[b] for a in range(4) for b in range(4)))

    np.testing.assert_allclose(influence(res).leverage, [quad(float(v)) for v in x], rtol=1e-12)
    np.testing.assert_allclose(intervals(res, x_new[:, None]).leverage,
                               [quad(float(v)) for v in x_new], rtol=1e-12)


@pytest.mark.parametrize("case_name", sorted(CASES))
def test_blockwise_factorisation_agrees_with_one_piece(case_name, monkeypatch) -> None:
    """Leverage, HC3, Breusch–Pagan and new rows' leverage computed a few rows at a time
    (as every book above 65,536 rows is) equal the one-piece QR's results and statsmodels'.

    Blocks of 7 rows stand in for 65,536 (the tall-skinny QR is the same algorithm at any
    block size; 3000 rows make 428 blocks). The block-wise Q differs from the one-piece
    Householder Q by rounding only: 1e-12 relative on these designs (cond ≤ 1e4 for the
    cubic's basis), far below what a wrong block offset or a missing block would do.
    """
    rows, attrs, intercept, degree = CASES[case_name]
    X, y = _data(rows, attrs, seed=sorted(CASES).index(case_name) + 31)
    res = LeastSquares(intercept=intercept, degree=degree).fit(X, y)
    X_new = X[:5] * 1.1 + 0.2
    whole = (influence(res), coef_table(res), breusch_pagan(res), intervals(res, X_new))
    from sheetfit.fit import inference as inf_mod

    assert influence(res).leverage is whole[0].leverage  # factored once per result
    monkeypatch.setattr(inf_mod, "_QR_ROWS", 7)
    inf_mod._LEVERAGES.clear()  # else the one-piece leverages come back from the memo
    assert len(inf_mod._blocks(rows)) > 4  # the block path is the one taken
    blocked = (influence(res), coef_table(res), breusch_pagan(res), intervals(res, X_new))
    assert blocked[0].leverage is not whole[0].leverage
    tol = {"rtol": 1e-12, "atol": 1e-15}
    np.testing.assert_allclose(blocked[0].leverage, whole[0].leverage, **tol)
    np.testing.assert_allclose(blocked[0].cooks, whole[0].cooks, **tol)
    np.testing.assert_allclose(blocked[1].hc3_se, whole[1].hc3_se, **tol)
    np.testing.assert_allclose(blocked[2], whole[2], **tol)
    np.testing.assert_allclose(blocked[3].leverage, whole[3].leverage, **tol)
    assert math.isclose(float(np.sum(blocked[0].leverage)), res.p_, rel_tol=1e-12)
    # and against the outside reference: statsmodels' hat matrix diagonal, HC3 and
    # Koenker's Breusch–Pagan (test-only reference library)
    d = _design(X, intercept, degree)
    ref = sm.OLS(y, d).fit()
    _close(blocked[0].leverage, ref.get_influence().hat_matrix_diag, "block-wise leverage")
    _close(blocked[1].hc3_se, ref.HC3_se, "block-wise HC3")
    exog = d if intercept else sm.add_constant(d, has_constant="add")
    _close(blocked[2][0], het_breuschpagan(ref.resid, exog)[0], "block-wise Breusch–Pagan")


def test_influence_of_a_block_of_rows_is_the_same_numbers() -> None:
    """influence_rows (the cautions count outliers a block of rows at a time) gives
    exactly the studentized residuals, Cook's distances and PRESS of those rows."""
    rng = np.random.default_rng(31)
    X = rng.normal(size=(500, 3))
    y = X @ [1.0, -2.0, 0.5] + rng.normal(size=500)
    res = LeastSquares().fit(X, y)
    whole = influence(res)
    for a, b in [(0, 500), (0, 1), (137, 311), (499, 500)]:
        student, cooks, press = influence_rows(res, a, b)
        assert student.tobytes() == whole.student[a:b].tobytes()
        assert cooks.tobytes() == whole.cooks[a:b].tobytes()
        assert press.tobytes() == whole.press[a:b].tobytes()
