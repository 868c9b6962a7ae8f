"""Plain words about a least-squares fit: its cautions and its interval sentences.

Used by the coefficient sheet and by the method record (index sheet, command line), so
the two always say the same thing.
"""

from __future__ import annotations

import math

import numpy as np

from ..fit.inference import breusch_pagan, influence_rows, t_quantile, vif
from ..fit.leastsq import LeastSquaresResult
from ..words import plural
from ._ls_audit import audit_caution

__all__ = ["BP_LEVEL", "VIF_LIMIT", "audit_threshold_caution", "least_squares_cautions",
           "number", "range_words"]

#: Breusch–Pagan p-value below which the residual spread is said to change (5 %).
BP_LEVEL = 0.05
#: Variance inflation factor above which an attribute is said to overlap the others
#: (common practice).
VIF_LIMIT = 10.0
#: Fewer rows per parameter than this and the estimates are fragile (common practice).
ROWS_PER_PARAMETER = 10


def number(v: float) -> str:
    """A figure for a sentence: four significant digits, thousands separated."""
    if not math.isfinite(v):
        return "n/a"
    if v != 0 and (abs(v) >= 1e9 or abs(v) < 1e-4):
        return f"{v:.4g}"
    digits = max(0, 3 - math.floor(math.log10(abs(v)))) if v != 0 else 0
    return f"{v:,.{digits}f}"


def range_words(what: str, lo: float, hi: float, level: float) -> str:
    """'<what> is between <lo> and <hi> with 95 % confidence' (or why there is no range)."""
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return f"{what}: no range (too few rows to estimate one)"
    return f"{what} is between {number(lo)} and {number(hi)} with {level:.0%} confidence"


def least_squares_cautions(res: LeastSquaresResult) -> list[str]:
    """What to keep in mind about this fit, in plain words (empty parts left out)."""
    out: list[str] = []
    if res.r2_uncentred_:
        out.append("no intercept: R² is uncentred (about zero) and reads higher than a "
                   "centred R²")
    if res.df_resid_ < 10:
        out.append(f"only {res.df_resid_} residual degrees of freedom: R² and the residual "
                   "SD are unstable")
    if res.n_ < ROWS_PER_PARAMETER * res.p_:
        out.append(f"{res.n_} rows for {res.p_} parameters (fewer than {ROWS_PER_PARAMETER} "
                   "per parameter): the coefficients can move a lot when rows are added")
    exact = res.ssr_ <= 1e-24 * float(np.dot(res.y_, res.y_))
    if res.df_resid_ > 1 and not exact:
        _, p = breusch_pagan(res)
        if math.isfinite(p) and p < BP_LEVEL:
            out.append(f"the residuals fan out (Breusch–Pagan p = {p:.3g} < {BP_LEVEL:g}): "
                       "the spread changes with the attributes, so quote the HC3 standard "
                       "errors, and intervals for single values are too narrow where the "
                       "spread is large")
    if res.degree_ == 1 and res.p_ - int(res.intercept_) > 1:
        v = vif(res)
        big = [f"{t} ({x:.1f})" for t, x in zip(res.terms_[int(res.intercept_):], v)
               if x > VIF_LIMIT]
        if big:
            out.append(f"attributes overlap (variance inflation above {VIF_LIMIT:g}: "
                       f"{', '.join(big)}): their separate coefficients are poorly determined "
                       "even when the fit as a whole is good")
    if res.df_resid_ > 0 and not exact:
        n = res.n_
        outl = heavy = ones = 0
        for a in range(0, n, 1 << 16):  # a block of rows at a time: counts only
            student, cooks, press = influence_rows(res, a, min(n, a + (1 << 16)))
            with np.errstate(invalid="ignore"):
                outl += int(np.sum(np.abs(np.nan_to_num(student)) > 3))
                heavy += int(np.sum(np.nan_to_num(cooks) > 4 / n))
            ones += int(np.sum(np.isnan(press)))
        if outl:
            out.append(f"{plural(outl, 'row')} with |studentized residual| > 3 (flagged on "
                       "the residual sheet): check them for errors before trusting the fit")
        if heavy:
            out.append(f"{plural(heavy, 'row')} with Cook's distance > 4/n: the "
                       "coefficients depend noticeably on "
                       f"{'it' if heavy == 1 else 'them'}; refit without "
                       f"{'it' if heavy == 1 else 'them'} to see how much")
        if ones:
            out.append(f"{plural(ones, 'row')} with leverage 1: the line passes through "
                       f"{'it' if ones == 1 else 'them'} whatever the value, so the "
                       "leave-one-out error is not defined")
    return out


def audit_threshold_caution(res: LeastSquaresResult, setting: object,
                            level: float) -> str | None:
    """The audit caution when the threshold is narrower than a typical prediction interval.

    The typical interval is at the average leverage p/n: ± t · s · √(1 + p/n).
    """
    if not isinstance(setting, tuple) or res.df_resid_ <= 0:
        return None
    kind, value = str(setting[0]), float(setting[1])
    s = float(res.resid_sd_)
    threshold = float(value) * s if kind == "sd" else float(value)
    half = t_quantile(level, res.df_resid_) * s * math.sqrt(1 + res.p_ / res.n_)
    return audit_caution(threshold, half, level)
