"""Tail probabilities and quantiles of the t, F and chi-squared distributions.

The same numbers as ``scipy.stats.t.sf`` / ``.ppf`` / ``.isf``, ``scipy.stats.f.sf`` and
``scipy.stats.chi2.sf`` (tests/test_fit_distributions.py compares them bit for bit):
those call exactly these ``scipy.special`` functions (``stdtr``, ``stdtrit``, ``fdtrc``,
``chdtrc``) inside their argument handling. Importing ``scipy.stats`` takes about a
second of a refresh's start; ``scipy.special`` a small part of that, imported here on
first use.
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["chi2_sf", "f_sf", "t_isf", "t_ppf", "t_sf"]


def _special() -> Any:
    import scipy.special  # on first use: a least-squares refresh needs nothing else of scipy

    return scipy.special


def t_sf(x: Any, df: float) -> Any:
    """P(T > x) for Student's t with ``df`` degrees of freedom (df > 0)."""
    return _special().stdtr(df, -np.asarray(x, dtype=np.float64))


def t_ppf(q: float, df: float) -> Any:
    """The t value below which a fraction ``q`` (0 < q < 1) of the distribution lies."""
    return _special().stdtrit(df, q)


def t_isf(q: float, df: float) -> Any:
    """The t value above which a fraction ``q`` (0 < q < 1) of the distribution lies."""
    return -_special().stdtrit(df, q)


def _upper(x: Any, tail: Any) -> Any:
    """A tail probability over [0, inf): 1 at and below 0 as scipy.stats gives it, nan kept."""
    x = np.asarray(x, dtype=np.float64)
    out = np.where(x <= 0, 1.0, tail(np.where(x <= 0, 1.0, x)))
    return out[()] if out.ndim == 0 else out


def f_sf(x: Any, dfn: float, dfd: float) -> Any:
    """P(F > x) for the F distribution with (dfn, dfd) degrees of freedom."""
    return _upper(x, lambda v: _special().fdtrc(dfn, dfd, v))


def chi2_sf(x: Any, df: float) -> Any:
    """P(X > x) for chi-squared with ``df`` degrees of freedom."""
    return _upper(x, lambda v: _special().chdtrc(df, v))
