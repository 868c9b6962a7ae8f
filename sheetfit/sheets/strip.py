"""Sheet plans for a strip-mean model (the graph of averages) in one attribute.

The first sheet opens with the answer (each new row's prediction, the rows within
± width of it, its flag), the key figures and the status; then the settings and the
curve: a grid of centres, each with its strip's row count, sum and mean as native
formulas. Each data row looks its centre up (one MATCH or ROUND per row), so formula
cost stays at grid size × rows for the curve and constant per row.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import cast

import numpy as np

from ..a1 import absolute, col_letter, quote_sheet
from ..declare.model import ModelData
from ..fit.results import Fitted
from ..fit.strip import EDGE_ALLOWANCE, EVEN_CENTRES, StripMeanResult
from ..owned import sheet_title
from ..words import plural
from .columns import Part, Template, template, this_row
from .common import (
    FIRST_ROW,
    check_cell,
    check_words,
    column_notes,
    key_heads,
    key_runs,
    key_styles,
    key_width,
    plan_left_out,
    plan_methods,
    plan_residual_sheet,
    put_keys,
    ref_parts,
    sheet_rows,
)
from .plan import Planned, SheetPlan, decimal_style

__all__ = ["EDGE", "FEW_IN_STRIP", "plan_strip"]

#: A new row with fewer data rows than this within ± width of its own value is flagged
#: (a reading threshold, not part of the method): its estimate, the strip mean at the
#: nearest centre, rests on few or no similar cases.
FEW_IN_STRIP = 5

#: The edge allowance as the formulas write it: |x − c| <= width·(1 + 1E-12) is inside.
EDGE = f"(1+{EDGE_ALLOWANCE:G})"
_LAST = EVEN_CENTRES - 1  # steps between the lowest and the highest even centre


def _num(v: float) -> float | str:
    """A cached number, or blank where the result has none (nan)."""
    return "" if math.isnan(v) else float(v)


@dataclass(frozen=True)
class _Layout:
    """Rows of the curve sheet (0-based): answer, key figures, status, settings, curve table."""

    answer: int
    figures: int
    status: int
    settings: int  # width; grid one below; lowest centre and step (even grid) two and three
    table: int  # header row of the curve table

    @classmethod
    def of(cls, n_new: int) -> _Layout:
        figures = 3 + (n_new + 3 if n_new else 2)
        status = figures + 5
        settings = status + 2
        return cls(3, figures, status, settings, settings + 5)


def plan_strip(model: ModelData, fitted: Fitted[StripMeanResult], version: str) -> Planned:
    """Plan the curve, fitted-value and residual sheets of a strip mean.

    Every number comes from the result: the grid, each strip's count and sum, each row's
    centre, whether it lies in that strip, its leave-one-out value and the RMSE; the
    rows within ± width of each new row from ``means_at``.
    """
    res = fitted.result
    tag, y = model.tag, model.y
    xname = model.xs[0].name
    n = res.n_
    x = res.x_.tolist()
    yv = res.y_.tolist()
    w = res.width_
    lay = _Layout.of(model.new.n if model.new is not None and fitted.new is not None else 0)
    ss = SheetPlan(sheet_title(tag, "strip"))
    fs = SheetPlan(sheet_title(tag, "fitted"))
    o = key_width(model.keys)
    ob, xc = 1 + o, 2 + o  # observed and x columns of the fitted sheet
    last = FIRST_ROW + n - 1
    xs = fs.col_range(xc, FIRST_ROW, last)
    ys = fs.col_range(ob, FIRST_ROW, last)
    even = res.grid_kind_ == "even"
    ystyle = decimal_style(yv, fmt=model.y.fmt)
    derived = decimal_style(yv, least=2, fmt=model.y.fmt)
    xstyle = decimal_style(x, fmt=model.xs[0].fmt)

    ss.put(0, 0, f"Strip means — model {tag}: {y.name} by {xname}", style="title")
    ss.put(1, 0, f"Each estimate is the average {y.name} of the data rows whose {xname} lies "
           f"within ± {w:g} of it; computed by sheetfit {version}. The answer first, the "
           "detail below.", style="note")
    ss.status_cell = (lay.status, 0)
    st = lay.settings
    ss.put(st, 0, "width", style="label")
    ss.put(st, 1, w, style="num")
    ss.put(st, 2, "half-width of each strip (setting)", style="note")
    ss.put(st + 1, 0, "grid", style="label")
    ss.put(st + 1, 1, "evenly spaced" if even else "distinct values")
    ss.put(st + 1, 2, f"{EVEN_CENTRES} centres from the smallest to the largest x" if even
           else "one centre at each distinct x", style="note")
    w_ref = absolute(st, 1)  # on the curve sheet itself
    w_full = ss.ref(st, 1)  # from the fitted-value sheet
    if even:
        ss.put(st + 2, 0, "lowest centre", style="label")
        ss.put(st + 2, 1, res.lo_, f"=MIN({xs})", xstyle)
        ss.put(st + 3, 0, "step", style="label")
        ss.put(st + 3, 1, res.step_, f"=(MAX({xs})-MIN({xs}))/{_LAST}", "num")
    heads = ["centre no.", "centre", "rows in strip", f"sum of {y.name}",
             f"strip mean of {y.name}", "note"]
    T = lay.table
    for c, h in enumerate(heads):
        ss.put(T, c, h, style="head")
    column_notes(ss, {2: f"rows with |{xname} − centre| ≤ width", 3: "their total",
                      4: "sum ÷ rows"}, T - 1)
    centres = res.centres_.tolist()
    counts, sums, means = res.count_.tolist(), res.sum_.tolist(), res.mean_.tolist()
    first = T + 1
    for j, cval in enumerate(centres):
        r = first + j
        R = r + 1
        ss.put(r, 0, j + 1, style="row")
        if even:
            ss.put(r, 1, cval, f"={absolute(st + 2, 1)}+{j}*{absolute(st + 3, 1)}", "num")
        else:
            ss.put(r, 1, cval, style=xstyle)
        cnt, tot = counts[j], sums[j]
        cond = f"--(ABS({xs}-B{R})<={w_ref}*{EDGE})"
        ss.put(r, 2, cnt, f"=SUMPRODUCT({cond})", "int")
        ss.put(r, 3, tot, f"=SUMPRODUCT({cond},{ys})", ystyle)
        ss.put(r, 4, _num(means[j]), f'=IF(C{R}=0,"",D{R}/C{R})', derived)
        ss.put(r, 5, "" if cnt else "empty strip: no rows within ± width",
               f'=IF(C{R}=0,"empty strip: no rows within ± width","")', "note")
    g_last = first + len(centres) - 1
    col = {k: ss.col_range(c, first, g_last) for k, c in
           (("no", 0), ("centre", 1), ("count", 2), ("sum", 3), ("mean", 4))}

    # --- fitted-value sheet: one lookup per row ------------------------------------
    fs.put(0, 0, f"Fitted values — model {tag}", style="title")
    fs.put(1, 0, f"Each row's fitted value is the mean of the OTHER rows in its strip on sheet "
           f"'{ss.title}' (leave-one-out), so the errors here are honest.", style="note")
    fh = (["data row"] + key_heads(model.keys)
          + [f"{y.name} (observed)", xname, "centre no.", "rows in strip",
             f"sum of {y.name}", "in its strip (1/0)", f"fitted {y.name}", "note"])
    for c, h in enumerate(fh):
        fs.put(3, c, h, style="head")
    L = {k: col_letter(ob + 1 + d) for d, k in enumerate("BCDEFGH")}  # shifted letters
    me = this_row  # the cell's own row
    used = np.asarray(model.used, dtype=np.int64)
    rc = np.asarray(res.row_centre_, dtype=np.int64)
    fit_col = ob + 6
    fs.run(0, FIRST_ROW, sheet_rows(used, y.first_row), style="row")
    key_runs(fs, FIRST_ROW, 1, model.keys, used, key_styles(model.keys))
    fs.run(ob, FIRST_ROW, np.asarray(res.y_, dtype=float), template("=", *ref_parts(y, used)),
           ystyle)
    fs.run(xc, FIRST_ROW, np.asarray(res.x_, dtype=float),
           template("=", *ref_parts(model.xs[0], used)), xstyle)
    # whole numbers as Python ints: the bulk writer caches them as written (7, not 7.0)
    fs.run(ob + 2, FIRST_ROW, (rc + 1).tolist(),
           _lookup_template(even, col["centre"], ss, lay, L["C"]), "int")
    fs.run(ob + 3, FIRST_ROW, np.asarray(res.count_)[rc].tolist(),
           template(f"=INDEX({col['count']},{L['D']}", me, ")"), "int")
    fs.run(ob + 4, FIRST_ROW, np.asarray(res.sum_)[rc],
           template(f"=INDEX({col['sum']},{L['D']}", me, ")"), ystyle)
    fs.run(ob + 5, FIRST_ROW, np.asarray(res.in_strip_, dtype=np.int64).tolist(),
           template(f"=IF(ABS({L['C']}", me, f"-INDEX({col['centre']},{L['D']}", me,
                    f"))<={w_full}*{EDGE},1,0)"), "int")
    fit = np.asarray(res.fitted_, dtype=float)
    blank = np.isnan(fit)
    B, E, F, G, H = (cast(tuple[Part, ...], (L[k], me)) for k in "BEFGH")
    fs.run(fit_col, FIRST_ROW, [_num(v) for v in fit.tolist()] if blank.any() else fit,
           template("=IF(", *G, '=1,IF(', *E, '-1=0,"",(', *F, "-", *B, ")/(", *E, "-1)),IF(",
                    *E, '=0,"",', *F, "/", *E, "))"), derived)
    fs.run(fit_col + 1, FIRST_ROW,
           ["no other row within ± width" if b else "" for b in blank.tolist()],
           template("=IF(", *H, '="","no other row within ± width","")'), "note")
    fs.widths = {0: 9, fit_col: 16, fit_col + 1: 26}
    column_notes(fs, {ob: "your data cell", ob + 2: "the row's centre on the curve sheet",
                      ob + 3: "looked up on the curve sheet",
                      fit_col: "(sum − own value) ÷ (rows − 1): the other rows' mean"})
    fs.freeze = (FIRST_ROW, 1 + o)
    names: list[tuple[str, str]] = []
    side = len(fh) + 1
    if model.new is not None and fitted.new is not None:
        side = _new_rows(fs, model, fitted, side, ss, col, names, lay, xs, w_full,
                         (xstyle, derived))
    else:
        ss.put(lay.answer, 0, f"No new rows are declared (name sf_{tag}_new): the sheets below "
               "show how well the curve predicts the data rows.", style="note")
    plan_left_out(fs, model, side)

    refs = (f"{quote_sheet(fs.title)}!{col_letter(fit_col + 1)}", np.arange(n) + FIRST_ROW + 1)
    rs = plan_residual_sheet(model, refs, res.fitted_, res.resid_,
                             "residual = observed − fitted (leave-one-out strip mean); "
                             "blank where the row's strip holds no other row.",
                             keys=model.keys)
    # the key figures, under the answer
    r_rng = rs.col_range(3 + o, FIRST_ROW, last)
    f = lay.figures
    for c, h in enumerate(["key figure", "value", "what it is"]):
        ss.put(f, c, h, style="head")
    fitted_cell = absolute(f + 2, 1)
    lines = [
        ("rows used", n, f"=COUNT({ys})", "int", "data rows in the curve"),
        ("rows with a fitted value", res.n_fitted_, f"=COUNT({r_rng})", "int",
         "rows with another row in their strip"),
        ("RMSE (leave-one-out)", res.rmse_ if res.n_fitted_ else "n/a",
         f'=IF({fitted_cell}=0,"n/a",SQRT(SUMSQ({r_rng})/{fitted_cell}))', derived,
         "typical error of an estimate: root mean squared leave-one-out residual"),
    ]
    for i, (label, value, formula, style, what) in enumerate(lines):
        ss.put(f + 1 + i, 0, label, style="label")
        ss.put(f + 1 + i, 1, value, formula, style)
        ss.put(f + 1 + i, 2, what, style="note")
    if res.n_fitted_:
        # the formulas' RMSE against the numeric core's, computed apart (fsum in Python)
        rmse_cell, c = absolute(f + 3, 1), f + 4
        ss.put(c, 0, "check: the RMSE equals sheetfit's own", style="label")
        ss.put(c, 1, 0.0, f"={rmse_cell}-{res.rmse_!r}", "check")
        formula, verdict = check_cell(absolute(c, 1), 0.0, 1e-9, rmse_cell, res.rmse_)
        ss.put(c, 2, verdict, formula, "verdict")
        ss.put(c, 3, check_words(1e-9, "|difference| / max(1, RMSE)"), style="note")
    plan_methods(ss, g_last + 2, [
        (f"A strip holds the rows with |{xname} − centre| ≤ width; a relative allowance of "
        f"{EDGE_ALLOWANCE:g} absorbs rounding at the edge, in Python and in the formulas alike."),
        (f"Centres: the distinct values of {xname} when there are at most 200, otherwise "
        f"{EVEN_CENTRES} evenly spaced centres from the smallest to the largest value."),
        ("Each data row is fitted from the other rows in the strip at its centre "
        "(leave-one-out); a new row takes the strip mean at the nearest centre (on a tie, "
        f"the lower), and is flagged when fewer than {FEW_IN_STRIP} data rows lie within "
        "± width of its own value."),
    ])
    ss.widths = {0: 26, 1: 14, 2: 14, 3: 16, 4: 16, 5: 16}
    ss.freeze = None
    names = [(f"sf_{tag}_fitted", fs.col_range(fit_col, FIRST_ROW, last)),
             (f"sf_{tag}_resid", r_rng)] + names
    # read by the charts: the curve and the leave-one-out RMSE
    names += [(f"sf_{tag}_centres", col["centre"]), (f"sf_{tag}_means", col["mean"]),
              (f"sf_{tag}_loo", ss.ref(6, 5))]
    return Planned([ss, fs, rs], names)


def _lookup_formula(even: bool, centre_rng: str, ss: SheetPlan, lay: _Layout) -> str:
    """The formula template that finds a row's centre number (``{x}``: the row's x cell)."""
    if not even:
        return f"=MATCH({{x}},{centre_rng},0)"
    st = lay.settings
    return (f"=MIN({EVEN_CENTRES},MAX(1,ROUND(({{x}}-{ss.ref(st + 2, 1)})/{ss.ref(st + 3, 1)}"
            ",0)+1))")


def _lookup_template(even: bool, centre_rng: str, ss: SheetPlan, lay: _Layout,
                     x_col: str) -> Template:
    """:func:`_lookup_formula` for every data row: ``x_col`` is the x cells' column."""
    head, tail = _lookup_formula(even, centre_rng, ss, lay).split("{x}")
    return template(head, x_col, this_row, tail)


def _new_rows(fs: SheetPlan, model: ModelData, fitted: Fitted[StripMeanResult], side: int,
              ss: SheetPlan, col: dict[str, str], names: list[tuple[str, str]], lay: _Layout,
              xs: str, w_full: str, styles: tuple[str, str]) -> int:
    """Predictions for new rows: the strip mean at the nearest centre (one lookup each), and
    how many data rows lie within ± width of the new row's own value; the answer block."""
    new, res = model.new, fitted.result
    if new is None or fitted.new is None:
        raise ValueError("_new_rows needs declared new rows and their predictions")
    xstyle, derived = styles
    nk = new.keys
    on = key_width(nk)
    fs.put(2, side, "New rows: the strip mean at the nearest centre (on a tie, the lower).",
           style="note")
    heads = (["new row"] + key_heads(nk) + [model.xs[0].name, "centre no.",
             f"predicted {model.y.name}", "rows within ± width"])
    for c, h in enumerate(heads):
        fs.put(3, side + c, h, style="head")
    xcol = side + 1 + on
    xl, il = col_letter(xcol + 1), col_letter(xcol + 2)
    cen, g = col["centre"], len(res.centres_)
    centre = res.centre_index(new.X[:, 0]).tolist()
    pred = np.asarray(fitted.new, dtype=float).tolist()
    near = res.means_at(new.X[:, 0])[0].tolist()  # rows within ± width of each new x
    nst = key_styles(nk)
    src_rows = []
    for i in range(new.n):
        r = FIRST_ROW + i
        R = r + 1
        fs.put(r, side, new.columns[0].row_of(i), style="row")
        put_keys(fs, r, side + 1, nk, i, nst)
        fs.put(r, xcol, float(new.X[i, 0]), f"={new.columns[0].cell(i)}", xstyle)
        if res.grid_kind_ == "even":
            f_idx = _lookup_formula(True, cen, ss, lay).format(x=f"{xl}{R}")
        else:
            below = f"IFERROR(MATCH({xl}{R},{cen},1),1)"
            f_idx = (f"=IF({below}<{g},IF(INDEX({cen},{below}+1)-{xl}{R}<{xl}{R}-INDEX({cen},"
                     f"{below}),{below}+1,{below}),{below})")
        fs.put(r, xcol + 1, centre[i] + 1, f_idx, "int")
        fs.put(r, xcol + 2, _num(pred[i]), f"=INDEX({col['mean']},{il}{R})", derived)
        fs.put(r, xcol + 3, int(near[i]),
               f"=SUMPRODUCT(--(ABS({xs}-{xl}{R})<={w_full}*{EDGE}))", "int")
        src_rows.append(r)
    names.append((f"sf_{model.tag}_pred",
                  fs.col_range(xcol + 2, FIRST_ROW, FIRST_ROW + new.n - 1)))

    # the answer block on the curve sheet
    a = lay.answer
    ah = (["new row"] + key_heads(nk) + [model.xs[0].name, f"predicted {model.y.name}",
          "rows within ± width", "flag"])
    for c, h in enumerate(ah):
        ss.put(a, c, h, style="head")
    p = 2 + on
    column_notes(ss, {p: "the strip mean at the nearest centre",
                      p + 1: f"data rows near this value; fewer than {FEW_IN_STRIP} is flagged"},
                 a - 1)
    answer = derived.replace("dec", "answer")
    for i, r in enumerate(src_rows):
        ar = a + 1 + i
        ss.put(ar, 0, new.columns[0].row_of(i), f"={fs.ref(r, side, fixed=False)}", "row")
        put_keys(ss, ar, 1, nk, i, nst)
        ss.put(ar, 1 + on, float(new.X[i, 0]), f"={fs.ref(r, xcol, fixed=False)}", xstyle)
        ss.put(ar, p, _num(pred[i]), f"={fs.ref(r, xcol + 2, fixed=False)}", answer)
        ss.put(ar, p + 1, int(near[i]), f"={fs.ref(r, xcol + 3, fixed=False)}", "int")
        ss.put(ar, p + 2, _flag(i, int(near[i]), fitted.extrapolated), style="flag")
    ss.put(a + 1 + new.n, 0, "A new row takes the mean of the strip at the nearest centre; "
           "with few data rows near its value that mean says little.", style="note")
    return xcol + 5


def _flag(i: int, near: int, extrapolated: list[int]) -> str:
    out = []
    if i in extrapolated:
        out.append("extrapolated")
    if near == 0:
        out.append("no data within ± width: the nearest strip's mean")
    elif near < FEW_IN_STRIP:
        out.append(f"only {plural(near, 'data row')} within ± width")
    return "; ".join(out)
