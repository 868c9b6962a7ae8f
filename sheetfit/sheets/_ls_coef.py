"""The coefficient sheet of a least-squares model: the answer first, then how sure, then how.

Top: each coefficient with its confidence range in words and the evidence beside it
(standard error, HC3 standard error, t, p-value, variance inflation, the orthogonality
check). Below: how well the model fits, what to keep in mind, the relevant range, the
high-low estimate for a one-attribute cost line, the rule in use today when declared,
and at the bottom how the numbers were computed ((XᵀX)⁻¹ as computed, XᵀX as formulas,
their product against the identity).

Every formula's cached value is computed here from the cached values it reads, in
the formula's order of operations.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..a1 import absolute, col_letter
from ..declare.model import Keys
from ..fit._sums import exact_dot, exact_sum
from ..fit.bootstrap import Bootstrap
from ..fit.distributions import chi2_sf, f_sf, t_isf, t_sf
from ..fit.inference import breusch_pagan, coef_table
from ..fit.leastsq import LeastSquaresResult
from ..vectors import Lazy
from ._ls_rows import RowColumns
from ._ls_words import BP_LEVEL, number, range_words
from .common import column_notes, fsum_sq, key_heads, key_styles, put_keys
from .plan import SheetPlan, coef_style

__all__ = ["CHECK_TOL", "EXACT_FIT", "AnswerRow", "CoefInputs", "CoefLayout", "RuleFit",
           "plan_coef_sheet"]

#: Residuals this small relative to y (|r| <= 1e-12 |y|) are rounding noise of an exact
#: fit; their angle with a term column is arbitrary and differs between engines (one
#: rounds y - fitted to 0, another to ±1 ulp), so the check reads 0 for them.
EXACT_FIT = "1E-24"
#: The orthogonality check holds when |cos(residuals, term)| is at most this. Least
#: squares makes it 0; rounding leaves about 1e-15 on well-conditioned data and up to
#: about 1e-9 on the hardest certified problems (measured on NIST StRD Filip).
CHECK_TOL = "1E-7"
#: The product of (XᵀX)⁻¹ and XᵀX is checked against the identity when a plain float
#: evaluation of it is within this; above it the design is too ill conditioned for a
#: spreadsheet product to show anything (the inverse itself is exact, see the note).
IDENTITY_TOL = 1e-9
#: What the sheet's identity check allows: the sum of |product − identity|.
IDENTITY_CHECK = "1E-6"

#: Lines of the fit figures other sheets read, by their position under the heading.
FIGURE_LINE = {"t multiplier": 4, "exact": 5, "residual SD": 7, "sd used": 8, "loo": 10}


@dataclass(frozen=True)
class CoefLayout:
    """Where things are on the coefficient sheet: the answer block, then the table.

    Row 0 title, row 1 the status line; from row 3 the answer (the new rows' predictions
    with their range and flag, when there are new rows; then the key figures); the
    coefficient table's header at ``head``, its p rows from ``first``; the fit figures
    two rows below the table.
    """

    p: int
    n_new: int

    @property
    def answer(self) -> int:
        return 3

    @property
    def key_head(self) -> int:
        return self.answer + 1 + (self.n_new + 1 if self.n_new else 0)

    @property
    def colnote(self) -> int:
        return self.key_head + 3

    @property
    def head(self) -> int:
        return self.colnote + 1

    @property
    def first(self) -> int:
        return self.head + 1

    def figure_row(self, what: str) -> int:
        """Row (0-based) of a fit figure that other sheets' formulas read."""
        return self.first + self.p + 2 + FIGURE_LINE[what]


@dataclass(frozen=True)
class AnswerRow:
    """One new row in the answer block: its prediction cells on the fitted-value sheet
    (reference, cached value), its flag, and where it is (index, sheet row)."""

    index: int
    sheet_row: int
    pred: tuple[str, float]
    low: tuple[str, object]
    high: tuple[str, object]
    flag: str
#: The residual SD from the sheet's residual cells agrees with the one computed from the
#: exact residuals to this (relative): the residual cells carry the rounding of the
#: fitted-value formulas, ~1e-9 relative on the hardest certified problem (NIST Filip).
SD_AGREE = "1E-6"



(C_TERM, C_COEF, C_WORDS, C_LO, C_HI, C_SE, C_HC3, C_T, C_P, C_VIF, C_COS, C_OK, C_BLO,
 C_BHI) = range(14)


@dataclass(frozen=True)
class RuleFit:
    """The rule in use today: its cells and values, its fitted values on the data rows."""

    name: str
    cells: list[str]
    values: list[float]
    fitted_rng: str
    fitted: np.ndarray | Lazy  # the rule's fitted values, row by row


@dataclass
class CoefInputs:
    """What the coefficient sheet reads: the result, the sheets' ranges, cached values."""

    tag: str
    y_name: str
    attr_names: list[str]
    res: LeastSquaresResult
    level: float
    specs: list[tuple[int, int]]
    tvals: list[np.ndarray]
    Y: np.ndarray
    resid: np.ndarray | Lazy  # the residual cells' cached values
    y_rng: str
    resid_rng: str
    term_rngs: list[str]
    press_rng: str
    rows: RowColumns
    method_note: str
    version: str
    left_out: int
    range_lines: list[tuple[str, float, float, str]] = field(default_factory=list)
    data_rows: np.ndarray | Lazy = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    rule: RuleFit | None = None
    lay: CoefLayout | None = None
    answer: list[AnswerRow] = field(default_factory=list)
    new_keys: Keys | None = None
    amount_style: str = "num"
    answer_style: str = "num"
    boot: Bootstrap | None = None


def _na(v: float) -> float | str:
    return v if math.isfinite(v) else "n/a"


def plan_coef_sheet(cs: SheetPlan, d: CoefInputs) -> str:
    """Lay out the whole coefficient sheet; return the range of the coefficient column."""
    res = d.res
    p, n = res.p_, res.n_
    intercept = bool(res.intercept_)
    coef = [float(c) for c in res.coef_]
    one_line = intercept and res.degree_ == 1 and len(d.attr_names) == 1
    lay = _layout(d)
    xs = ", ".join(d.attr_names)
    cs.put(0, 0, f"Least-squares fit — model {d.tag}: {d.y_name} on {xs}", style="title")
    cs.status_cell = (1, 0)
    pct = f"{d.level:.0%}"
    heads = ["term", "coefficient", "in words", f"low end ({pct})",
             f"high end ({pct})", "standard error", "HC3 standard error (robust)",
             "t = coefficient / SE", "p-value (two-sided)", "variance inflation",
             "check: cos(residuals, term)", "check holds"]
    if d.boot is not None:
        heads += [f"bootstrap low ({pct})", f"bootstrap high ({pct})"]
    for c, h in enumerate(heads):
        cs.put(lay.head, c, h, style="head")
    if d.boot is not None:
        column_notes(cs, {C_BLO: f"percentiles of {d.boot.kept:,} refits on resampled rows "
                                 "(how: bottom)"}, row=lay.colnote)
    column_notes(cs, {
        C_COEF: "computed by sheetfit (least squares)",
        C_WORDS: f"the range the coefficient lies in at {pct} confidence",
        C_LO: "coefficient − t multiplier × SE",
        C_HI: "coefficient + t multiplier × SE",
        C_SE: "residual SD × √ of its (XᵀX)⁻¹ diagonal entry (bottom)",
        C_HC3: "robust to a changing spread; computed by sheetfit",
        C_T: "coefficient ÷ standard error",
        C_P: "T.DIST.2T(|t|, n − p): chance of a t this large if the term were 0",
        C_VIF: "(XᵀX)⁻¹ entry × DEVSQ of the term; above 10 the terms overlap",
        C_COS: "least squares makes it 0",
        C_OK: f"holds when |cos| ≤ {CHECK_TOL}",
    }, row=lay.colnote)

    # --- how well it fits: positions first, the coefficient rows read them ------------
    fig = _Figures(cs, lay.first + p + 1)
    coef_rng = f"{absolute(lay.first, C_COEF)}:{absolute(lay.first + p - 1, C_COEF)}"
    ssr = fsum_sq(d.resid)
    sum_y2 = fsum_sq(d.Y)
    exact = ssr <= float(EXACT_FIT) * sum_y2
    df = n - p
    R, Y = d.resid_rng, d.y_rng
    nr = fig.add("rows used (n)", n, f"=COUNT({R})", "int", "data rows in the fit")
    pr = fig.add("parameters (p)", p, f"=COUNT({coef_rng})", "int", "coefficients estimated")
    dfr = fig.add("residual degrees of freedom", df, f"={nr}-{pr}", "int", "n − p")
    lvr = fig.add("confidence level", d.level, None, "pct",
                  "the level setting (default 0.95)")
    tq = float(t_isf((1 - d.level) / 2, df)) if df > 0 else "n/a"
    tqr = fig.add("t multiplier", tq, f'=IF({dfr}>0,T.INV.2T(1-{lvr},{dfr}),"n/a")', "ratio",
                  "half-width of a range = t multiplier × standard error")
    exr_cell = fig.add("fit reproduces y exactly", "yes" if exact else "no",
                       f'=IF(SUMSQ({R})<={EXACT_FIT}*SUMSQ({Y}),"yes","no")', "text",
                       "then there is no error to estimate and t, F and the row "
                       "diagnostics read n/a")
    exr = f'{exr_cell}="yes"'
    amt = d.amount_style
    fig.add("RMSE", math.sqrt(ssr / n), f"=SQRT(SUMSQ({R})/{nr})", amt,
            "root mean squared residual (divides by n)")
    sd = math.sqrt(ssr / df) if df > 0 else "n/a"
    sd_sheet = fig.add("residual SD", sd,
                       f'=IF({nr}>{pr},SQRT(SUMSQ({R})/({nr}-{pr})),"n/a")', amt,
                       "standard error of the estimate (divides by n − p), from the residual "
                       "cells")
    sd_exact = float(res.resid_sd_) if df > 0 else math.nan
    agree = ("n/a" if not isinstance(sd, float) else
             "holds" if abs(sd - sd_exact) <= float(SD_AGREE) * max(sd_exact, 1e-300)
             or (sd_exact == 0 and sd <= 1e-9 * math.sqrt(sum_y2 / n)) else "FAILS")
    sdr = fig.add("residual SD used for ranges", _na(sd_exact), None, amt,
                  "the same from the exact residuals, computed by sheetfit; standard errors "
                  "and intervals use it")
    fig.add("check: the two SDs agree", agree,
            f'=IF(ISNUMBER({sdr}),IF(ABS({sd_sheet}-{sdr})<={SD_AGREE}*MAX({sdr},1E-300),'
            f'"holds",IF(AND({sdr}=0,{sd_sheet}<=1E-9*SQRT(SUMSQ({Y})/{nr})),"holds","FAILS")),'
            '"n/a")', "verdict", f"relative difference ≤ {SD_AGREE}: the residual cells "
            "reproduce the exact residual SD")
    sd = sd_exact if df > 0 else "n/a"
    fig.add("leave-one-out RMSE", d.rows.loo_rmse,
            f'=IF(COUNT({d.press_rng})<{nr},"n/a",SQRT(SUMSQ({d.press_rng})/{nr}))', amt,
            "RMSE when each row is predicted by the fit without it (PRESS): the figure to "
            "compare with other models and rules")
    mean = math.fsum(float(v) for v in d.Y) / n
    dev = math.fsum((float(v) - mean) * (float(v) - mean) for v in d.Y)
    if intercept:
        r2: float | str = "n/a" if dev == 0 else 1 - ssr / dev
        r2r = fig.add("R²", r2, f'=IF(DEVSQ({Y})=0,"n/a",1-SUMSQ({R})/DEVSQ({Y}))', "ratio",
                      "share of the variation of y about its mean that the fit explains")
        total, total_f, base, base_f = dev, f"DEVSQ({Y})", n - 1, f"({nr}-1)"
    else:
        r2 = "n/a" if sum_y2 == 0 else 1 - ssr / sum_y2
        r2r = fig.add("R² (uncentred)", r2, f'=IF(SUMSQ({Y})=0,"n/a",1-SUMSQ({R})/SUMSQ({Y}))',
                      "ratio", "no intercept, so R² is taken about zero, not about the mean "
                      "of y; it is not comparable with an R² of a model with intercept")
        total, total_f, base, base_f = sum_y2, f"SUMSQ({Y})", n, nr
    adj = 1 - (1 - r2) * base / df if isinstance(r2, float) and df > 0 else "n/a"
    fig.add("adjusted R²", adj,
            f'=IF(AND(ISNUMBER({r2r}),{dfr}>0),1-(1-{r2r})*{base_f}/{dfr},"n/a")', "ratio",
            "R² penalised for the number of parameters")
    dfm = p - int(intercept)
    f_ok = dfm > 0 and df > 0 and not exact
    fval = ((total - ssr) / dfm) / (ssr / df) if f_ok else "n/a"
    fr = fig.add("F statistic", fval,
                 f'=IF(AND({pr}-{int(intercept)}>0,{dfr}>0,NOT({exr})),'
                 f'(({total_f}-SUMSQ({R}))/({pr}-{int(intercept)}))/(SUMSQ({R})/{dfr}),"n/a")',
                 "dec2", "explained against unexplained variation, per degree of freedom")
    fp = float(f_sf(fval, dfm, df)) if isinstance(fval, float) else "n/a"
    fig.add("p-value of F", fp, f'=IF(ISNUMBER({fr}),F.DIST.RT({fr},{dfm},{dfr}),"n/a")',
            "pvalue", "chance of an F this large if no term mattered")
    lm = breusch_pagan(res)[0] if df > 1 and not exact else math.nan
    bpr = fig.add("Breusch–Pagan statistic", _na(lm), None, "dec2",
                  "n·R² of the squared residuals on the terms (Koenker's form), computed "
                  "by sheetfit")
    k_bp = p - int(intercept)
    bpp = float(chi2_sf(lm, k_bp)) if math.isfinite(lm) else "n/a"
    bppr = fig.add("p-value of Breusch–Pagan", bpp,
                   f'=IF(ISNUMBER({bpr}),CHISQ.DIST.RT({bpr},{k_bp}),"n/a")', "pvalue",
                   "chance of a statistic this large if the spread did not change")
    fans, steady = ("fans out: quote the HC3 standard errors", "no sign that it changes")
    verdict = "n/a" if not isinstance(bpp, float) else (fans if bpp < BP_LEVEL else steady)
    fig.add("residual spread", verdict,
            f'=IF(ISNUMBER({bppr}),IF({bppr}<{BP_LEVEL:g},"{fans}","{steady}"),"n/a")',
            "text", f"tested at {BP_LEVEL:.0%}")
    if one_line:
        fig.add("correlation r", float(np.corrcoef(d.tvals[0], d.Y)[0, 1]),
                f"=CORREL({Y},{d.term_rngs[0]})", "ratio", "Pearson correlation of y and x")
    for what, k in FIGURE_LINE.items():  # the rows other sheets' formulas read
        if lay.figure_row(what) != fig.first + k:
            raise RuntimeError(f"fit figure '{what}' moved; update FIGURE_LINE")
    row = fig.row + 1
    row = _plan_range(cs, row, d)
    if one_line:
        row = _plan_high_low(cs, row + 1, d, coef)
    if d.rule is not None:
        row = _plan_rule(cs, row + 1, d, coef, fig.refs)

    # --- how the numbers were computed (bottom) ----------------------------------------
    inv_cell, row = _plan_matrices(cs, row + 1, d)

    # --- the coefficient rows ---------------------------------------------------------
    table = coef_table(res, d.level)
    sums = (fsum_sq(d.resid), fsum_sq(d.Y))  # the orthogonality checks' scale, once
    for k, term in enumerate(res.terms_):
        r = lay.first + k
        a = r + 1
        B, F, H = (f"{col_letter(c + 1)}{a}" for c in (C_COEF, C_SE, C_T))
        cs.put(r, C_TERM, term, style="label")
        cs.put(r, C_COEF, coef[k], style=coef_style(coef[k]))
        inv_jj = float(res.xtx_inv_[k, k])
        se = sd * math.sqrt(inv_jj) if isinstance(sd, float) else "n/a"
        cs.put(r, C_SE, se, f'=IF(ISNUMBER({sdr}),{sdr}*SQRT({inv_cell(k, k)}),"n/a")',
               coef_style(se if isinstance(se, float) else 0.0, 3))
        cs.put(r, C_HC3, _na(float(table.hc3_se[k])), style=coef_style(float(table.hc3_se[k]), 3))
        t = coef[k] / se if isinstance(se, float) and se != 0 and not exact else "n/a"
        cs.put(r, C_T, t, f'=IF(AND(ISNUMBER({F}),NOT({exr})),{B}/{F},"n/a")', "dec2")
        pv = float(2 * t_sf(abs(t), df)) if isinstance(t, float) else "n/a"
        cs.put(r, C_P, pv, f'=IF(ISNUMBER({H}),T.DIST.2T(ABS({H}),{dfr}),"n/a")', "pvalue")
        ok = isinstance(se, float) and isinstance(tq, float)
        lo = coef[k] - tq * se if ok else "n/a"  # type: ignore[operator]
        hi = coef[k] + tq * se if ok else "n/a"  # type: ignore[operator]
        cs.put(r, C_LO, lo, f'=IF(ISNUMBER({F}),{B}-{tqr}*{F},"n/a")', coef_style(coef[k], 4))
        cs.put(r, C_HI, hi, f'=IF(ISNUMBER({F}),{B}+{tqr}*{F},"n/a")', coef_style(coef[k], 4))
        cs.put(r, C_WORDS, range_words(_what(term, k, intercept, one_line, d.y_name),
                                       lo if isinstance(lo, float) else math.nan,
                                       hi if isinstance(hi, float) else math.nan, d.level))
        if intercept and k == 0:
            value = _cosine(d.resid, np.ones(n), sums)
            f = _check_formula(R, None, Y)
        else:
            j = k - int(intercept)
            t_rng = d.term_rngs[j]
            value = _cosine(d.resid, d.tvals[j], sums)
            f = _check_formula(R, t_rng, Y)
            tv = d.tvals[j]
            if intercept:
                tv_ = np.asarray(tv, dtype=float)
                m = exact_sum(tv_) / n
                off = tv_ - m
                ss = exact_dot(off, off)  # same products, exact sum
                cs.put(r, C_VIF, inv_jj * ss, f"={inv_cell(k, k)}*DEVSQ({t_rng})", "dec1")
            else:
                cs.put(r, C_VIF, inv_jj * fsum_sq(tv), f"={inv_cell(k, k)}*SUMSQ({t_rng})",
                       "dec1")
        cs.put(r, C_COS, value, f, "check")
        if d.boot is not None:
            cs.put(r, C_BLO, _na(float(d.boot.coef_lo[k])), style=coef_style(coef[k], 4))
            cs.put(r, C_BHI, _na(float(d.boot.coef_hi[k])), style=coef_style(coef[k], 4))
        K = f"{col_letter(C_COS + 1)}{a}"
        cs.put(r, C_OK, "holds" if abs(value) <= float(CHECK_TOL) else "FAILS",
               f'=IF(ABS({K})<={CHECK_TOL},"holds","FAILS")', "verdict")
    cs.landscape, cs.pages_wide = True, 2
    cs.widths = {C_TERM: 30, C_COEF: 16, C_WORDS: 58, C_LO: 14, C_HI: 14, C_SE: 14,
                 C_HC3: 16, C_T: 13, C_P: 13, C_VIF: 11, C_COS: 16, C_OK: 16, C_BLO: 14,
                 C_BHI: 14}
    cs.freeze = (lay.first, 1)
    _plan_answer(cs, d, fig.refs)
    return coef_rng


def _plan_answer(cs: SheetPlan, d: CoefInputs, figs: dict[str, tuple[str, object]]) -> None:
    """The top of the sheet: the new rows' predictions with their range and flag, then the
    key figures — each a formula pointing at the cell it repeats."""
    lay = _layout(d)
    cs.put(lay.answer, 0, "The answer", style="label")
    pct = f"{d.level:.0%}"
    if d.answer:
        r = lay.answer + 1
        heads_k = key_heads(d.new_keys) if d.new_keys is not None else ["new row"]
        nk = len(heads_k)
        heads = heads_k + [f"predicted {d.y_name}", f"one new value: low ({pct})",
                               f"one new value: high ({pct})", "flag"]
        for c, h in enumerate(heads):
            cs.put(r, c, h, style="head")
        styles = key_styles(d.new_keys)
        for i, a in enumerate(d.answer):
            rr = r + 1 + i
            if d.new_keys is not None:
                put_keys(cs, rr, 0, d.new_keys, a.index, styles)
            else:
                cs.put(rr, 0, a.sheet_row, style="row")
            cs.put(rr, nk, a.pred[1], f"={a.pred[0]}", d.answer_style)
            cs.put(rr, nk + 1, a.low[1], f"={a.low[0]}", d.amount_style)  # type: ignore[arg-type]
            cs.put(rr, nk + 2, a.high[1], f"={a.high[0]}", d.amount_style)  # type: ignore[arg-type]
            cs.put(rr, nk + 3, a.flag, style="flag")
    r2 = "R²" if "R²" in figs else "R² (uncentred)"
    keys = [("rows used (n)", "int"), ("RMSE", d.amount_style),
            ("leave-one-out RMSE", d.amount_style), (r2, "ratio")]
    for c, (label, style) in enumerate(keys):
        ref, value = figs[label]
        cs.put(lay.key_head, c, label, style="head")
        cs.put(lay.key_head + 1, c, value, f"={ref}", style)  # type: ignore[arg-type]


def _layout(d: CoefInputs) -> CoefLayout:
    if d.lay is None:
        raise ValueError("the coefficient sheet needs its layout")
    return d.lay


def _what(term: str, k: int, intercept: bool, one_line: bool, y: str) -> str:
    if intercept and k == 0:
        return ("the fixed part (intercept, within the relevant range)" if one_line
                else "the intercept")
    return f"the change in {y} per unit of {term}"


class _Figures:
    """Rows of (label, value or formula, meaning), handing back each value's cell."""

    def __init__(self, cs: SheetPlan, head_row: int) -> None:
        self.cs, self.row = cs, head_row + 1
        self.first = self.row
        self.refs: dict[str, tuple[str, object]] = {}
        for c, h in enumerate(["how well it fits", "value", "what it is"]):
            cs.put(head_row, c, h, style="head")

    def add(self, label: str, value: object, formula: str | None, style: str,
            what: str) -> str:
        self.cs.put(self.row, 0, label, style="label")
        self.cs.put(self.row, 1, value, formula, style)  # type: ignore[arg-type]
        self.cs.put(self.row, 2, what, style="note")
        ref = absolute(self.row, 1)
        self.refs[label] = (ref, value)
        self.row += 1
        return ref


def _cosine(r: np.ndarray | Lazy, t: np.ndarray, sums: tuple[float, float]) -> float:
    """What the check formula evaluates to: 0 for an exact fit, else cos(r, t); ``sums``
    are fsum_sq of the residuals and of y (the same for every term)."""
    ssr, ssy = sums
    if ssr <= float(EXACT_FIT) * ssy:
        return 0.0
    # the products rounded as a * b is, summed exactly
    return exact_dot(r, t) / math.sqrt(ssr * fsum_sq(t))


def _check_formula(r: str, t: str | None, y: str) -> str:
    """Native check formula: cosine of the angle between residuals r and term column t."""
    guard = f"SUMSQ({r})<={EXACT_FIT}*SUMSQ({y})"
    if t is None:  # the intercept's column is all ones
        return f"=IF({guard},0,SUM({r})/SQRT(SUMSQ({r})*COUNT({r})))"
    return f"=IF({guard},0,SUMPRODUCT({r},{t})/SQRT(SUMSQ({r})*SUMSQ({t})))"


def _plan_range(cs: SheetPlan, row: int, d: CoefInputs) -> int:
    cs.put(row, 0, "relevant range", style="head")
    cs.put(row, 1, "smallest", style="head")
    cs.put(row, 2, "largest", style="head")
    cs.put(row + 1, 0, "Outside these values a prediction is an extrapolation.", style="note")
    r = row + 2
    for name, lo, hi, rng in d.range_lines:
        cs.put(r, 0, name, style="label")
        cs.put(r, 1, lo, f"=MIN({rng})", "num")
        cs.put(r, 2, hi, f"=MAX({rng})", "num")
        r += 1
    return r


def _plan_high_low(cs: SheetPlan, row: int, d: CoefInputs, coef: list[float]) -> int:
    """The high-low estimate of a cost line beside the least-squares one (one attribute)."""
    lay = _layout(d)
    x, y = d.tvals[0], d.Y
    X, Y = d.term_rngs[0], d.y_rng
    i_hi, i_lo = int(np.argmax(x)), int(np.argmin(x))  # MATCH(…,0) finds the first too
    cs.put(row, 0, "high-low estimate", style="head")
    cs.put(row, 1, "value", style="head")
    cs.put(row, 2, "what it is", style="head")
    flags = d.rows.flags
    hi_row, lo_row = int(d.data_rows[i_hi]), int(d.data_rows[i_lo])
    r0 = row + 1
    xh, yh, xl, yl = float(x[i_hi]), float(y[i_hi]), float(x[i_lo]), float(y[i_lo])
    rate = (yh - yl) / (xh - xl)
    fixed = yh - rate * xh
    ref = [absolute(r0 + k, 1) for k in range(8)]
    lines: list[tuple[str, object, str, str, str]] = [
        ("highest driver", xh, f"=MAX({X})", "num",
         f"data row {hi_row}" + (f" — flagged {flags[i_hi]}" if flags[i_hi] else "")),
        ("its response", yh, f"=INDEX({Y},MATCH({ref[0]},{X},0))", "num", ""),
        ("lowest driver", xl, f"=MIN({X})", "num",
         f"data row {lo_row}" + (f" — flagged {flags[i_lo]}" if flags[i_lo] else "")),
        ("its response", yl, f"=INDEX({Y},MATCH({ref[2]},{X},0))", "num", ""),
        ("variable rate (high-low)", rate, f"=({ref[1]}-{ref[3]})/({ref[0]}-{ref[2]})",
         "coef", "change in response between the two rows per unit of driver"),
        ("fixed part (high-low)", fixed, f"={ref[1]}-{ref[4]}*{ref[0]}", "coef",
         "response at the highest row less its variable part"),
        ("least-squares variable rate", coef[1], f"={absolute(lay.first + 1, C_COEF)}",
         "coef", "from the table above"),
        ("difference (high-low − least squares)", rate - coef[1], f"={ref[4]}-{ref[6]}",
         "coef", ("two rows against all rows: the high-low figure rests on two rows only; "
                  "when either is flagged it is not representative")),
    ]
    for k, (label, value, formula, style, what) in enumerate(lines):
        cs.put(r0 + k, 0, label, style="label")
        cs.put(r0 + k, 1, value, formula, style)  # type: ignore[arg-type]
        cs.put(r0 + k, 2, what, style="note")
    return r0 + len(lines)


def _plan_rule(cs: SheetPlan, row: int, d: CoefInputs, coef: list[float],
               figs: dict[str, tuple[str, object]]) -> int:
    """The rule in use today beside the least-squares fit: coefficients, RMSE, a verdict."""
    lay = _layout(d)
    rule = d.rule
    if rule is None:
        raise ValueError("_plan_rule needs a rule")
    n = d.res.n_
    for c, h in enumerate(["the rule in use today", "rule", "least squares",
                           "difference (rule − fit)"]):
        cs.put(row, c, h, style="head")
    r = row + 1
    for k, term in enumerate(d.res.terms_):
        cs.put(r, 0, term, style="label")
        cs.put(r, 1, rule.values[k], f"={rule.cells[k]}", "coef")
        cs.put(r, 2, coef[k], f"={absolute(lay.first + k, C_COEF)}", "coef")
        cs.put(r, 3, rule.values[k] - coef[k], f"={absolute(r, 1)}-{absolute(r, 2)}", "coef")
        r += 1
    sq = math.fsum((float(a) - float(b)) * (float(a) - float(b))
                   for a, b in zip(d.Y, rule.fitted))
    rule_rmse = math.sqrt(sq / n)
    n_ref = figs["rows used (n)"][0]
    rmse_ref, rmse = figs["RMSE"]
    loo_ref, loo = figs["leave-one-out RMSE"]
    rr = absolute(r, 1)
    lines: list[tuple[str, object, str | None, str, str]] = [
        ("RMSE of the rule on these rows", rule_rmse,
         f"=SQRT(SUMXMY2({d.y_rng},{rule.fitted_rng})/{n_ref})", "num",
         "the rule was not fitted to these rows, so this is its honest error here"),
        ("RMSE of the fit on these rows", rmse, f"={rmse_ref}", "num",
         "least squares minimises this on these rows: in-sample the rule can only tie or lose"),
        ("leave-one-out RMSE of the fit", loo, f"={loo_ref}", "num",
         "the fair comparison: each row predicted by the fit without it"),
    ]
    loo_v = float(loo) if isinstance(loo, float) else math.nan
    fair = math.isfinite(loo_v)
    closer = ("n/a" if not fair else "the fit" if loo_v < rule_rmse
              else "the rule" if loo_v > rule_rmse else "neither")
    gap = rule_rmse - loo_v
    lr = absolute(r + 2, 1)
    lines.append(("closer on rows it did not see", closer,
                  (f'=IF(ISNUMBER({lr}),IF({lr}<{rr},"the fit",IF({lr}>{rr},"the rule",'
                   '"neither")),"n/a")'), "text",
                  "leave-one-out RMSE of the fit against the rule's"))
    lines.append(("by (rule RMSE − fit leave-one-out RMSE)", gap if fair else "n/a",
                  f'=IF(ISNUMBER({lr}),{rr}-{lr},"n/a")', "num",
                  "positive: the fit predicts better than the rule"))
    for k, (label, value, formula, style, what) in enumerate(lines):
        cs.put(r + k, 0, label, style="label")
        cs.put(r + k, 1, value, formula, style)  # type: ignore[arg-type]
        cs.put(r + k, 2, what, style="note")
    r += len(lines)
    if fair:
        share = gap / rule_rmse if rule_rmse else math.nan
        verdict = (f"the fit is closer by {number(gap)} ({share:.0%})." if closer == "the fit"
                   else f"the rule is closer by {number(-gap)}." if closer == "the rule"
                   else "they tie.")
        text = (f"On these {n} rows the rule's RMSE is {number(rule_rmse)}; the fit's "
                f"leave-one-out RMSE is {number(loo_v)}: {verdict}")
        cs.put(r, 0, text, style="note")
        r += 1
    return r


def _plan_matrices(cs: SheetPlan, row: int, d: CoefInputs):  # type: ignore[no-untyped-def]
    """The method note, (XᵀX)⁻¹ as computed, XᵀX as formulas, and their product."""
    lay = _layout(d)
    res = d.res
    p = res.p_
    terms = res.terms_
    intercept = bool(res.intercept_)
    cs.put(row, 0, "how the numbers were computed", style="head")
    cs.put(row, 1, "", style="head")
    row = cs.note(row + 1, 0, f"sheetfit {d.version}: {d.method_note}.", width=120)
    row = cs.note(row, 0, (
        "Standard errors are the residual SD times the square root of the diagonal of "
        "(XᵀX)⁻¹ below; HC3 standard errors and the Breusch–Pagan statistic are computed by "
        "sheetfit (HC3: (XᵀX)⁻¹ Xᵀ diag(eᵢ²/(1−hᵢ)²) X (XᵀX)⁻¹)."), width=120)
    if d.boot is not None:
        bs = d.boot
        row = cs.note(row, 0, (
            f"Bootstrap: {bs.resamples:,} resamples of the {res.n_:,} rows, drawn with "
            f"replacement by numpy.random.default_rng({bs.seed}).integers(0, n, (resamples, "
            f"n)) in batches; each refitted by least squares; {bs.method}: the "
            f"{bs.level:.0%} range is the {(1 - bs.level) / 2:.1%} and "
            f"{(1 + bs.level) / 2:.1%} quantiles (numpy's default, linear) of the "
            f"{bs.kept:,} refits"
            + (f" ({bs.skipped:,} resamples could not estimate every term and were skipped)"
               if bs.skipped else "") + ". The same seed and count give the same ranges."),
            width=120)
    inv = np.asarray(res.xtx_inv_)
    top = row + 1
    cs.put(top, 0, "(XᵀX)⁻¹ as computed", style="label")
    for j, t in enumerate(terms):
        cs.put(top, 1 + j, t, style="head")
        cs.put(top + 1 + j, 0, t, style="label")
        for k in range(p):
            cs.put(top + 1 + j, 1 + k, float(inv[j, k]), style="check")

    def inv_cell(j: int, k: int) -> str:
        return absolute(top + 1 + j, 1 + k)

    # XᵀX from the data, as formulas over the term columns of the fitted-value sheet
    g0 = top + p + 2
    cs.put(g0, 0, "XᵀX from your data", style="label")
    cols: list[np.ndarray | None] = ([None] if intercept else []) + list(d.tvals)
    rngs: list[str | None] = ([None] if intercept else []) + list(d.term_rngs)
    n = res.n_
    G = np.empty((p, p))
    for j, t in enumerate(terms):
        cs.put(g0, 1 + j, t, style="head")
        cs.put(g0 + 1 + j, 0, t, style="label")
        for k in range(p):
            a, b = cols[j], cols[k]
            ra, rb = rngs[j], rngs[k]
            if a is None and b is None:
                v, f = float(n), f"=COUNT({d.resid_rng})"
            elif a is None or b is None:
                col, rng = (b, rb) if a is None else (a, ra)
                v, f = exact_sum(col if col is not None else []), f"=SUM({rng})"
            else:
                v = exact_dot(a, b)
                f = f"=SUMPRODUCT({ra},{rb})"
            G[j, k] = v
            cs.put(g0 + 1 + j, 1 + k, v, f, "int" if v == round(v) and abs(v) < 1e15 else "check")
    P = inv @ G
    dev = float(np.abs(P - np.eye(p)).sum())
    row = g0 + p + 2
    if dev <= IDENTITY_TOL:
        # One verdict cell: the products themselves are sums that cancel to ~1e-11 and
        # differ between engines in those last digits; whether they are within the
        # tolerance of the identity does not.
        inv_blk = f"{inv_cell(0, 0)}:{inv_cell(p - 1, p - 1)}"
        g_blk = f"{absolute(g0 + 1, 1)}:{absolute(g0 + p, p)}"
        diag = [f"SUMPRODUCT({inv_cell(j, 0)}:{inv_cell(j, p - 1)},"
                f"{absolute(g0 + 1 + j, 1)}:{absolute(g0 + 1 + j, p)})" for j in range(p)]
        total = math.fsum(abs(math.fsum(float(inv[j, m]) * float(G[k, m]) for m in range(p))
                              - (1.0 if j == k else 0.0))
                          for j in range(p) for k in range(p))
        formula = (f"=IF(SUMPRODUCT(ABS(MMULT({inv_blk},{g_blk})))"
                   f"-({'+'.join(f'ABS({c})' for c in diag)})"
                   f"+({'+'.join(f'ABS({c}-1)' for c in diag)})<={IDENTITY_CHECK},"
                   '"holds","FAILS")')
        cs.put(row, 0, f"check: (XᵀX)⁻¹ · XᵀX is the identity (sum of |deviations| ≤ "
                       f"{IDENTITY_CHECK})", style="label")
        cs.put(row, 1, "holds" if total <= float(IDENTITY_CHECK) else "FAILS", formula)
        row += 1
    else:
        row = cs.note(row, 0, (
            f"XᵀX is too ill conditioned for a spreadsheet's double-precision product to "
            f"reproduce the identity (a plain evaluation is off by {dev:.1e}); the inverse "
            "above was computed in exact rational arithmetic from the same data and each "
            "entry rounded once."), width=120)
    if intercept and res.degree_ == 1 and len(d.attr_names) == 1:
        x_rng = d.term_rngs[0]
        xv, yv = d.tvals[0], d.Y
        rr = float(np.corrcoef(xv, yv)[0, 1])
        slope = rr * float(np.std(yv)) / float(np.std(xv))
        cs.put(row, 0, "slope = r × SD(y) / SD(x)", style="label")
        cs.put(row, 1, slope,
               f"=CORREL({d.y_rng},{x_rng})*STDEV.P({d.y_rng})/STDEV.P({x_rng})", "coef")
        coef1 = float(res.coef_[1])
        same = abs(slope - coef1) <= 1e-9 * max(abs(coef1), 1e-300)
        cs.put(row, 2, "holds" if same else "FAILS",
               f'=IF(ABS({absolute(row, 1)}-{absolute(lay.first + 1, C_COEF)})<=1E-9*'
               f'ABS({absolute(lay.first + 1, C_COEF)}),"holds","FAILS")')
        cs.put(row, 3, "check: the least-squares slope equals r × SD(y) / SD(x) "
                       "(to 9 digits)", style="note")
        row += 1
    return inv_cell, row
