"""The least-squares engine against statsmodels OLS on seeded random data."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

from sheetfit.fit import LeastSquares

# statsmodels solves in float64 through a pseudo-inverse; on these well-conditioned
# designs (scaled condition numbers below ~100) its own error is ~cond·eps ≈ 1e-14, so
# agreement to 1e-10 relative leaves four digits of margin while still catching a
# wrong formula (a wrong degrees-of-freedom count or centring changes digits 1-3).
RTOL = 1e-10

CASES = {
    # name: (rows, attributes, intercept, degree)
    "three attributes": (40, 3, True, 1),
    "two attributes, no intercept": (25, 2, False, 1),
    "cubic": (30, 1, True, 3),
    "quadratic, no intercept": (20, 1, False, 2),
    "large, float path": (3000, 4, True, 1),
    "large cubic, float path": (2000, 1, True, 3),
}


def _data(rows: int, attrs: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = rng.normal(loc=2.0, scale=1.5, size=(rows, attrs))
    y = 3.0 + X.sum(axis=1) * 0.7 + rng.normal(scale=0.5, size=rows)
    return X, y


def _sm_design(X: np.ndarray, intercept: bool, degree: int) -> np.ndarray:
    cols = [X[:, 0] ** k for k in range(1, degree + 1)] if degree > 1 else list(X.T)
    if intercept:
        cols.insert(0, np.ones(X.shape[0]))
    return np.column_stack(cols)


@pytest.mark.parametrize("case", sorted(CASES))
def test_matches_statsmodels(case: str) -> None:
    """Coefficients, SEs, residual SD, R², fitted values and predictions agree with OLS."""
    rows, attrs, intercept, degree = CASES[case]
    X, y = _data(rows, attrs, seed=sorted(CASES).index(case) + 11)
    ours = LeastSquares(intercept=intercept, degree=degree).fit(X, y)
    ref = sm.OLS(y, _sm_design(X, intercept, degree)).fit()

    assert (ours.solver_ == "refined") == case.endswith("float path")
    np.testing.assert_allclose(ours.coef_, ref.params, rtol=RTOL)
    np.testing.assert_allclose(ours.coef_se_, ref.bse, rtol=RTOL)
    assert ours.resid_sd_ == pytest.approx(np.sqrt(ref.scale), rel=RTOL)
    assert ours.ssr_ == pytest.approx(ref.ssr, rel=RTOL)
    # statsmodels takes R² about zero when the design has no constant column; so do we.
    assert ref.k_constant == int(intercept)
    assert ours.r2_uncentred_ is (not intercept)
    assert ours.r2_ == pytest.approx(ref.rsquared, rel=RTOL)
    scale = np.max(np.abs(y))
    np.testing.assert_allclose(ours.fitted_, ref.fittedvalues, rtol=0, atol=RTOL * scale)
    np.testing.assert_allclose(ours.resid_, ref.resid, rtol=0, atol=RTOL * scale)

    X_new, _ = _data(7, attrs, seed=99)
    expected = ref.predict(_sm_design(X_new, intercept, degree))
    np.testing.assert_allclose(ours.predict(X_new), expected, rtol=0, atol=RTOL * scale)


def test_uncentred_r2_differs_from_centred() -> None:
    """Without intercept R² is about zero: 1 − ssr/Σy², which is not 1 − ssr/Σ(y−ȳ)²."""
    X, y = _data(30, 2, seed=5)
    res = LeastSquares(intercept=False).fit(X, y)
    assert res.r2_ == pytest.approx(1 - res.ssr_ / np.sum(y**2), rel=1e-12)
    assert abs(res.r2_ - (1 - res.ssr_ / np.sum((y - y.mean()) ** 2))) > 1e-3
