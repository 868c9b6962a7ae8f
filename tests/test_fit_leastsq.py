"""The least-squares engine: refusals, terms and design, predictions, Anscombe's quartet."""

from __future__ import annotations

import csv
import math
import warnings

import numpy as np
import pytest
from reference.strd import REFERENCE_DIR

import sheetfit.fit
from sheetfit.errors import (
    CollinearError,
    ConditioningCaution,
    DataError,
    ExtrapolationCaution,
    SettingError,
)
from sheetfit.fit import LeastSquares, LeastSquaresResult, leastsq
from sheetfit.fit import checks as leastsq_checks


def _rng() -> np.random.Generator:
    return np.random.default_rng(20240601)


def test_public_names() -> None:
    """The package exposes exactly the estimators, the least-squares result and scaling."""
    assert sorted(sheetfit.fit.__all__) == ["LeastSquares", "LeastSquaresResult", "NeighbourMean",
                                            "NeighbourVote", "StripMean", "standard_units"]
    assert sheetfit.fit.LeastSquares is leastsq.LeastSquares


def test_constructor_only_stores_settings() -> None:
    """Bad settings are reported by fit, not by the constructor, naming the setting."""
    model = LeastSquares(degree=0)
    assert model.degree == 0
    with pytest.raises(SettingError, match=r"setting degree: allowed a whole number from 1 to 10"):
        model.fit(np.arange(5.0), np.arange(5.0))
    with pytest.raises(SettingError, match=r"setting intercept"):
        LeastSquares(intercept="yes").fit(np.arange(5.0), np.arange(5.0))  # type: ignore[arg-type]


def test_refuses_constant_column_with_intercept() -> None:
    """A constant attribute cannot sit beside an intercept; the message names it."""
    X = np.column_stack([np.arange(6.0), np.full(6, 4.0)])
    with pytest.raises(DataError, match=r"attribute 'stops' has the same value \(4\) in every used row"):
        LeastSquares().fit(X, np.arange(6.0) ** 2, names=["km", "stops"])
    # Without an intercept the same column is an ordinary term.
    res = LeastSquares(intercept=False).fit(X, np.arange(6.0) ** 2, names=["km", "stops"])
    assert res.terms_ == ["km", "stops"]


def test_refuses_collinear_attributes() -> None:
    """Exactly collinear attributes are refused with their names and the relation."""
    rng = _rng()
    a, b = rng.normal(size=12), rng.normal(size=12)
    X = np.column_stack([a, b, 2.0 * b])
    with pytest.raises(CollinearError, match=r"attributes b and c are collinear \(c = 2·b\)"):
        LeastSquares().fit(X, rng.normal(size=12), names=["a", "b", "c"])


def test_refuses_three_way_collinearity() -> None:
    """A dependence among three attributes lists all three."""
    rng = _rng()
    a, b = rng.normal(size=12), rng.normal(size=12)
    X = np.column_stack([a, b, a + b])
    with pytest.raises(CollinearError, match=r"attributes a, b and c are collinear \(c = a \+ b\)"):
        LeastSquares().fit(X, rng.normal(size=12), names=["a", "b", "c"])


def test_refuses_numerically_collinear_attributes() -> None:
    """Columns equal up to float64 rounding (c = 0.1·b, rounded) are refused too."""
    rng = _rng()
    a, b = rng.normal(size=12), rng.normal(size=12)
    X = np.column_stack([a, b, 0.1 * b])
    with pytest.raises(CollinearError, match=r"attributes b and c are collinear \(c = 0\.1·b\)"):
        LeastSquares().fit(X, rng.normal(size=12), names=["a", "b", "c"])


def test_refuses_too_few_rows() -> None:
    """Fewer rows than parameters is refused, saying how many are needed."""
    X = np.array([[1.0, 2.0], [2.0, 1.0]])
    with pytest.raises(DataError, match=r"2 usable rows but the model has 3 parameters"):
        LeastSquares().fit(X, np.array([1.0, 2.0]))


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_refuses_non_finite(bad: float) -> None:
    """A non-finite attribute or response value is refused with its row and attribute."""
    X = np.arange(10.0).reshape(5, 2)
    X[3, 1] = bad
    with pytest.raises(DataError, match=r"row 4: attribute km is not a finite number"):
        LeastSquares().fit(X, np.arange(5.0), names=["stops", "km"])
    y = np.arange(5.0)
    y[2] = bad
    with pytest.raises(DataError, match=r"row 3: the response is not a finite number"):
        LeastSquares().fit(np.arange(5.0), y)


def test_refuses_polynomial_of_two_attributes() -> None:
    """A degree above 1 needs exactly one attribute."""
    X = _rng().normal(size=(10, 2))
    with pytest.raises(DataError, match=r"degree 3 needs exactly one attribute, given 2 \(a, b\)"):
        LeastSquares(degree=3).fit(X, np.arange(10.0), names=["a", "b"])


def test_refuses_mismatched_lengths() -> None:
    """The response and the attributes must cover the same rows."""
    with pytest.raises(DataError, match=r"the response has 4 rows but the attributes have 5"):
        LeastSquares().fit(np.arange(5.0), np.arange(4.0))


def test_polynomial_terms_and_design() -> None:
    """Polynomial terms are named x, x^2, ... and the design holds their powers in order."""
    x = np.linspace(-1.0, 2.0, 9)
    y = 1.0 - 2.0 * x + 0.5 * x**3
    res = LeastSquares(degree=3).fit(x.reshape(-1, 1), y, names=["temp"])
    assert res.terms_ == ["intercept", "temp", "temp^2", "temp^3"]
    np.testing.assert_array_equal(res.design_, np.column_stack([np.ones(9), x, x**2, x**3]))
    # Closed form: y is an exact cubic, so the coefficients are its own (to rounding).
    np.testing.assert_allclose(res.coef_, [1.0, -2.0, 0.0, 0.5], rtol=0, atol=1e-14)
    assert (res.n_, res.p_, res.df_resid_) == (9, 4, 5)


def test_predict_uses_fitted_coefficients() -> None:
    """predict() on new rows returns design · coefficients and does not refit."""
    rng = _rng()
    X = rng.normal(size=(30, 2))
    y = 4.0 + X @ np.array([1.5, -0.25]) + rng.normal(scale=0.1, size=30)
    res = LeastSquares().fit(X, y, names=["stops", "km"])
    before = res.coef_.copy()
    X_new = np.array([[0.0, 0.0], [1.0, 2.0], [-3.0, 0.5]])
    expected = before[0] + X_new @ before[1:]
    np.testing.assert_allclose(res.predict(X_new), expected, rtol=1e-14, atol=1e-14)
    np.testing.assert_array_equal(res.coef_, before)
    with pytest.raises(DataError, match=r"new rows need 2 attribute columns \(stops, km\)"):
        res.predict(np.ones((2, 3)))


def test_residuals_orthogonal_to_design() -> None:
    """The normal equations hold: Xᵀ resid ≈ 0, to rounding of the residuals."""
    rng = _rng()
    X = rng.normal(size=(50, 3))
    y = X @ np.array([1.0, 2.0, 3.0]) + rng.normal(size=50)
    res = LeastSquares().fit(X, y)
    # Each residual is rounded once (relative 1.1e-16), so Xᵀr is zero up to ~n·eps·|X||r|.
    bound = 50 * 2.3e-16 * np.abs(res.design_).T @ np.abs(res.resid_)
    assert np.all(np.abs(res.design_.T @ res.resid_) <= bound + 1e-300)
    assert res.ssr_ == pytest.approx(float(np.sum(res.resid_**2)), rel=1e-14)
    assert res.rmse_ == pytest.approx(math.sqrt(res.ssr_ / 50), rel=1e-15)


def test_as_many_rows_as_parameters() -> None:
    """n == p fits exactly; the residual SD and standard errors are undefined (nan)."""
    res = LeastSquares().fit(np.array([1.0, 3.0]), np.array([2.0, 8.0]))
    np.testing.assert_allclose(res.coef_, [-1.0, 3.0], rtol=0, atol=1e-15)
    assert math.isnan(res.resid_sd_)
    assert np.all(np.isnan(res.coef_se_))


def test_float_path_agrees_with_exact_path(monkeypatch: pytest.MonkeyPatch) -> None:
    """The large-problem float path and the exact path give the same numbers to ~1e-14."""
    rng = _rng()
    X = rng.normal(size=(400, 3)) * np.array([1.0, 1e3, 1e-3])
    y = X @ np.array([0.5, 2e-3, 7e2]) + rng.normal(size=400)
    exact = LeastSquares().fit(X, y)
    monkeypatch.setattr(leastsq, "EXACT_LIMIT", 0)
    floated = LeastSquares().fit(X, y)
    assert (exact.solver_, floated.solver_) == ("exact", "refined")
    # Both are accurate to a few units of float64 rounding; 1e-14 allows ~45 ulps.
    np.testing.assert_allclose(floated.coef_, exact.coef_, rtol=1e-14)
    np.testing.assert_allclose(floated.coef_se_, exact.coef_se_, rtol=1e-14)
    assert floated.r2_ == pytest.approx(exact.r2_, rel=1e-14)
    assert floated.ssr_ == pytest.approx(exact.ssr_, rel=1e-14)


def test_condition_number_of_scaled_design() -> None:
    """Orthogonal unit columns have condition number 1; scaling a column does not change it."""
    X = np.array([[1.0, 0.0], [0.0, 1.0], [-1.0, 0.0], [0.0, -1.0]]) * np.array([1.0, 1e6])
    res = LeastSquares(intercept=False).fit(X, np.array([1.0, 2.0, 3.0, 4.0]))
    assert res.condition_number_ == pytest.approx(1.0, rel=1e-12)


def test_rank_check_by_blocks_equals_the_whole_design(monkeypatch) -> None:
    """The rank check factors the scaled design a block of rows at a time; with 7-row
    blocks (40 rows: 6 blocks) the condition number equals numpy's SVD of the whole
    unit-scaled design to 1e-12 relative, and the collinear and numerically collinear
    designs above are still refused with the same relation (a block left out or scaled
    twice would change both)."""
    monkeypatch.setattr(leastsq, "_RANK_ROWS", 7)
    monkeypatch.setattr(leastsq, "EXACT_LIMIT", 0)  # the float path, as large books take
    rng = _rng()
    X = rng.normal(size=(40, 3)) * np.array([1.0, 1e3, 1e-2]) + np.array([0.0, 5e3, 1.0])
    X[:, 2] += 0.999 * X[:, 0] / 100  # correlated, not collinear
    res = LeastSquares().fit(X, rng.normal(size=40))
    d = np.column_stack([np.ones(40), X])
    sv = np.linalg.svd(d / np.linalg.norm(d, axis=0), compute_uv=False)
    assert res.condition_number_ == pytest.approx(sv[0] / sv[-1], rel=1e-12)
    a, b = rng.normal(size=40), rng.normal(size=40)
    with pytest.raises(CollinearError, match=r"attributes b and c are collinear \(c = 2·b\)"):
        LeastSquares().fit(np.column_stack([a, b, 2.0 * b]), rng.normal(size=40),
                           names=["a", "b", "c"])
    with pytest.raises(CollinearError, match=r"attributes b and c are collinear \(c = 0\.1·b\)"):
        LeastSquares().fit(np.column_stack([a, b, 0.1 * b]), rng.normal(size=40),
                           names=["a", "b", "c"])


def _anscombe() -> dict[str, tuple[np.ndarray, np.ndarray]]:
    sets: dict[str, tuple[list[float], list[float]]] = {}
    with open(REFERENCE_DIR / "anscombe.csv", newline="") as fh:
        for row in csv.DictReader(fh):
            xs, ys = sets.setdefault(row["set"], ([], []))
            xs.append(float(row["x"]))
            ys.append(float(row["y"]))
    return {k: (np.array(v[0]), np.array(v[1])) for k, v in sets.items()}


@pytest.mark.parametrize("which", ["I", "II", "III", "IV"])
def test_anscombe_quartet(which: str) -> None:
    """Every set of the quartet gives the line y ≈ 3.00 + 0.500·x.

    Source: Anscombe, F. J. (1973), Graphs in Statistical Analysis, The American
    Statistician 27(1):17-21. The line is published to 3 significant digits, so the
    tolerance is half a unit in the last printed digit: 0.005 on the intercept and
    0.0005 on the slope. The correlation is printed as 0.816 (three decimals), so R²
    (≈ 0.816² = 0.666) is checked within 0.001, the width that three decimals allow.
    """
    x, y = _anscombe()[which]
    assert x.shape == (11,)
    res = LeastSquares().fit(x, y, names=["x"])
    assert res.coef_[0] == pytest.approx(3.00, abs=0.005)
    assert res.coef_[1] == pytest.approx(0.500, abs=0.0005)
    assert res.r2_ == pytest.approx(0.816**2, abs=0.001)
    assert isinstance(res, LeastSquaresResult)


def test_strongly_collinear_design_is_cautioned() -> None:
    """Condition number of the unit-scaled design above 100 (Belsley, Kuh and Welsch's
    "strong" level, stated from memory) issues a ConditioningCaution; a well-spread design
    does not."""
    x = np.arange(21.0)  # Wampler's x = 0..20: powers up to x^5 are nearly collinear
    with pytest.warns(ConditioningCaution, match=r"powers of x are strongly collinear"):
        res = LeastSquares(degree=5).fit(x, 1 + x + x**2, names=["x"])
    assert res.condition_number_ > leastsq_checks.CONDITION_CAUTION
    with warnings.catch_warnings():
        warnings.simplefilter("error", ConditioningCaution)
        LeastSquares().fit(np.array([1.0, 2.0, 3.0, 5.0]), np.array([2.0, 3.0, 5.0, 4.0]))


def test_prediction_outside_the_fitted_range_is_cautioned() -> None:
    """predict() names the new rows (0-based) outside the fitted attribute range."""
    X = np.array([[1.0, 10.0], [2.0, 30.0], [3.0, 20.0], [4.0, 50.0]])
    res = LeastSquares().fit(X, np.array([1.0, 2.0, 2.5, 4.5]), names=["a", "b"])
    with pytest.warns(ExtrapolationCaution) as caught:
        res.predict(np.array([[2.0, 20.0], [0.5, 20.0], [2.0, 60.0]]))
    assert [w.message.rows for w in caught] == [[1, 2]]
    with warnings.catch_warnings():
        warnings.simplefilter("error", ExtrapolationCaution)
        res.predict(np.array([[1.0, 50.0]]))  # the edges themselves are inside


@pytest.mark.parametrize(("intercept", "degree", "m"), [(True, 1, 3), (False, 1, 2),
                                                         (True, 3, 1), (False, 2, 1)])
def test_design_made_from_the_attributes_not_kept(intercept: bool, degree: int,
                                                  m: int) -> None:
    """The result keeps the attributes, not a second table: its design, its row blocks
    and its columns are made from them on use and equal the design written out by hand
    (ones, then x or x, x², …)."""
    rng = np.random.default_rng(21)
    X = rng.normal(4, 2, size=(40, m)).round(3)
    y = rng.normal(size=40)
    res = LeastSquares(intercept=intercept, degree=degree).fit(X, y)
    cols = [X[:, 0] ** k for k in range(1, degree + 1)] if degree > 1 else list(X.T)
    by_hand = np.column_stack(([np.ones(40)] if intercept else []) + cols)
    assert np.array_equal(res.design_, by_hand) and not res.design_.flags.writeable
    assert np.array_equal(res.design_rows(7, 19), by_hand[7:19])
    for j in range(res.p_):
        assert np.array_equal(res.design_column(j), by_hand[:, j])
    held = [v for v in vars(res).values() if isinstance(v, np.ndarray) and v.ndim == 2
            and v.shape[0] == 40]  # tables with a row per data row
    assert held and all(np.shares_memory(v, X) for v in held)  # X itself, no design copy
    assert res.design_ is not res.design_  # made on each use
