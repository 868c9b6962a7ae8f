"""The t, F and chi-squared tails the inference uses equal scipy.stats's, bit for bit.

scipy.stats (the reference here, test-only in this role) computes these through the same
scipy.special functions after its own argument handling; sheetfit calls the special
functions directly because importing scipy.stats costs about a second at start-up.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from scipy import stats

from sheetfit.fit.distributions import chi2_sf, f_sf, t_isf, t_ppf, t_sf

DFS = [1, 2, 3, 4.5, 7, 10, 29, 30, 120, 1_000, 250_000, 1e9]
XS = np.array([0.0, 1e-300, 1e-12, 1e-3, 0.5, 1.0, 1.96, 2.0, 3.5, 10.0, 40.0, 1e6, np.inf, np.nan])
QS = [1e-12, 0.001, 0.005, 0.025, 0.05, 0.1, 0.5, 0.9, 0.95, 0.975, 0.995]


def _same(a, b) -> bool:
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    return a.shape == b.shape and bool(np.all((a == b) | (np.isnan(a) & np.isnan(b))))


@pytest.mark.parametrize("df", DFS)
def test_t_tails_and_quantiles(df: float) -> None:
    assert _same(t_sf(XS, df), stats.t.sf(XS, df))
    assert _same(t_sf(-XS, df), stats.t.sf(-XS, df))
    for x in XS:
        assert _same(t_sf(x, df), stats.t.sf(x, df))
    for q in QS:
        assert t_ppf(q, df) == stats.t.ppf(q, df)
        assert t_isf(q, df) == stats.t.isf(q, df)


@pytest.mark.parametrize("df", DFS)
def test_f_and_chi2_tails(df: float) -> None:
    xs = np.concatenate([XS, -XS[1:4]])
    for dfn in (1, 2, 5, 12):
        assert _same(f_sf(xs, dfn, df), stats.f.sf(xs, dfn, df))
        for x in xs:
            assert _same(f_sf(x, dfn, df), stats.f.sf(x, dfn, df))
    assert _same(chi2_sf(xs, df), stats.chi2.sf(xs, df))
    for x in xs:
        assert _same(chi2_sf(x, df), stats.chi2.sf(x, df))


def test_a_least_squares_fit_imports_no_scipy_stats_or_neighbour_search() -> None:
    """Importing the numeric core and fitting a least-squares model with intervals for new
    rows, in a new process, leaves scipy.stats and scipy.spatial unimported."""
    code = (
        "import sys, numpy as np\n"
        "from sheetfit.fit import LeastSquares\n"
        "from sheetfit.fit import inference\n"
        "rng = np.random.default_rng(5)\n"
        "X = rng.normal(size=(40, 2)); y = 1 + X @ [2.0, -1.0] + rng.normal(size=40)\n"
        "res = LeastSquares().fit(X, y)\n"
        "t = inference.coef_table(res); o = inference.overall(res)\n"
        "bp = inference.breusch_pagan(res); iv = inference.intervals(res, X[:3])\n"
        "assert np.all(np.isfinite(t.p)) and 0 < o.f_p < 1 and 0 <= bp[1] <= 1\n"
        "print(sorted(m for m in ('scipy.stats', 'scipy.spatial') if m in sys.modules))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip() == "[]"
