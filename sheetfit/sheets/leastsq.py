"""Sheet plans for a least-squares model: coefficients with checks, fitted values, residuals.

Every cached value is computed here the way its formula computes it (same
operations, same order), so an engine that recalculates the book reproduces it.
"""

from __future__ import annotations

import math
import textwrap

import numpy as np

from ..a1 import absolute
from ..declare.model import ModelData
from ..fit.leastsq import LeastSquaresResult
from ..fit.results import Fitted
from ..owned import sheet_title
from .common import FIRST_ROW, fsum_sq, plan_left_out, plan_residual_sheet
from .plan import Planned, SheetPlan

__all__ = ["plan_least_squares"]



def _term_values(X: np.ndarray, degree: int) -> list[tuple[int, int]]:
    """(attribute column, power) of each non-constant term, in coefficient order."""
    if degree > 1:
        return [(0, d) for d in range(1, degree + 1)]
    return [(j, 1) for j in range(X.shape[1])]


#: Residuals this small relative to y (|r| <= 1e-12 |y|) are rounding noise of an exact
#: fit; their angle with a term column is arbitrary and differs between engines (one
#: rounds y - fitted to 0, another to ±1 ulp), so the check reads 0 for them.
EXACT_FIT = "1E-24"


def _cosine(r: np.ndarray, t: np.ndarray, y: np.ndarray) -> float:
    """What the check formula evaluates to: 0 for an exact fit, else cos(r, t)."""
    ssr = fsum_sq(r)
    if ssr <= float(EXACT_FIT) * fsum_sq(y):
        return 0.0
    return math.fsum(float(a) * float(b) for a, b in zip(r, t)) / math.sqrt(ssr * fsum_sq(t))


def _check_formula(r: str, t: str | None, y: str) -> str:
    """Native check formula: cosine of the angle between residuals r and term column t."""
    guard = f"SUMSQ({r})<={EXACT_FIT}*SUMSQ({y})"
    if t is None:  # the intercept's column is all ones
        return f"=IF({guard},0,SUM({r})/SQRT(SUMSQ({r})*COUNT({r})))"
    return f"=IF({guard},0,SUMPRODUCT({r},{t})/SQRT(SUMSQ({r})*SUMSQ({t})))"


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


def plan_least_squares(model: ModelData, fitted_: Fitted[LeastSquaresResult],
                       version: str) -> Planned:
    """Plan the coefficient, fitted-value and residual sheets of a fitted model.

    Coefficients and the method note come from the result. Fitted values, residuals and
    the summary figures are cached as their formulas compute them (coefficient cells
    times data cells, left to right), which differs from the result's correctly rounded
    values in the last digits; ``_prediction`` and the summary lines hold that arithmetic
    beside the formulas it mirrors.
    """
    res = fitted_.result
    tag, y = model.tag, model.y
    coef = np.asarray(res.coef_, dtype=float)
    intercept = bool(res.intercept_)
    degree = int(res.degree_)
    terms: list[str] = list(res.terms_)
    n = len(model.used)
    p = len(coef)
    specs = _term_values(model.X, degree)
    tvals = [model.X[:, j] ** d if d > 1 else model.X[:, j] for j, d in specs]

    cs = SheetPlan(sheet_title(tag, "coef"))
    fs = SheetPlan(sheet_title(tag, "fitted"))
    coef_note = (
        f"Coefficients computed by sheetfit {version} ({res.method_note_}). The check beside "
        "each is a native formula, the cosine of the angle between the residuals and that "
        "term's column: least squares makes it 0 (it reads 0 outright when the fit reproduces "
        "y to 12 digits)."
    )
    coef_head = len(textwrap.wrap(coef_note, 100)) + 2
    first_coef = coef_head + 1
    coef_cell = [absolute(first_coef + k, 1) for k in range(p)]
    coef_ref = [cs.ref(first_coef + k, 1) for k in range(p)]

    # --- fitted-value sheet -------------------------------------------------------
    last = FIRST_ROW + n - 1
    fs.put(0, 0, f"Fitted values — model {tag}", style="title")
    fs.note(1, 0, "Each fitted value is a formula: the coefficients on sheet "
            f"'{cs.title}' times the term values from your data cells.")
    head = ["data row", f"{y.name} (observed)"] + terms[int(intercept):] + [f"fitted {y.name}"]
    for c, h in enumerate(head):
        fs.put(3, c, h, style="head")
    fit_col = 2 + len(specs)
    fitted = np.empty(n)
    for i, idx in enumerate(model.used):
        r = FIRST_ROW + i
        fs.put(r, 0, int(y.row_of(int(idx))), style="int")
        fs.put(r, 1, float(model.Y[i]), f"={y.cell(int(idx))}", "num")
        formula, value, terms_row = _prediction(
            coef, coef_ref, intercept, specs, [c.value_ref(int(idx)) for c in model.xs],
            model.X[i])
        for k, (ref, tv) in enumerate(terms_row):
            fs.put(r, 2 + k, tv, f"={ref}", "num")
        fitted[i] = value
        fs.put(r, fit_col, value, formula, "num")
    fs.widths = {0: 9, fit_col: 16}
    fs.freeze = (FIRST_ROW, 1)

    # new rows to predict, to the right
    names: list[tuple[str, str]] = []
    side = fit_col + 2
    if model.new is not None:
        side = _plan_new(fs, model, coef, coef_ref, specs, intercept, side, names)
    plan_left_out(fs, model, side)

    # --- residual sheet -------------------------------------------------------------
    resid = model.Y - fitted  # what B − C gives on the residual sheet
    rs = plan_residual_sheet(
        model, [fs.ref(FIRST_ROW + i, fit_col, fixed=False) for i in range(n)], fitted, resid,
        "residual = observed − fitted, each a formula.")
    resid_rng = rs.col_range(3, FIRST_ROW, last)
    y_rng = fs.col_range(1, FIRST_ROW, last)

    # --- coefficient sheet ----------------------------------------------------------
    xs = ", ".join(model.attribute_names)
    cs.put(0, 0, f"Least-squares coefficients — model {tag}: {y.name} on {xs}", style="title")
    cs.note(1, 0, coef_note)
    heads = ["term", "coefficient", "check: cos(residuals, term)"]
    one_line = intercept and degree == 1 and len(model.xs) == 1
    if one_line:
        heads.append("check: slope = r × SD(y) / SD(x)")
    for c, h in enumerate(heads):
        cs.put(coef_head, c, h, style="head")
    for k, term in enumerate(terms):
        r = first_coef + k
        cs.put(r, 0, term, style="label")
        cs.put(r, 1, float(coef[k]), style="coef")
        if intercept and k == 0:
            value = _cosine(resid, np.ones(n), model.Y)
            f = _check_formula(resid_rng, None, y_rng)
        else:
            t_rng = fs.col_range(2 + k - int(intercept), FIRST_ROW, last)
            value = _cosine(resid, tvals[k - int(intercept)], model.Y)
            f = _check_formula(resid_rng, t_rng, y_rng)
        cs.put(r, 2, value, f, "check")
    if one_line:
        x_rng = fs.col_range(2, FIRST_ROW, last)
        xv, yv = tvals[0], model.Y
        rr = float(np.corrcoef(xv, yv)[0, 1])
        slope = rr * float(np.std(yv)) / float(np.std(xv))
        cs.put(first_coef + 1, 3, slope,
               f"=CORREL({y_rng},{x_rng})*STDEV.P({y_rng})/STDEV.P({x_rng})", "coef")
    row = first_coef + p + 1
    row = _plan_summary(cs, row, n, p, resid, model.Y, intercept, resid_rng, y_rng,
                        coef_cell, one_line, fs, last, tvals)
    row = _plan_range(cs, row + 1, model, res, specs, fs, last)
    cs.widths = {0: 24, 1: 22, 2: 30, 3: 30}

    coef_rng = cs.col_range(1, first_coef, first_coef + p - 1)
    names = [
        (f"sf_{tag}_coef", coef_rng),
        (f"sf_{tag}_fitted", fs.col_range(fit_col, FIRST_ROW, last)),
        (f"sf_{tag}_resid", resid_rng),
    ] + names
    return Planned([cs, fs, rs], names)


def _plan_new(fs: SheetPlan, model: ModelData, coef: np.ndarray, coef_ref: list[str],
              specs: list[tuple[int, int]], intercept: bool, side: int,
              names: list[tuple[str, str]]) -> int:
    new = model.new
    if new is None:
        raise ValueError("_plan_new needs declared new rows")
    tag = model.tag
    fs.put(3, side, "new row", style="head")
    for j, c in enumerate(new.columns):
        fs.put(3, side + 1 + j, c.name if c.name else model.xs[j].name, style="head")
    pcol = side + 1 + len(new.columns)
    fs.put(3, pcol, f"predicted {model.y.name}", style="head")
    fs.put(2, side, "Predictions for the rows declared as new (formulas as for fitted values).",
           style="note")
    for i in range(new.n):
        r = FIRST_ROW + i
        fs.put(r, side, new.columns[0].row_of(i), style="int")
        for j, c in enumerate(new.columns):
            fs.put(r, side + 1 + j, float(new.X[i, j]), f"={c.value_ref(i)}", "num")
        formula, value, _ = _prediction(
            coef, coef_ref, intercept, specs, [c.value_ref(i) for c in new.columns], new.X[i])
        fs.put(r, pcol, value, formula, "num")
    fs.widths[pcol] = 16
    names.append((f"sf_{tag}_pred", fs.col_range(pcol, FIRST_ROW, FIRST_ROW + new.n - 1)))
    return pcol + 2


def _plan_summary(cs: SheetPlan, row: int, n: int, p: int, resid: np.ndarray, Y: np.ndarray,
                  intercept: bool, resid_rng: str, y_rng: str, coef_cell: list[str],
                  one_line: bool, fs: SheetPlan, last: int, tvals: list[np.ndarray]) -> int:
    cs.put(row, 0, "summary (native formulas)", style="head")
    cs.put(row, 1, "value", style="head")
    cs.put(row, 2, "what it is", style="head")
    ssr = fsum_sq(resid)
    n_row, p_row = row + 1, row + 2
    n_ref, p_ref = absolute(n_row, 1), absolute(p_row, 1)
    coef_rng = f"{coef_cell[0]}:{coef_cell[-1]}"
    lines: list[tuple[str, object, str, str, str]] = [
        ("rows used (n)", n, f"=COUNT({resid_rng})", "int", "data rows in the fit"),
        ("parameters (p)", p, f"=COUNT({coef_rng})", "int", "coefficients estimated"),
        ("RMSE", math.sqrt(ssr / n), f"=SQRT(SUMSQ({resid_rng})/{n_ref})", "num",
         "root mean squared residual (divides by n)"),
        ("residual SD", math.sqrt(ssr / (n - p)) if n > p else "n/a",
         f'=IF({n_ref}>{p_ref},SQRT(SUMSQ({resid_rng})/({n_ref}-{p_ref})),"n/a")', "num",
         "standard error of the estimate (divides by n − p)"),
    ]
    if intercept:
        mean = math.fsum(float(v) for v in Y) / len(Y)
        dev = math.fsum((float(v) - mean) * (float(v) - mean) for v in Y)
        r2 = "n/a" if dev == 0 else 1 - ssr / dev
        lines.append(("R²", r2, f'=IF(DEVSQ({y_rng})=0,"n/a",1-SUMSQ({resid_rng})/DEVSQ({y_rng}))',
                      "ratio", "share of the variation of y about its mean that the fit explains"))
    else:
        tot = fsum_sq(Y)
        r2 = "n/a" if tot == 0 else 1 - ssr / tot
        lines.append(("R² (uncentred)", r2,
                      f'=IF(SUMSQ({y_rng})=0,"n/a",1-SUMSQ({resid_rng})/SUMSQ({y_rng}))', "ratio",
                      ("no intercept, so R² is taken about zero, not about the mean of y; "
                       "it is not comparable with an R² of a model with intercept")))
    if one_line:
        x_rng = fs.col_range(2, FIRST_ROW, last)
        lines.append(("correlation r", float(np.corrcoef(tvals[0], Y)[0, 1]),
                      f"=CORREL({y_rng},{x_rng})", "ratio", "Pearson correlation of y and x"))
    for k, (label, value, formula, style, what) in enumerate(lines):
        cs.put(row + 1 + k, 0, label, style="label")
        cs.put(row + 1 + k, 1, value, formula, style)  # type: ignore[arg-type]
        cs.put(row + 1 + k, 2, what, style="note")
    return row + 1 + len(lines)


def _plan_range(cs: SheetPlan, row: int, model: ModelData, res: LeastSquaresResult,
                specs: list[tuple[int, int]], fs: SheetPlan, last: int) -> int:
    cs.put(row, 0, "relevant range", style="head")
    cs.put(row, 1, "smallest", style="head")
    cs.put(row, 2, "largest", style="head")
    cs.put(row + 1, 0, "Outside these values a prediction is an extrapolation.", style="note")
    r = row + 2
    for k, (j, d) in enumerate(specs):
        if d != 1:
            continue
        rng = fs.col_range(2 + k, FIRST_ROW, last)
        cs.put(r, 0, model.xs[j].name, style="label")
        cs.put(r, 1, float(res.x_min_[j]), f"=MIN({rng})", "num")
        cs.put(r, 2, float(res.x_max_[j]), f"=MAX({rng})", "num")
        r += 1
    return r
