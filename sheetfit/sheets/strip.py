"""Sheet plans for a strip-mean model (the graph of averages) in one attribute.

The curve is a grid of centres, each with its strip's row count, sum and mean as
native formulas; each data row looks its centre up (one MATCH or ROUND per row), so
formula cost stays at grid size × rows for the curve and constant per row.
"""

from __future__ import annotations

import math

import numpy as np

from ..a1 import absolute, col_letter
from ..declare.model import ModelData
from ..fit.results import Fitted
from ..fit.strip import EDGE_ALLOWANCE, EVEN_CENTRES, StripMeanResult
from ..owned import sheet_title
from .common import FIRST_ROW, plan_left_out, plan_residual_sheet
from .plan import Planned, SheetPlan

__all__ = ["EDGE", "plan_strip"]

#: The edge allowance as the formulas write it: |x − c| <= width·(1 + 1E-12) is inside.
EDGE = f"(1+{EDGE_ALLOWANCE:G})"
_TABLE = 9  # header row (0-based) of the curve table
_LAST = EVEN_CENTRES - 1  # steps between the lowest and the highest even centre


def _num(v: float) -> float | str:
    """A cached number, or blank where the result has none (nan)."""
    return "" if math.isnan(v) else float(v)


def plan_strip(model: ModelData, fitted: Fitted[StripMeanResult], version: str) -> Planned:
    """Plan the curve, fitted-value and residual sheets of a strip mean.

    Every number comes from the result: the grid, each strip's count and sum, each row's
    centre, whether it lies in that strip, its leave-one-out value and the RMSE.
    """
    res = fitted.result
    tag, y = model.tag, model.y
    xname = model.xs[0].name
    n = res.n_
    x = res.x_.tolist()
    yv = res.y_.tolist()
    w = res.width_
    ss = SheetPlan(sheet_title(tag, "strip"))
    fs = SheetPlan(sheet_title(tag, "fitted"))
    last = FIRST_ROW + n - 1
    xs = fs.col_range(2, FIRST_ROW, last)
    ys = fs.col_range(1, FIRST_ROW, last)
    even = res.grid_kind_ == "even"

    ss.put(0, 0, f"Strip means — model {tag}: {y.name} by {xname}", style="title")
    ss.note(1, 0, f"For each centre c, the mean of {y.name} over the rows with |{xname} − c| ≤ "
            f"width (a relative allowance of {EDGE_ALLOWANCE:g} absorbs rounding at the edge). "
            f"An empty strip is left blank, with the reason. Computed by sheetfit {version}.")
    ss.put(4, 0, "width", style="label")
    ss.put(4, 1, w, style="num")
    ss.put(4, 2, "half-width of each strip (setting)", style="note")
    ss.put(5, 0, "grid", style="label")
    ss.put(5, 1, "evenly spaced" if even else "distinct values")
    ss.put(5, 2, f"{EVEN_CENTRES} centres from the smallest to the largest x" if even
           else "one centre at each distinct x", style="note")
    w_ref = absolute(4, 1)  # on the curve sheet itself
    w_full = ss.ref(4, 1)  # from the fitted-value sheet
    if even:
        ss.put(6, 0, "lowest centre", style="label")
        ss.put(6, 1, res.lo_, f"=MIN({xs})", "num")
        ss.put(7, 0, "step", style="label")
        ss.put(7, 1, res.step_, f"=(MAX({xs})-MIN({xs}))/{_LAST}", "num")
    heads = ["centre no.", "centre", "rows in strip", f"sum of {y.name}",
             f"strip mean of {y.name}", "note"]
    for c, h in enumerate(heads):
        ss.put(_TABLE, c, h, style="head")
    centres = res.centres_.tolist()
    counts, sums, means = res.count_.tolist(), res.sum_.tolist(), res.mean_.tolist()
    first = _TABLE + 1
    for j, cval in enumerate(centres):
        r = first + j
        R = r + 1
        ss.put(r, 0, j + 1, style="int")
        if even:
            ss.put(r, 1, cval, f"={absolute(6, 1)}+{j}*{absolute(7, 1)}", "num")
        else:
            ss.put(r, 1, cval, style="num")
        cnt, tot = counts[j], sums[j]
        cond = f"--(ABS({xs}-B{R})<={w_ref}*{EDGE})"
        ss.put(r, 2, cnt, f"=SUMPRODUCT({cond})", "int")
        ss.put(r, 3, tot, f"=SUMPRODUCT({cond},{ys})", "num")
        ss.put(r, 4, _num(means[j]), f'=IF(C{R}=0,"",D{R}/C{R})', "num")
        ss.put(r, 5, "" if cnt else "empty strip: no rows within ± width",
               f'=IF(C{R}=0,"empty strip: no rows within ± width","")', "note")
    g_last = first + len(centres) - 1
    col = {k: ss.col_range(c, first, g_last) for k, c in
           (("no", 0), ("centre", 1), ("count", 2), ("sum", 3), ("mean", 4))}

    # --- fitted-value sheet: one lookup per row ------------------------------------
    fs.put(0, 0, f"Fitted values — model {tag}", style="title")
    fs.note(1, 0, f"Each row's fitted value is the mean of the OTHER rows in its strip on sheet "
            f"'{ss.title}' (leave-one-out: (sum − own {y.name}) / (rows − 1)).")
    fh = ["data row", f"{y.name} (observed)", xname, "centre no.", "rows in strip",
          f"sum of {y.name}", "in its strip (1/0)", f"fitted {y.name}", "note"]
    for c, h in enumerate(fh):
        fs.put(3, c, h, style="head")
    f_idx = _lookup_formula(even, col["centre"], ss)
    row_centre, in_strip = res.row_centre_.tolist(), res.in_strip_.tolist()
    fit_vals = res.fitted_.tolist()
    refs = []
    for i, idx in enumerate(model.used):
        r = FIRST_ROW + i
        R = r + 1
        j = row_centre[i]
        fs.put(r, 0, y.row_of(int(idx)), style="int")
        fs.put(r, 1, yv[i], f"={y.cell(int(idx))}", "num")
        fs.put(r, 2, x[i], f"={model.xs[0].cell(int(idx))}", "num")
        fs.put(r, 3, j + 1, f_idx.format(x=f"C{R}"), "int")
        fs.put(r, 4, counts[j], f"=INDEX({col['count']},D{R})", "int")
        fs.put(r, 5, sums[j], f"=INDEX({col['sum']},D{R})", "num")
        fs.put(r, 6, int(in_strip[i]),
               f"=IF(ABS(C{R}-INDEX({col['centre']},D{R}))<={w_full}*{EDGE},1,0)", "int")
        blank = math.isnan(fit_vals[i])
        fs.put(r, 7, _num(fit_vals[i]),
               f'=IF(G{R}=1,IF(E{R}-1=0,"",(F{R}-B{R})/(E{R}-1)),IF(E{R}=0,"",F{R}/E{R}))', "num")
        fs.put(r, 8, "no other row within ± width" if blank else "",
               f'=IF(H{R}="","no other row within ± width","")', "note")
        refs.append(fs.ref(r, 7, fixed=False))
    fs.widths = {0: 9, 7: 16, 8: 26}
    fs.freeze = (FIRST_ROW, 1)
    names: list[tuple[str, str]] = []
    side = len(fh) + 1
    if model.new is not None:
        side = _new_rows(fs, model, fitted, side, ss, col, names)
    plan_left_out(fs, model, side)

    rs = plan_residual_sheet(model, refs, res.fitted_, res.resid_,
                             "residual = observed − fitted (leave-one-out strip mean); "
                             "blank where the row's strip holds no other row.")
    # summary under the settings, on the curve sheet
    r_rng = rs.col_range(3, FIRST_ROW, last)
    ss.put(4, 4, "rows used", style="label")
    ss.put(4, 5, n, f"=COUNT({ys})", "int")
    ss.put(5, 4, "rows with a fitted value", style="label")
    ss.put(5, 5, res.n_fitted_, f"=COUNT({r_rng})", "int")
    ss.put(6, 4, "RMSE (leave-one-out)", style="label")
    ss.put(6, 5, res.rmse_ if res.n_fitted_ else "n/a",
           f'=IF(F6=0,"n/a",SQRT(SUMSQ({r_rng})/F6))', "num")
    ss.widths = {0: 14, 1: 14, 2: 14, 3: 16, 4: 24, 5: 34}
    ss.freeze = (_TABLE + 1, 0)
    names = [(f"sf_{tag}_fitted", fs.col_range(7, FIRST_ROW, last)),
             (f"sf_{tag}_resid", r_rng)] + names
    # read by the charts: the curve and the leave-one-out RMSE
    names += [(f"sf_{tag}_centres", col["centre"]), (f"sf_{tag}_means", col["mean"]),
              (f"sf_{tag}_loo", ss.ref(6, 5))]
    return Planned([ss, fs, rs], names)


def _lookup_formula(even: bool, centre_rng: str, ss: SheetPlan) -> str:
    """The formula template that finds a row's centre number (``{x}``: the row's x cell)."""
    if not even:
        return f"=MATCH({{x}},{centre_rng},0)"
    return (f"=MIN({EVEN_CENTRES},MAX(1,ROUND(({{x}}-{ss.ref(6, 1)})/{ss.ref(7, 1)},0)+1))")


def _new_rows(fs: SheetPlan, model: ModelData, fitted: Fitted[StripMeanResult], side: int,
              ss: SheetPlan, col: dict[str, str], names: list[tuple[str, str]]) -> int:
    """Predictions for new rows: the strip mean at the nearest centre (one lookup each)."""
    new, res = model.new, fitted.result
    if new is None or fitted.new is None:
        raise ValueError("_new_rows needs declared new rows and their predictions")
    fs.put(2, side, "New rows: the strip mean at the nearest centre (on a tie, the lower).",
           style="note")
    for c, h in enumerate(["new row", model.xs[0].name, "centre no.",
                           f"predicted {model.y.name}"]):
        fs.put(3, side + c, h, style="head")
    xl, il = col_letter(side + 2), col_letter(side + 3)
    cen, g = col["centre"], len(res.centres_)
    centre = res.centre_index(new.X[:, 0]).tolist()
    pred = np.asarray(fitted.new, dtype=float).tolist()
    for i in range(new.n):
        r = FIRST_ROW + i
        R = r + 1
        fs.put(r, side, new.columns[0].row_of(i), style="int")
        fs.put(r, side + 1, float(new.X[i, 0]), f"={new.columns[0].cell(i)}", "num")
        if res.grid_kind_ == "even":
            f_idx = _lookup_formula(True, cen, ss).format(x=f"{xl}{R}")
        else:
            below = f"IFERROR(MATCH({xl}{R},{cen},1),1)"
            f_idx = (f"=IF({below}<{g},IF(INDEX({cen},{below}+1)-{xl}{R}<{xl}{R}-INDEX({cen},"
                     f"{below}),{below}+1,{below}),{below})")
        fs.put(r, side + 2, centre[i] + 1, f_idx, "int")
        fs.put(r, side + 3, _num(pred[i]), f"=INDEX({col['mean']},{il}{R})", "num")
    names.append((f"sf_{model.tag}_pred",
                  fs.col_range(side + 3, FIRST_ROW, FIRST_ROW + new.n - 1)))
    return side + 5
