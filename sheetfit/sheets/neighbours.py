"""Sheet plans for neighbour models (k nearest neighbours: mean or vote).

A reviewer can pick any row and check, by hand, its standard units, the distance to
each listed neighbour, and the average (or the vote) of those neighbours' responses.
Every formula's cached value is computed here the way the formula computes it.
Formula cost grows as n·k: no formula scans all rows for one row.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..a1 import absolute, col_letter
from ..declare.model import ModelData
from ..labels import label_text, labels_equal
from ..owned import sheet_title
from .common import FIRST_ROW, fsum_sq, plan_left_out, plan_residual_sheet
from .plan import SheetPlan

__all__ = ["TIE_RULE", "NeighbourSheets", "plan_neighbours"]

#: The tie rules, in the words the sheets and the README use.
TIE_RULE = (
    "Ties: distances that agree to 12 significant digits count as equal, and among equal "
    "distances the lower data row comes first; a row is never its own neighbour "
    "(leave-one-out). In a vote, among classes with equally many neighbours the class of "
    "the nearest of them wins."
)

_STD_FIRST = 6  # first data row (0-based) on the standard-units sheet


@dataclass
class NeighbourSheets:
    """The planned sheets of one neighbour model and the output names they carry."""

    sheets: list[SheetPlan]
    names: list[tuple[str, str]]


def _mean(values: list[float]) -> float:
    return math.fsum(values) / len(values)


def _std_sheet(model: ModelData, res: Any) -> tuple[SheetPlan, list[str], list[str]]:
    """Standard-units sheet; returns it and the z-row references of data and new rows."""
    tag = model.tag
    ss = SheetPlan(sheet_title(tag, "std"))
    m = len(model.xs)
    n = len(model.used)
    on = bool(res.scaling_.on)
    ss.put(0, 0, f"Standard units — model {tag}", style="title")
    ss.note(1, 0, "z = (x − mean) / SD, with the mean and the population SD (root mean square "
            "of deviations) of the rows used; new rows use the same mean and SD."
            if on else "Standard units are off (setting standard_units = no): distances use "
            "the attribute values as they are.")
    last = _STD_FIRST + n - 1
    ss.put(3, 0, "mean", style="label")
    ss.put(4, 0, "SD (population)", style="label")
    ss.put(5, 0, "data row", style="head")
    zc = 1 + m  # first z column
    for j, c in enumerate(model.xs):
        xcol = 1 + j
        rng = f"{col_letter(xcol + 1)}{_STD_FIRST + 1}:{col_letter(xcol + 1)}{last + 1}"
        col = model.X[:, j]
        mean = _mean([float(v) for v in col])
        sd = math.sqrt(math.fsum((float(v) - mean) * (float(v) - mean) for v in col) / n)
        ss.put(3, xcol, mean, f"=AVERAGE({rng})", "num")
        ss.put(4, xcol, sd, f"=STDEV.P({rng})", "num")
        ss.put(5, xcol, c.name, style="head")
        ss.put(5, zc + j, f"z {c.name}" if on else f"{c.name} (as is)", style="head")
    zrefs: list[str] = []
    Z = res.Z_
    for i, idx in enumerate(model.used):
        r = _STD_FIRST + i
        ss.put(r, 0, model.y.row_of(int(idx)), style="int")
        for j, c in enumerate(model.xs):
            ss.put(r, 1 + j, float(model.X[i, j]), f"={c.cell(int(idx))}", "num")
            ss.put(r, zc + j, float(Z[i, j]), _z_formula(c.cell(int(idx)), 1 + j, on), "num")
        zrefs.append(ss.ref(r, zc) + ":" + absolute(r, zc + m - 1))
    new_refs: list[str] = []
    if model.new is not None:
        side = zc + m + 1
        ss.put(5, side, "new row", style="head")
        for j, c in enumerate(model.new.columns):
            ss.put(5, side + 1 + j, model.xs[j].name, style="head")
            ss.put(5, side + 1 + m + j, f"z {model.xs[j].name}" if on else model.xs[j].name,
                   style="head")
        Zn = res.scaling_.transform(model.new.X)
        for i in range(model.new.n):
            r = _STD_FIRST + i
            ss.put(r, side, model.new.columns[0].row_of(i), style="int")
            for j, c in enumerate(model.new.columns):
                ss.put(r, side + 1 + j, float(model.new.X[i, j]), f"={c.cell(i)}", "num")
                ss.put(r, side + 1 + m + j, float(Zn[i, j]), _z_formula(c.cell(i), 1 + j, on),
                       "num")
            new_refs.append(ss.ref(r, side + 1 + m) + ":" + absolute(r, side + 2 * m))
    ss.widths = {0: 16}
    ss.freeze = (_STD_FIRST, 1)
    return ss, zrefs, new_refs


def _z_formula(data_cell: str, stat_col: int, on: bool) -> str:
    """z of a data cell, from the mean (row 4) and SD (row 5) cells of its attribute."""
    if not on:
        return f"={data_cell}"
    letter = col_letter(stat_col + 1)
    return f"=({data_cell}-{letter}$4)/{letter}$5"


def _distance(za: np.ndarray, zb: np.ndarray) -> float:
    """What SQRT(SUMXMY2(a, b)) gives."""
    return math.sqrt(math.fsum((float(a) - float(b)) * (float(a) - float(b))
                               for a, b in zip(za, zb)))


def plan_neighbours(model: ModelData, res: Any, version: str) -> NeighbourSheets:
    """Plan the standard-units, neighbours, fitted, residual and summary sheets."""
    vote = model.settings.method == "neighbour_vote"
    tag, y = model.tag, model.y
    k = int(res.k_)
    ss, zrefs, new_zrefs = _std_sheet(model, res)
    ns = SheetPlan(sheet_title(tag, "nbrs"))
    summary = SheetPlan(sheet_title(tag, "summary"))
    k_cell = summary.ref(4, 1)
    focus_cell = summary.ref(5, 1)  # the focus class, on a vote's summary sheet
    focus = _focus(model, res) if vote else None

    ns.put(0, 0, f"Nearest neighbours — model {tag} (k = {k}); neighbour rows are rows of "
           f"sheet '{y.sheet}'", style="title")
    ns.note(1, 0, TIE_RULE, width=170)  # two lines, above the header in row 4
    heads = (["data row"] + [f"neighbour {m + 1} row" for m in range(k)]
             + [f"distance {m + 1}" for m in range(k)] + [f"{y.name} of {m + 1}" for m in range(k)])
    if vote:
        heads += [f"votes {m + 1}" for m in range(k)]
        heads += ["prediction", "votes for it", "score (share)", f"share {label_text(focus)}"]
    else:
        heads += ["prediction (mean)", "smallest", "median", "largest"]
    for c, h in enumerate(heads):
        ns.put(3, c, h, style="head")
    Z = res.Z_
    pred_col = 1 + (4 if vote else 3) * k
    fitted_refs: list[str] = []
    fitted: list[Any] = []
    for i, idx in enumerate(model.used):
        r = FIRST_ROW + i
        ns.put(r, 0, y.row_of(int(idx)), style="int")
        value = _neighbour_row(ns, r, model, res.neighbours_[i], zrefs[i], zrefs,
                               Z[i], Z, k, k_cell, focus_cell, vote, focus)
        fitted.append(value)
        fitted_refs.append(ns.ref(r, pred_col, fixed=False))
    names: list[tuple[str, str]] = []
    if model.new is not None:
        start = FIRST_ROW + len(model.used) + 2
        ns.put(start - 1, 0, "new row", style="head")
        for c, h in enumerate(heads[1:], start=1):
            ns.put(start - 1, c, h, style="head")
        pred = res.predict(model.new.X)
        Zn = res.scaling_.transform(model.new.X)
        for i in range(model.new.n):
            r = start + i
            ns.put(r, 0, model.new.columns[0].row_of(i), style="int")
            _neighbour_row(ns, r, model, pred.neighbours[i], new_zrefs[i], zrefs,
                           Zn[i], Z, k, k_cell, focus_cell, vote, focus)
        names.append((f"sf_{tag}_pred",
                      ns.col_range(pred_col, start, start + model.new.n - 1)))
    ns.widths = {0: 9}
    ns.freeze = (FIRST_ROW, 1)

    fs, fit_rng = _fitted_sheet(model, fitted_refs, fitted, vote, ns.title)
    sheets = [summary, ss, ns, fs]
    if vote:
        names = [(f"sf_{tag}_fitted", fit_rng)] + names
        _vote_summary(summary, model, res, fs, ns, fitted, focus, version, k)
    else:
        rs, resid = plan_residual_sheet(
            model, fitted_refs, np.asarray(fitted, dtype=float),
            "residual = observed − fitted (the leave-one-out mean of the row's neighbours).")
        sheets.append(rs)
        names = [(f"sf_{tag}_fitted", fit_rng),
                 (f"sf_{tag}_resid", rs.col_range(3, FIRST_ROW, FIRST_ROW + len(resid) - 1))
                 ] + names
        _mean_summary(summary, model, res, fs, rs, resid, version, k)
    return NeighbourSheets(sheets, names)


def _neighbour_row(ns: SheetPlan, r: int, model: ModelData, nbrs: np.ndarray, zref: str,
                   zrefs: list[str], z: np.ndarray, Z: np.ndarray, k: int, k_cell: str,
                   focus_cell: str, vote: bool, focus: object) -> Any:
    """One row of the neighbours sheet; returns its prediction (the cached value)."""
    y = model.y
    resp: list[Any] = []
    for m, j in enumerate(nbrs):
        j = int(j)
        ns.put(r, 1 + m, y.row_of(int(model.used[j])), style="int")
        ns.put(r, 1 + k + m, _distance(z, Z[j]), f"=SQRT(SUMXMY2({zref},{zrefs[j]}))", "dist")
        label = model.Y[j]
        resp.append(label)
        ns.put(r, 1 + 2 * k + m, label if vote else float(label),
               f"={y.cell(int(model.used[j]))}", "text" if vote else "num")
    a, b = 1 + 2 * k, 3 * k
    block = f"{col_letter(a + 1)}{r + 1}:{col_letter(b + 1)}{r + 1}"
    if not vote:
        vals = [float(v) for v in resp]
        mean = _mean(vals)
        c = 1 + 3 * k
        ns.put(r, c, mean, f"=AVERAGE({block})", "num")
        ns.put(r, c + 1, min(vals), f"=MIN({block})", "num")
        ns.put(r, c + 2, float(np.median(vals)), f"=MEDIAN({block})", "num")
        ns.put(r, c + 3, max(vals), f"=MAX({block})", "num")
        return mean
    votes = [sum(labels_equal(u, v) for u in resp) for v in resp]
    for m in range(k):
        cell = f"{col_letter(a + 1 + m)}{r + 1}"
        ns.put(r, 1 + 3 * k + m, votes[m], f"=SUMPRODUCT(--EXACT({block},{cell}))", "int")
    vb = f"{col_letter(2 + 3 * k)}{r + 1}:{col_letter(1 + 4 * k)}{r + 1}"
    best = max(votes)
    pred = resp[votes.index(best)]
    c = 1 + 4 * k
    ns.put(r, c, pred, f"=INDEX({block},MATCH(MAX({vb}),{vb},0))", "text")
    ns.put(r, c + 1, best, f"=MAX({vb})", "int")
    ns.put(r, c + 2, best / k, f"=MAX({vb})/{k_cell}", "ratio")
    share = sum(labels_equal(u, focus) for u in resp) / k
    ns.put(r, c + 3, share, f"=SUMPRODUCT(--EXACT({block},{focus_cell}))/{k_cell}",
           "ratio")
    return pred


def _focus(model: ModelData, res: Any) -> object:
    """The class the work list ranks by: as given (checked in declare), else the rarest."""
    classes = list(res.classes_)
    given = model.settings["focus"]
    if given is not None:
        return next(c for c in classes if labels_equal(c, given))
    counts = [sum(labels_equal(v, c) for v in model.Y) for c in classes]
    return classes[counts.index(min(counts))]


def _fitted_sheet(model: ModelData, refs: list[str], fitted: list[Any], vote: bool,
                  nbrs_title: str) -> tuple[SheetPlan, str]:
    y = model.y
    fs = SheetPlan(sheet_title(model.tag, "fitted"))
    fs.put(0, 0, f"Fitted values — model {model.tag}", style="title")
    fs.note(1, 0, f"Each fitted value is the leave-one-out prediction on sheet '{nbrs_title}': "
            "the row itself is never one of its neighbours, so the errors here are honest.")
    heads = ["data row", f"{y.name} (observed)", f"predicted {y.name}" if vote
             else f"fitted {y.name}"]
    if vote:
        heads.append("right (1) / wrong (0)")
    for c, h in enumerate(heads):
        fs.put(3, c, h, style="head")
    for i, idx in enumerate(model.used):
        r = FIRST_ROW + i
        fs.put(r, 0, y.row_of(int(idx)), style="int")
        obs = model.Y[i]
        fs.put(r, 1, obs if vote else float(obs), f"={y.cell(int(idx))}",
               "text" if vote else "num")
        fs.put(r, 2, fitted[i], f"={refs[i]}", "text" if vote else "num")
        if vote:
            fs.put(r, 3, int(labels_equal(obs, fitted[i])), f"=IF(EXACT(B{r + 1},C{r + 1}),1,0)",
                   "int")
    last = FIRST_ROW + len(model.used) - 1
    plan_left_out(fs, model, len(heads) + 1)
    fs.widths = {0: 9, 1: 16, 2: 16, 3: 14}
    fs.freeze = (FIRST_ROW, 1)
    return fs, fs.col_range(2, FIRST_ROW, last)


def _settings_block(s: SheetPlan, model: ModelData, res: Any, version: str, k: int) -> int:
    """Title, notes and the stated settings; k sits in B5 (row 4) for formulas to use."""
    vote = model.settings.method == "neighbour_vote"
    what = "most common class" if vote else "mean"
    xs = ", ".join(model.attribute_names)
    s.put(0, 0, f"Neighbour {'vote' if vote else 'mean'} — model {model.tag}: "
          f"{model.y.name} from {xs}", style="title")
    s.put(1, 0, f"Each prediction is the {what} of the k most similar rows (sheet "
          f"'{sheet_title(model.tag, 'nbrs')}'); computed by sheetfit {version}.", style="note")
    s.put(3, 0, "setting", style="head")
    s.put(3, 1, "value", style="head")
    s.put(3, 2, "how it was set", style="head")
    s.put(4, 0, "k (neighbours)", style="label")
    s.put(4, 1, k, style="int")
    s.put(4, 2, "given in the settings" if res.k_given_
          else "chosen: smallest leave-one-out error in the k table below", style="note")
    s.put(5, 0, "focus class" if vote else "standard units", style="label")
    return 7


def _k_table(s: SheetPlan, row: int, res: Any, k: int, label: str, err_cell: str,
             err_value: float, style: str = "num") -> int:
    s.put(row, 0, "k", style="head")
    s.put(row, 1, f"leave-one-out {label}", style="head")
    s.put(row, 2, "", style="head")
    first = row + 1
    for i, (kk, err) in enumerate(res.k_table_):
        s.put(first + i, 0, int(kk), style="int")
        s.put(first + i, 1, float(err), style=style)
        if int(kk) == k:
            s.put(first + i, 2, "◀ used", style="label")
    last = first + len(res.k_table_) - 1
    r = last + 1
    if k <= len(res.k_table_):
        s.put(r, 0, "check: table at k minus the formula above", style="note")
        diff = float(res.k_table_[k - 1][1]) - err_value
        s.put(r, 1, diff, f"=INDEX(B{first + 1}:B{last + 1},{absolute(4, 1)})-{err_cell}",
              "check")
    else:
        s.put(r, 0, f"k = {k} is beyond the table (it stops at {len(res.k_table_)})", style="note")
    return r + 2


def _mean_summary(s: SheetPlan, model: ModelData, res: Any, fs: SheetPlan, rs: SheetPlan,
                  resid: np.ndarray, version: str, k: int) -> None:
    row = _settings_block(s, model, res, version, k)
    on = bool(res.scaling_.on)
    s.put(5, 1, "yes" if on else "no")
    s.put(5, 2, "distances in standard units" if on else "distances in the attributes' own "
          "units", style="note")
    n = len(model.used)
    last = FIRST_ROW + n - 1
    r_rng = rs.col_range(3, FIRST_ROW, last)
    y_rng = fs.col_range(1, FIRST_ROW, last)
    yv = [float(v) for v in model.Y]
    s.put(row, 0, "leave-one-out error (native formulas)", style="head")
    s.put(row, 1, "value", style="head")
    s.put(row, 2, "what it is", style="head")
    rmse = math.sqrt(fsum_sq(resid) / n)
    ymean = _mean(yv)
    sdy = math.sqrt(math.fsum((v - ymean) * (v - ymean) for v in yv) / n)
    lines = [
        ("rows used (n)", n, f"=COUNT({r_rng})", "int", "data rows with a prediction"),
        ("RMSE", rmse, f"=SQRT(SUMSQ({r_rng})/B{row + 2})", "num",
         "root mean squared leave-one-out residual"),
        ("SD of y", sdy, f"=STDEV.P({y_rng})", "num",
         "the RMSE of predicting every row by the mean of y, for comparison"),
    ]
    for i, (label, value, formula, style, what) in enumerate(lines):
        s.put(row + 1 + i, 0, label, style="label")
        s.put(row + 1 + i, 1, value, formula, style)
        s.put(row + 1 + i, 2, what, style="note")
    rmse_cell = absolute(row + 2, 1)
    row = _k_table(s, row + len(lines) + 2, res, k, "RMSE", rmse_cell, rmse)
    s.put(row, 0, "Each prediction is read together with the spread of its neighbours' "
          "responses (smallest, median, largest) on the neighbours sheet.", style="note")
    s.widths = {0: 34, 1: 18, 2: 40}


def _vote_summary(s: SheetPlan, model: ModelData, res: Any, fs: SheetPlan, ns: SheetPlan,
                  fitted: list[Any], focus: object, version: str, k: int) -> None:
    row = _settings_block(s, model, res, version, k)
    s.put(5, 1, focus if isinstance(focus, (str, float)) else str(focus), style="text")
    s.put(5, 2, "given in the settings" if model.settings["focus"] is not None
          else "the rarest class (setting focus changes it)", style="note")
    s.put(6, 0, "standard units", style="label")
    s.put(6, 1, "yes" if res.scaling_.on else "no")
    row += 1
    n = len(model.used)
    last = FIRST_ROW + n - 1
    obs = fs.col_range(1, FIRST_ROW, last)
    pred = fs.col_range(2, FIRST_ROW, last)
    right = fs.col_range(3, FIRST_ROW, last)
    n_right = sum(labels_equal(a, b) for a, b in zip(model.Y, fitted))
    s.put(row, 0, "leave-one-out error (native formulas)", style="head")
    s.put(row, 1, "value", style="head")
    s.put(row + 1, 0, "rows used (n)", style="label")
    s.put(row + 1, 1, n, f"=COUNTA({obs})", "int")
    s.put(row + 2, 0, "error rate", style="label")
    err_rate = 1 - n_right / n
    s.put(row + 2, 1, err_rate, f"=1-SUM({right})/B{row + 2}", "ratio")
    err_cell = absolute(row + 2, 1)
    n_cell = absolute(row + 1, 1)
    row += 4
    classes = list(res.classes_)
    C = len(classes)
    s.put(row, 0, "confusion matrix: actual (rows) × predicted (columns)", style="head")
    for b, cls in enumerate(classes):
        s.put(row, 1 + b, cls, style="head")
    s.put(row, 1 + C, "rows (actual)", style="head")
    s.put(row, 2 + C, "base rate", style="head")
    s.put(row, 3 + C, "recall", style="head")
    top = row + 1
    counts = np.zeros((C, C), dtype=int)
    for a, p in zip(model.Y, fitted):
        counts[_index(classes, a), _index(classes, p)] += 1
    cls_col = "A"  # class labels stand in column A of the matrix
    for a, cls in enumerate(classes):
        r = top + a
        s.put(r, 0, cls, style="label")
        for b in range(C):
            hdr = absolute(row, 1 + b)
            s.put(r, 1 + b, int(counts[a, b]),
                  f"=SUMPRODUCT(EXACT({obs},${cls_col}{r + 1})*EXACT({pred},{hdr}))", "int")
        rsum = int(counts[a].sum())
        span = f"{col_letter(2)}{r + 1}:{col_letter(1 + C)}{r + 1}"
        s.put(r, 1 + C, rsum, f"=SUM({span})", "int")
        base = sum(labels_equal(v, cls) for v in model.Y) / n
        s.put(r, 2 + C, base, f"=SUMPRODUCT(--EXACT({obs},${cls_col}{r + 1}))/{n_cell}", "ratio")
        diag = f"{col_letter(2 + a)}{r + 1}"
        s.put(r, 3 + C, int(counts[a, a]) / rsum if rsum else "n/a",
              f'=IF({col_letter(2 + C)}{r + 1}=0,"n/a",{diag}/{col_letter(2 + C)}{r + 1})',
              "ratio")
    prow = top + C
    s.put(prow, 0, "rows (predicted)", style="label")
    s.put(prow + 1, 0, "precision", style="label")
    for b in range(C):
        L = col_letter(2 + b)
        csum = int(counts[:, b].sum())
        s.put(prow, 1 + b, csum, f"=SUM({L}{top + 1}:{L}{top + C})", "int")
        s.put(prow + 1, 1 + b, int(counts[b, b]) / csum if csum else "n/a",
              f'=IF({L}{prow + 1}=0,"n/a",{L}{top + 1 + b}/{L}{prow + 1})', "ratio")
    row = prow + 3
    s.put(row, 0, "in natural frequencies", style="head")
    for a, cls in enumerate(classes):
        r = row + 1 + a
        L = col_letter(2 + a)
        text = (f"Of {n} rows, {int(counts[:, a].sum())} were predicted {label_text(cls)}; "
                f"{int(counts[a, a])} of those were {label_text(cls)}, and "
                f"{int(counts[a].sum())} rows were {label_text(cls)} in all.")
        s.put(r, 0, text,
              f'="Of "&{n_cell}&" rows, "&{L}{prow + 1}&" were predicted "&${cls_col}{top + 1 + a}'
              f'&"; "&{L}{top + 1 + a}&" of those were "&${cls_col}{top + 1 + a}&", and "'
              f'&{col_letter(2 + C)}{top + 1 + a}&" rows were "&${cls_col}{top + 1 + a}'
              f'&" in all."', "text")
    row = row + 2 + C
    if model.new is not None:
        row = _work_list(s, row, model, res, ns, focus)
    _k_table(s, row, res, k, "error rate", err_cell, err_rate, "ratio")
    s.widths = {0: 34, 1: 14, 2: 14}


def _index(classes: list[Any], label: object) -> int:
    for i, c in enumerate(classes):
        if labels_equal(c, label):
            return i
    raise KeyError(label)


def _work_list(s: SheetPlan, top: int, model: ModelData, res: Any, ns: SheetPlan,
               focus: object) -> int:
    """New rows ranked by the share of neighbours in the focus class (highest first)."""
    assert model.new is not None
    k = int(res.k_)
    pred = res.predict(model.new.X)
    shares = [sum(labels_equal(model.Y[int(j)], focus) for j in nb) / k for nb in pred.neighbours]
    order = sorted(range(model.new.n), key=lambda i: (-shares[i], i))
    col = 0
    s.put(top, col, f"work list: new rows by share of neighbours in {label_text(focus)}",
          style="label")
    s.put(top + 1, col, "rank", style="head")
    s.put(top + 1, col + 1, "new row", style="head")
    s.put(top + 1, col + 2, f"share {label_text(focus)}", style="head")
    s.put(top + 1, col + 3, "prediction", style="head")
    start = FIRST_ROW + len(model.used) + 2
    pred_col = 1 + 4 * k
    for rank, i in enumerate(order, start=1):
        r = top + 1 + rank
        src = start + i
        s.put(r, col, rank, style="int")
        s.put(r, col + 1, model.new.columns[0].row_of(i), f"={ns.ref(src, 0, fixed=False)}",
              "int")
        s.put(r, col + 2, shares[i], f"={ns.ref(src, pred_col + 3, fixed=False)}", "ratio")
        s.put(r, col + 3, pred.value[i], f"={ns.ref(src, pred_col, fixed=False)}", "text")
    s.put(top + 2 + model.new.n, 0, "A ranked list, not a verdict: choose the cut-off from the "
          "cost of a missed case against the cost of a needless follow-up.", style="note")
    return top + 4 + model.new.n

