"""Bootstrap percentile intervals (fit/bootstrap.py): reproducible, hand-checkable, sensible."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from sheetfit.errors import BootstrapCaution, SettingError
from sheetfit.fit import LeastSquares
from sheetfit.fit import bootstrap as bootstrap_module
from sheetfit.fit.bootstrap import METHOD, bootstrap
from sheetfit.fit.inference import coef_table, intervals


def _data(n: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = rng.normal(50, 10, size=(n, 3))
    y = 100 + X @ np.array([2.0, -1.0, 0.5]) + rng.normal(0, 5, n)
    return X, y


def test_same_seed_same_intervals_other_seed_other_intervals() -> None:
    X, y = _data(60, 1)
    res = LeastSquares().fit(X, y)
    a = bootstrap(res, X[:4], resamples=300, seed=11)
    b = bootstrap(res, X[:4], resamples=300, seed=11)
    c = bootstrap(res, X[:4], resamples=300, seed=12)
    for f in ("coef_lo", "coef_hi", "pred_lo", "pred_hi", "coefs"):
        np.testing.assert_array_equal(getattr(a, f), getattr(b, f))
        assert not np.array_equal(getattr(a, f), getattr(c, f))
    assert (a.resamples, a.seed, a.method, a.skipped, a.kept) == (300, 11, METHOD, 0, 300)
    assert METHOD == "percentile, rows resampled with replacement"


def test_batches_do_not_change_the_draws(monkeypatch: pytest.MonkeyPatch) -> None:
    """Drawn in one batch or many, resample b takes rng.integers(0, n, (resamples, n))[b]."""
    X, y = _data(50, 2)
    res = LeastSquares().fit(X, y)
    whole = bootstrap(res, None, resamples=40, seed=3)
    monkeypatch.setattr(bootstrap_module, "_BATCH_CELLS", 50 * 7)  # batches of 7
    # Same rows drawn; the matrix products' blocking follows the batch shape, which may
    # move the last bit (1e-15 relative allowed). The batch size depends only on n, so a
    # given book always gets identical numbers (the test above).
    np.testing.assert_allclose(bootstrap(res, None, resamples=40, seed=3).coefs, whole.coefs,
                               rtol=1e-15)


def test_three_resamples_by_hand() -> None:
    """Three resamples from a fixed rng stream equal explicit refits with numpy.linalg.lstsq.

    The rows of resample b are rng.integers(0, n, size=(3, n))[b]; each is refitted by
    lstsq on those rows of the design, and the interval is numpy's type-7 quantile of
    the three values. Tolerance 1e-12 relative: both solvers are backward stable on this
    well-conditioned design (scaled condition number about 10), lstsq to about 1e-14.
    """
    rng = np.random.default_rng(99)
    X = rng.normal(size=(8, 1))
    y = 1 + 2 * X[:, 0] + rng.normal(scale=0.3, size=8)
    res = LeastSquares().fit(X, y)
    got = bootstrap(res, np.array([[0.5]]), resamples=3, seed=4, level=0.5)
    rows = np.random.default_rng(4).integers(0, 8, size=(3, 8))
    d = np.column_stack([np.ones(8), X[:, 0]])
    refits = np.array([np.linalg.lstsq(d[r], y[r], rcond=None)[0] for r in rows])
    np.testing.assert_allclose(got.coefs, refits, rtol=1e-12)
    # level 0.5: quantiles 0.25 and 0.75 of three sorted values v0 ≤ v1 ≤ v2 are
    # (v0 + v1)/2 and (v1 + v2)/2 (type 7: position q·(3 − 1))
    v = np.sort(refits, axis=0)
    np.testing.assert_allclose(got.coef_lo, (v[0] + v[1]) / 2, rtol=1e-12)
    np.testing.assert_allclose(got.coef_hi, (v[1] + v[2]) / 2, rtol=1e-12)
    pv = np.sort(refits @ np.array([1.0, 0.5]))
    assert got.pred_lo[0] == pytest.approx((pv[0] + pv[1]) / 2, rel=1e-12)
    assert got.pred_hi[0] == pytest.approx((pv[1] + pv[2]) / 2, rel=1e-12)


def test_refits_match_the_accurate_core() -> None:
    """Each resample's coefficients equal the core's own refit of those rows (accurate to
    the last digit): measured 2e-16 relative on this design; 1e-14 allowed."""
    X, y = _data(2000, 5)
    res = LeastSquares().fit(X, y)
    got = bootstrap(res, None, resamples=10, seed=8)
    rows = np.random.default_rng(8).integers(0, 2000, size=(10, 2000))
    core = np.array([LeastSquares().fit(X[r], y[r]).coef_ for r in rows])
    np.testing.assert_allclose(got.coefs, core, rtol=1e-14)


def test_percentile_interval_approaches_the_classical_one() -> None:
    """n = 5000 rows with normal, constant-variance errors: the percentile interval is close
    to the classical t interval (coef ± t·SE).

    Both estimate the same 95 % interval; the bootstrap's endpoints differ from it by
    Monte-Carlo error (2000 resamples: the 2.5 % quantile's standard error is about
    sqrt(0.025·0.975/2000)/φ(1.96) ≈ 0.06 SE) plus the O(1/sqrt(n)) difference between the
    resampled and normal sampling distributions. Allowed: 0.2 SE on each endpoint
    (three Monte-Carlo standard errors), and the width within 10 %.
    """
    X, y = _data(5000, 6)
    res = LeastSquares().fit(X, y)
    tab = coef_table(res)
    X_new = X[:3] + 1.0
    got = bootstrap(res, X_new, resamples=2000, seed=21)
    assert np.all(np.abs(got.coef_lo - tab.lo) <= 0.2 * tab.se)
    assert np.all(np.abs(got.coef_hi - tab.hi) <= 0.2 * tab.se)
    np.testing.assert_allclose(got.coef_hi - got.coef_lo, tab.hi - tab.lo, rtol=0.10)
    iv = intervals(res, X_new)
    se_mean = (iv.mean_hi - iv.mean_lo) / (tab.hi - tab.lo)[0] * tab.se[0]
    assert np.all(np.abs(got.pred_lo - iv.mean_lo) <= 0.2 * se_mean)
    assert np.all(np.abs(got.pred_hi - iv.mean_hi) <= 0.2 * se_mean)


def test_singular_resamples_are_skipped_counted_and_cautioned() -> None:
    """A 0/1 term with one row set: resamples that miss that row cannot estimate it.

    P(row not drawn in n = 12 draws) = (11/12)^12 ≈ 0.35, so about a third of the
    resamples are skipped: counted, never solved, and a caution (over 5 %) says so.
    """
    rng = np.random.default_rng(1)
    x = rng.normal(size=12)
    flag = np.zeros(12)
    flag[3] = 1.0
    y = 1 + x + 3 * flag + rng.normal(scale=0.1, size=12)
    res = LeastSquares().fit(np.column_stack([x, flag]), y)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        got = bootstrap(res, None, resamples=400, seed=2)
    rows = np.random.default_rng(2).integers(0, 12, size=(400, 12))
    missing = int(np.sum(~np.any(rows == 3, axis=1)))
    assert got.skipped == missing and 100 < missing < 180
    assert got.kept == 400 - missing == got.coefs.shape[0]
    assert np.all(np.isfinite(got.coefs))
    (w,) = [w for w in caught if issubclass(w.category, BootstrapCaution)]
    assert f"{missing} of 400" in str(w.message)


def test_refusals() -> None:
    X, y = _data(20, 3)
    res = LeastSquares().fit(X, y)
    for bad in (0, -5, 2.5, True):
        with pytest.raises(SettingError, match="resamples"):
            bootstrap(res, resamples=bad)  # type: ignore[arg-type]
    with pytest.raises(SettingError, match="seed"):
        bootstrap(res, seed=-1)
    with pytest.raises(SettingError, match="confidence level"):
        bootstrap(res, level=1.5)
