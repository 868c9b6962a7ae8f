"""Sheet plans for a least-squares model: coefficients with checks, fitted values, residuals.

Every cached value is computed here the way its formula computes it (same
operations, same order), so an engine that recalculates the book reproduces it.
"""

from __future__ import annotations

import math

import numpy as np

from ..a1 import absolute, col_letter, quote_sheet
from ..declare.model import ModelData
from ..fit.bootstrap import Bootstrap
from ..fit.distributions import t_isf
from ..fit.inference import intervals, leverage
from ..fit.leastsq import LeastSquaresResult
from ..fit.results import Fitted
from ..owned import sheet_title
from ..vectors import Lazy
from ._ls_audit import Threshold, plan_audit
from ._ls_coef import (
    C_COEF,
    C_HC3,
    C_SE,
    EXACT_FIT,
    AnswerRow,
    CoefInputs,
    CoefLayout,
    RuleFit,
    plan_coef_sheet,
)
from ._ls_rows import plan_influence
from .columns import Part, template
from .common import (
    FIRST_ROW,
    column_notes,
    consecutive_rows,
    fsum_sq,
    key_heads,
    key_runs,
    key_styles,
    key_width,
    plan_left_out,
    plan_residual_sheet,
    put_keys,
    ref_parts,
    sheet_rows,
    value_parts,
)
from .plan import Planned, SheetPlan, decimal_style

__all__ = ["plan_least_squares"]



def _term_values(X: np.ndarray, degree: int) -> list[tuple[int, int]]:
    """(attribute column, power) of each non-constant term, in coefficient order."""
    if degree > 1:
        return [(0, d) for d in range(1, degree + 1)]
    return [(j, 1) for j in range(X.shape[1])]


def _prediction(coef: np.ndarray, coef_ref: list[str], intercept: bool,
                specs: list[tuple[int, int]], cells: list[str], xs: np.ndarray,
                ) -> tuple[str, float, list[tuple[str, float]]]:
    """Formula and value of intercept + Σ coefficient × term for one row, in formula order.

    ``cells`` are the row's attribute cell references and ``xs`` their values; returns
    the formula, its value, and each term's (reference, value).
    """
    parts: list[str] = [coef_ref[0]] if intercept else []
    value = float(coef[0]) if intercept else 0.0
    terms = []
    for k, (j, d) in enumerate(specs):
        ref = cells[j] if d == 1 else f"{cells[j]}^{d}"
        tv = float(xs[j]) ** d if d > 1 else float(xs[j])
        terms.append((ref, tv))
        parts.append(f"{coef_ref[k + int(intercept)]}*{ref}")
        prod = float(coef[k + int(intercept)]) * tv
        value = prod if (k == 0 and not intercept) else value + prod
    return "=" + "+".join(parts), value, terms


def _predictions(coef: np.ndarray, coef_ref: list[str], intercept: bool,
                 specs: list[tuple[int, int]], cells: list[tuple[Part, ...]],
                 tvals: list[np.ndarray]) -> tuple[Lazy, list[list[Part]]]:
    """:func:`_prediction` for every row: the fitted values in formula order (intercept,
    then + coefficient × term, left to right: the same floating-point operations, element
    by element), made a block of rows at a time as they are read, and each term's
    template parts."""
    parts = [list(cells[j]) + ([f"^{d}"] if d > 1 else []) for j, d in specs]
    c = [float(v) for v in coef]

    def make(a: int, b: int) -> np.ndarray:
        value = np.full(b - a, c[0] if intercept else 0.0)
        for k in range(len(specs)):
            prod = c[k + int(intercept)] * np.asarray(tvals[k][a:b], dtype=float)
            value = prod if (k == 0 and not intercept) else value + prod
        return value

    return Lazy(len(tvals[0]) if tvals else 0, make), parts


def plan_least_squares(model: ModelData, fitted_: Fitted[LeastSquaresResult],
                       version: str) -> Planned:
    """Plan the coefficient, fitted-value and residual sheets of a fitted model.

    Coefficients, standard errors, leverages and the method note come from the result.
    Fitted values, residuals and the figures built on them are cached as their formulas
    compute them (coefficient cells times data cells, left to right), which differs from
    the result's correctly rounded values in the last digits; ``_prediction`` and the
    coefficient sheet hold that arithmetic beside the formulas it mirrors.
    """
    res = fitted_.result
    tag, y = model.tag, model.y
    coef = np.asarray(res.coef_, dtype=float)
    intercept = bool(res.intercept_)
    degree = int(res.degree_)
    terms: list[str] = list(res.terms_)
    n = len(model.used)
    p = len(coef)
    level = float(model.settings.values.get("level", 0.95))
    specs = _term_values(model.X, degree)
    tvals = [model.X[:, j] ** d if d > 1 else model.X[:, j] for j, d in specs]
    # the fitted sheet's term cells: a power as Python's float ** int computes it, row by
    # row (numpy's x ** 2 is x * x, which can differ in the last bit)
    term_vals = [np.array([v ** d for v in model.X[:, j].tolist()]) if d > 1
                 else np.asarray(model.X[:, j], dtype=float) for j, d in specs]

    cs = SheetPlan(sheet_title(tag, "coef"))
    fs = SheetPlan(sheet_title(tag, "fitted"))
    lay = CoefLayout(p, 0 if model.new is None else model.new.n)
    coef_ref = [cs.ref(lay.first + k, C_COEF) for k in range(p)]
    amount = decimal_style(model.Y, fmt=y.fmt)
    derived = decimal_style(model.Y, least=2, fmt=y.fmt)

    # --- fitted-value sheet -------------------------------------------------------
    last = FIRST_ROW + n - 1
    fs.put(0, 0, f"Fitted values — model {tag}", style="title")
    fs.put(1, 0, "Each fitted value is a formula: the coefficients on sheet "
           f"'{cs.title}' times the term values from your data cells.", style="note")
    keys = model.keys
    nk = key_width(keys)
    kstyles = key_styles(keys)
    head = (["data row"] + key_heads(keys)
            + [f"{y.name} (observed)"] + terms[int(intercept):] + [f"fitted {y.name}"])
    for c, h in enumerate(head):
        fs.put(3, c, h, style="head")
    obs_col = 1 + nk
    first_term = obs_col + 1
    fit_col = first_term + len(specs)
    term_styles = [decimal_style(t, fmt=model.xs[j].fmt if d == 1 else None)
                   for t, (j, d) in zip(tvals, specs, strict=True)]
    used = np.asarray(model.used, dtype=np.int64)
    fs.run(0, FIRST_ROW, sheet_rows(used, y.first_row), style="row")
    key_runs(fs, FIRST_ROW, 1, keys, used, kstyles)
    fs.run(obs_col, FIRST_ROW, np.asarray(model.Y, dtype=float), template("=", *ref_parts(y, used)), amount)
    fitted, term_parts = _predictions(coef, coef_ref, intercept, specs,
                                      [value_parts(c, used) for c in model.xs], term_vals)
    for k, parts in enumerate(term_parts):
        fs.run(first_term + k, FIRST_ROW, term_vals[k],
               template("=", *parts), term_styles[k])
    fs.run(fit_col, FIRST_ROW, fitted, template(*_sum_parts(coef_ref, intercept, term_parts)),
           derived)
    fs.widths = {0: 9, fit_col: 16}
    column_notes(fs, {obs_col: "your data cell", fit_col: "coefficients × terms, left to right"})
    fs.freeze = (FIRST_ROW, 1 + nk)
    rule_fit: RuleFit | None = None
    if model.rule is not None:
        rule_fit = _plan_rule_column(fs, model, specs, intercept, fit_col + 1, last, derived,
                                     term_vals)
    term_rngs = [fs.col_range(first_term + k, FIRST_ROW, last) for k in range(len(specs))]
    y_rng = fs.col_range(obs_col, FIRST_ROW, last)

    # --- residual sheet with the row diagnostics ----------------------------------------
    Y = np.asarray(model.Y, dtype=float)
    # what observed − fitted gives on the residual sheet, a block of rows at a time
    resid = Lazy(n, lambda a, b: Y[a:b] - fitted[a:b])
    rs = plan_residual_sheet(
        model, (f"{_q(fs.title)}!{col_letter(fit_col + 1)}", consecutive_rows(n, FIRST_ROW + 1)),
        fitted, resid,
        "residual = observed − fitted, each a formula; to the right, how much each row "
        "moves the fit.", keys=model.keys)
    resid_rng = rs.col_range(rs.columns["resid"], FIRST_ROW, last)
    ssr = fsum_sq(resid)
    df = n - p
    exact = ssr <= float(EXACT_FIT) * fsum_sq(model.Y)
    sd = float(res.resid_sd_) if df > 0 and not exact else None
    lev = leverage(res)
    rows = plan_influence(rs, lev, resid, cs.ref(lay.figure_row("sd used"), 1), sd,
                          cs.ref(lay.figure_row("exact"), 1), n, p, derived)

    # new rows to predict, to the right of the fitted values
    names: list[tuple[str, str]] = []
    side = fit_col + (3 if rule_fit is not None else 2)
    answer: list[AnswerRow] = []
    boot = fitted_.extra if isinstance(fitted_.extra, Bootstrap) else None
    if model.new is not None:
        side = _plan_new(fs, model, fitted_, coef, coef_ref, specs, intercept, side, names,
                         level, cs, lev, lay, derived, answer, boot)
    plan_left_out(fs, model, side)

    # --- coefficient sheet ----------------------------------------------------------
    range_lines = [(model.xs[j].name, float(res.x_min_[j]), float(res.x_max_[j]),
                    term_rngs[k]) for k, (j, d) in enumerate(specs) if d == 1]
    d_in = CoefInputs(
        tag=tag, y_name=y.name, attr_names=model.attribute_names, res=res, level=level,
        specs=specs, tvals=tvals, Y=model.Y, resid=resid, y_rng=y_rng, resid_rng=resid_rng,
        term_rngs=term_rngs, press_rng=rs.col_range(rows.press_col, FIRST_ROW, last),
        rows=rows, method_note=res.method_note_, version=version,
        left_out=len(model.left_out),
        range_lines=range_lines, data_rows=sheet_rows(used, y.first_row),
        rule=rule_fit, lay=lay, answer=answer, boot=boot,
        new_keys=None if model.new is None else model.new.keys,
        amount_style=derived, answer_style=decimal_style(model.Y, least=2, fmt=y.fmt,
                                                         answer=True))
    audit = _plan_audit(model, res, fs, obs_col, fit_col, fitted, cs, level, lay)
    coef_rng = plan_coef_sheet(cs, d_in)
    names = [
        (f"sf_{tag}_coef", coef_rng if "!" in coef_rng else f"{_q(cs.title)}!{coef_rng}"),
        (f"sf_{tag}_se", f"{_q(cs.title)}!{_col_abs(C_SE, lay.first, lay.first + p - 1)}"),
        (f"sf_{tag}_robust", f"{_q(cs.title)}!{_col_abs(C_HC3, lay.first, lay.first + p - 1)}"),
        (f"sf_{tag}_fitted", fs.col_range(fit_col, FIRST_ROW, last)),
        (f"sf_{tag}_resid", resid_rng),
        (f"sf_{tag}_loo", cs.ref(lay.figure_row("loo"), 1)),  # read by the charts
    ] + names
    return Planned([cs, fs, rs] + ([audit] if audit is not None else []), names)


def _plan_audit(model: ModelData, res: LeastSquaresResult, fs: SheetPlan, obs_col: int,
                fit_col: int, fitted: Lazy, cs: SheetPlan,
                level: float, lay: CoefLayout) -> SheetPlan | None:
    """The audit sheet when a threshold is set (its caution reaches the index and the
    coefficient sheet through the method record's cautions)."""
    setting = model.settings.values.get("threshold")
    if setting is None:
        return None
    kind, value = setting
    threshold = Threshold(float(value), kind == "sd")
    n, p = res.n_, res.p_
    df = res.df_resid_
    sd = float(res.resid_sd_) if df > 0 else None
    tq = float(t_isf((1 - level) / 2, df)) if df > 0 else math.nan
    half = tq * sd * math.sqrt(1 + p / n) if sd is not None else math.nan
    rows = range(len(model.used))
    return plan_audit(
        model, [fs.ref(FIRST_ROW + i, obs_col, fixed=False) for i in rows],
        [fs.ref(FIRST_ROW + i, fit_col, fixed=False) for i in rows], np.asarray(fitted),
        threshold,
        cs.ref(lay.figure_row("sd used"), 1), sd, half, level)


def _q(title: str) -> str:
    return quote_sheet(title)


def _col_abs(col: int, r1: int, r2: int) -> str:
    return f"{absolute(r1, col)}:{absolute(r2, col)}"


def _plan_rule_column(fs: SheetPlan, model: ModelData, specs: list[tuple[int, int]],
                      intercept: bool, col: int, last: int, style: str,
                      term_vals: list[np.ndarray]) -> RuleFit:
    """The rule in use today, applied to every data row (its coefficients × the data)."""
    rule = model.rule
    if rule is None:
        raise ValueError("_plan_rule_column needs a declared rule")
    fs.put(3, col, "rule in use: fitted", style="head")
    used = np.asarray(model.used, dtype=np.int64)
    values, parts = _predictions(np.asarray(rule.values, dtype=float), list(rule.cells),
                                 intercept, specs, [value_parts(c, used) for c in model.xs],
                                 term_vals)
    fs.run(col, FIRST_ROW, values, template(*_sum_parts(list(rule.cells), intercept, parts)),
           style)
    fs.widths[col] = 16
    return RuleFit(rule.name, rule.cells, [float(v) for v in rule.values],
                   fs.col_range(col, FIRST_ROW, last), values)


def _sum_parts(coef_ref: list[str], intercept: bool, term_parts: list[list[Part]]) -> list[Part]:
    """Template parts of intercept + coefficient × term + …, as ``_prediction`` writes it."""
    out: list[Part] = ["="]
    if intercept:
        out.append(coef_ref[0])
    for k, parts in enumerate(term_parts):
        if k or intercept:
            out.append("+")
        out += [coef_ref[k + int(intercept)], "*", *parts]
    return out


def _plan_new(fs: SheetPlan, model: ModelData, fitted_: Fitted[LeastSquaresResult],
              coef: np.ndarray, coef_ref: list[str], specs: list[tuple[int, int]],
              intercept: bool, side: int, names: list[tuple[str, str]], level: float,
              cs: SheetPlan, data_lev: np.ndarray, lay: CoefLayout, style: str,
              answer: list[AnswerRow], boot: Bootstrap | None) -> int:
    """The new rows to the right of the fitted values: prediction, leverage, the range for
    the average and for one new value, and the flag; each row also goes to ``answer``."""
    new = model.new
    if new is None:
        raise ValueError("_plan_new needs declared new rows")
    res = fitted_.result
    tag = model.tag
    iv = intervals(res, new.X, level)
    keys = new.keys
    nk = key_width(keys)
    kstyles = key_styles(keys)
    heads = (["new row"] + key_heads(keys)
             + [c.name if c.name else model.xs[j].name for j, c in enumerate(new.columns)])
    for c, h in enumerate(heads):
        fs.put(3, side + c, h, style="head")
    pcol = side + len(heads)
    pct = f"{level:.0%}"
    more = [f"predicted {model.y.name}", "leverage x₀ᵀ(XᵀX)⁻¹x₀",
            f"average: low ({pct})", f"average: high ({pct})",
            f"one new value: low ({pct})", f"one new value: high ({pct})", "flag"]
    if boot is not None:
        more += [f"average: bootstrap low ({pct})", f"average: bootstrap high ({pct})"]
    for k, h in enumerate(more):
        fs.put(3, pcol + k, h, style="head")
    column_notes(fs, {pcol: "coefficients × this row's terms",
                      pcol + 1: "computed by sheetfit",
                      pcol + 2: "prediction − t × residual SD × √leverage",
                      pcol + 4: "prediction − t × residual SD × √(1 + leverage)"})
    tq_ref = cs.ref(lay.figure_row("t multiplier"), 1)
    sd_ref = cs.ref(lay.figure_row("sd used"), 1)
    df = res.df_resid_
    tq = float(t_isf((1 - level) / 2, df)) if df > 0 else None
    sd = float(res.resid_sd_) if df > 0 else None
    max_lev = float(np.max(data_lev))
    x_styles = [decimal_style(new.X[:, j], fmt=model.xs[j].fmt)
                for j in range(new.X.shape[1])]
    for i in range(new.n):
        r = FIRST_ROW + i
        a = r + 1
        fs.put(r, side, new.columns[0].row_of(i), style="row")
        put_keys(fs, r, side + 1, keys, i, kstyles)
        for j, col in enumerate(new.columns):
            fs.put(r, side + 1 + nk + j, float(new.X[i, j]), f"={col.value_ref(i)}",
                   x_styles[j])
        formula, value, _ = _prediction(
            coef, coef_ref, intercept, specs, [col.value_ref(i) for col in new.columns],
            new.X[i])
        fs.put(r, pcol, value, formula, style)
        lev = float(iv.leverage[i])
        fs.put(r, pcol + 1, lev, style="ratio")
        P, L = f"{col_letter(pcol + 1)}{a}", f"{col_letter(pcol + 2)}{a}"
        ends: list[object] = []
        for k, (inner, sign) in enumerate([(L, "-"), (L, "+"), (f"(1+{L})", "-"),
                                           (f"(1+{L})", "+")]):
            ok = tq is not None and sd is not None
            lv = lev if k < 2 else 1 + lev
            half = tq * sd * math.sqrt(lv) if ok else None  # type: ignore[operator]
            v = ("n/a" if half is None else value - half if sign == "-" else value + half)
            ends.append(v)
            fs.put(r, pcol + 2 + k, v,
                   f'=IF(AND(ISNUMBER({tq_ref}),ISNUMBER({sd_ref})),'
                   f'{P}{sign}{tq_ref}*{sd_ref}*SQRT({inner}),"n/a")', style)
        flag = _new_flag(model, res, new.X[i], lev, max_lev)
        fs.put(r, pcol + 6, flag, style="flag")
        if boot is not None:
            for k, v in enumerate((boot.pred_lo[i], boot.pred_hi[i])):
                fs.put(r, pcol + 7 + k, float(v) if math.isfinite(v) else "n/a", style=style)
        answer.append(AnswerRow(
            i, int(new.columns[0].row_of(i)), (fs.ref(r, pcol), value),
            (fs.ref(r, pcol + 4), ends[2]), (fs.ref(r, pcol + 5), ends[3]), flag))
    fs.widths.update({pcol: 16, pcol + 1: 12, pcol + 6: 36})
    last_new = FIRST_ROW + new.n - 1
    names.append((f"sf_{tag}_pred", fs.col_range(pcol, FIRST_ROW, last_new)))
    names.append((f"sf_{tag}_predlow", fs.col_range(pcol + 4, FIRST_ROW, last_new)))
    names.append((f"sf_{tag}_predhigh", fs.col_range(pcol + 5, FIRST_ROW, last_new)))
    return pcol + (10 if boot is not None else 8)


def _new_flag(model: ModelData, res: LeastSquaresResult, x: np.ndarray, lev: float,
              max_lev: float) -> str:
    """Why a new row's prediction is an extrapolation, naming the attributes; else ''."""
    outside = [model.xs[j].name for j in range(len(x))
               if x[j] < res.x_min_[j] or x[j] > res.x_max_[j]]
    words = []
    if outside:
        words.append("outside the fitted range of " + ", ".join(outside))
    if lev > max_lev:
        words.append("leverage above every fitted row")
    return ("extrapolated: " + "; ".join(words)) if words else ""
