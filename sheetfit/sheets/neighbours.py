"""Sheet plans for neighbour models (k nearest neighbours: mean or vote).

A reviewer can pick any row and check, by hand, its standard units, the distance to
each listed neighbour, and the average (or the vote) of those neighbours' responses.
Every number comes from the fitted result (and its prediction for the new rows); the
numeric core computes them the way the formulas do (correctly rounded sums, products
for squares), so each cached value is what its formula gives.
Formula cost grows as n·k: no formula scans all rows for one row.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..a1 import absolute, area, col_letter
from ..declare.model import ModelData
from ..fit._search import TIE_DIGITS
from ..fit.neighbours import (
    MeanPrediction,
    NeighbourMeanResult,
    NeighbourVoteResult,
    VotePrediction,
)
from ..fit.results import Fitted
from ..labels import label_text, labels_equal
from ..owned import sheet_title
from .common import FIRST_ROW, plan_left_out, plan_residual_sheet
from .plan import Planned, SheetPlan

__all__ = ["TIE_RULE", "plan_neighbour_mean", "plan_neighbour_vote"]

#: The tie rules, in the words the sheets and the README use.
TIE_RULE = (
    f"Ties: distances that agree to {TIE_DIGITS} significant digits count as equal, and "
    "among equal distances the lower data row comes first; a row is never its own neighbour "
    "(leave-one-out). In a vote, among classes with equally many neighbours the class of "
    "the nearest of them wins."
)

_STD_FIRST = 6  # first data row (0-based) on the standard-units sheet

_Result = NeighbourMeanResult | NeighbourVoteResult
_Prediction = MeanPrediction | VotePrediction


@dataclass
class _Rows:
    """What one block of the neighbours sheet shows, taken from a result or a prediction."""

    first_ref: list[int]  # sheet row of each row (data rows or new rows)
    Z: np.ndarray  # the rows in the units the distances use
    neighbours: np.ndarray
    distances: np.ndarray
    value: list[Any]  # the prediction of each row (mean or class)
    spread: list[tuple[float, float, float]] | None = None  # mean: smallest, median, largest
    position_votes: np.ndarray | None = None  # vote: votes for each neighbour's class
    votes: list[int] | None = None  # vote: votes for the winning class
    score: list[float] | None = None  # vote: votes / k
    share: list[float] | None = None  # vote: share of the k in the focus class


def _std_sheet(model: ModelData, res: _Result, new: _Prediction | None
               ) -> tuple[SheetPlan, list[str], list[str]]:
    """Standard-units sheet; returns it and the z-row references of data and new rows."""
    tag = model.tag
    ss = SheetPlan(sheet_title(tag, "std"))
    m = len(model.xs)
    n = res.n_
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
    mean, sd = res.X_mean_.tolist(), res.X_sd_.tolist()
    for j, c in enumerate(model.xs):
        xcol = 1 + j
        rng = f"{col_letter(xcol + 1)}{_STD_FIRST + 1}:{col_letter(xcol + 1)}{last + 1}"
        ss.put(3, xcol, mean[j], f"=AVERAGE({rng})", "num")
        ss.put(4, xcol, sd[j], f"=STDEV.P({rng})", "num")
        ss.put(5, xcol, c.name, style="head")
        ss.put(5, zc + j, f"z {c.name}" if on else f"{c.name} (as is)", style="head")
    zrefs: list[str] = []
    X, Z = res.X_.tolist(), res.Z_.tolist()
    for i, idx in enumerate(model.used):
        r = _STD_FIRST + i
        ss.put(r, 0, model.y.row_of(int(idx)), style="int")
        for j, c in enumerate(model.xs):
            ss.put(r, 1 + j, X[i][j], f"={c.cell(int(idx))}", "num")
            ss.put(r, zc + j, Z[i][j], _z_formula(c.cell(int(idx)), 1 + j, on), "num")
        zrefs.append(ss.ref(r, zc) + ":" + absolute(r, zc + m - 1))
    new_refs: list[str] = []
    if model.new is not None and new is not None:
        side = zc + m + 1
        ss.put(5, side, "new row", style="head")
        for j, c in enumerate(model.new.columns):
            ss.put(5, side + 1 + j, model.xs[j].name, style="head")
            ss.put(5, side + 1 + m + j, f"z {model.xs[j].name}" if on else model.xs[j].name,
                   style="head")
        Zn = new.Z.tolist()
        for i in range(model.new.n):
            r = _STD_FIRST + i
            ss.put(r, side, model.new.columns[0].row_of(i), style="int")
            for j, c in enumerate(model.new.columns):
                ss.put(r, side + 1 + j, float(model.new.X[i, j]), f"={c.cell(i)}", "num")
                ss.put(r, side + 1 + m + j, Zn[i][j], _z_formula(c.cell(i), 1 + j, on), "num")
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


def _mean_rows(model: ModelData, res: NeighbourMeanResult,
               new: MeanPrediction | None) -> tuple[_Rows, _Rows | None]:
    data = _Rows([model.y.row_of(int(i)) for i in model.used], res.Z_, res.neighbours_,
                 res.distances_, res.fitted_.tolist(),
                 spread=list(zip(res.nb_min_.tolist(), res.nb_median_.tolist(),
                                 res.nb_max_.tolist())))
    if new is None or model.new is None:
        return data, None
    return data, _Rows([model.new.columns[0].row_of(i) for i in range(model.new.n)], new.Z,
                       new.neighbours, new.distances, new.value.tolist(),
                       spread=list(zip(new.nb_min.tolist(), new.nb_median.tolist(),
                                       new.nb_max.tolist())))


def _vote_rows(model: ModelData, res: NeighbourVoteResult, new: VotePrediction | None,
               focus: str | float) -> tuple[_Rows, _Rows | None]:
    data = _Rows([model.y.row_of(int(i)) for i in model.used], res.Z_, res.neighbours_,
                 res.distances_, res.fitted_.tolist(), position_votes=res.position_votes_,
                 votes=res.votes_.tolist(), score=res.score_.tolist(),
                 share=res.share(focus).tolist())
    if new is None or model.new is None:
        return data, None
    return data, _Rows([model.new.columns[0].row_of(i) for i in range(model.new.n)], new.Z,
                       new.neighbours, new.distances, new.value.tolist(),
                       position_votes=new.position_votes, votes=new.votes.tolist(),
                       score=new.score.tolist(), share=new.share(focus).tolist())


def plan_neighbour_mean(model: ModelData, fitted: Fitted[NeighbourMeanResult],
                        version: str) -> Planned:
    """Plan the summary, standard-units, neighbours, fitted and residual sheets of a mean."""
    res = fitted.result
    data, new = _mean_rows(model, res, fitted.new)
    return _plan(model, res, fitted.new, data, new, None, version)


def plan_neighbour_vote(model: ModelData, fitted: Fitted[NeighbourVoteResult],
                        version: str) -> Planned:
    """Plan the summary, standard-units, neighbours and fitted sheets of a vote."""
    res = fitted.result
    focus = _focus(model, res)
    data, new = _vote_rows(model, res, fitted.new, focus)
    return _plan(model, res, fitted.new, data, new, focus, version)


def _plan(model: ModelData, res: _Result, prediction: _Prediction | None, data: _Rows,
          new: _Rows | None, focus: str | float | None, version: str) -> Planned:
    """The sheets both neighbour methods share; ``focus`` is None for a mean, a class for a vote."""
    vote = focus is not None
    tag, y = model.tag, model.y
    k = int(res.k_)
    ss, zrefs, new_zrefs = _std_sheet(model, res, prediction)
    ns = SheetPlan(sheet_title(tag, "nbrs"))
    summary = SheetPlan(sheet_title(tag, "summary"))
    k_cell = summary.ref(4, 1)
    focus_cell = summary.ref(5, 1)  # the focus class, on a vote's summary sheet

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
    pred_col = 1 + (4 if vote else 3) * k
    ctx = _Cells(model, res.y_.tolist(), zrefs, k, k_cell, focus_cell, vote)
    fitted_refs: list[str] = []
    for i in range(len(model.used)):
        r = FIRST_ROW + i
        _neighbour_row(ns, r, i, data, zrefs[i], ctx)
        fitted_refs.append(ns.ref(r, pred_col, fixed=False))
    names: list[tuple[str, str]] = []
    if new is not None and model.new is not None:
        start = FIRST_ROW + len(model.used) + 2
        ns.put(start - 1, 0, "new row", style="head")
        for c, h in enumerate(heads[1:], start=1):
            ns.put(start - 1, c, h, style="head")
        for i in range(model.new.n):
            _neighbour_row(ns, start + i, i, new, new_zrefs[i], ctx)
        names.append((f"sf_{tag}_pred",
                       ns.col_range(pred_col, start, start + model.new.n - 1)))
    ns.widths = {0: 9}
    ns.freeze = (FIRST_ROW, 1)

    fs, fit_rng = _fitted_sheet(model, res, fitted_refs, vote, ns.title)
    sheets = [summary, ss, ns, fs]
    if isinstance(res, NeighbourVoteResult) and focus is not None:
        names = [(f"sf_{tag}_fitted", fit_rng)] + names
        names += _vote_summary(summary, model, res, fs, ns, new, focus, version, k)
    elif isinstance(res, NeighbourMeanResult):
        rs = plan_residual_sheet(
            model, fitted_refs, res.fitted_, res.resid_,
            "residual = observed − fitted (the leave-one-out mean of the row's neighbours).")
        sheets.append(rs)
        names = [(f"sf_{tag}_fitted", fit_rng),
                 (f"sf_{tag}_resid", rs.col_range(3, FIRST_ROW, FIRST_ROW + res.n_ - 1))
                 ] + names
        names += _mean_summary(summary, model, res, fs, rs, version, k)
    else:
        raise TypeError(f"a neighbour plan for {type(res).__name__} with focus {focus!r}")
    # read by the charts: the standard units of the used rows
    names.append((f"sf_{tag}_z", zrefs[0].split(":")[0] + ":" + zrefs[-1].split(":")[1]))
    return Planned(sheets, names)


@dataclass
class _Cells:
    """What every row of the neighbours sheet refers to."""

    model: ModelData
    y: list[Any]  # the training responses (numbers or class labels)
    zrefs: list[str]
    k: int
    k_cell: str
    focus_cell: str
    vote: bool


def _neighbour_row(ns: SheetPlan, r: int, i: int, rows: _Rows, zref: str, c: _Cells) -> None:
    """Row ``i`` of a block of the neighbours sheet, at sheet row ``r``."""
    model, k = c.model, c.k
    yc = model.y
    nbrs, dists = rows.neighbours[i].tolist(), rows.distances[i].tolist()
    for m, j in enumerate(nbrs):
        ns.put(r, 1 + m, yc.row_of(int(model.used[j])), style="int")
        ns.put(r, 1 + k + m, dists[m], f"=SQRT(SUMXMY2({zref},{c.zrefs[j]}))", "dist")
        ns.put(r, 1 + 2 * k + m, c.y[j], f"={yc.cell(int(model.used[j]))}",
               "text" if c.vote else "num")
    ns.put(r, 0, rows.first_ref[i], style="int")
    a, b = 1 + 2 * k, 3 * k
    block = f"{col_letter(a + 1)}{r + 1}:{col_letter(b + 1)}{r + 1}"
    if not c.vote:
        lo, med, hi = rows.spread[i] if rows.spread else (math.nan,) * 3
        col = 1 + 3 * k
        ns.put(r, col, rows.value[i], f"=AVERAGE({block})", "num")
        ns.put(r, col + 1, lo, f"=MIN({block})", "num")
        ns.put(r, col + 2, med, f"=MEDIAN({block})", "num")
        ns.put(r, col + 3, hi, f"=MAX({block})", "num")
        return
    if rows.position_votes is None or rows.votes is None or rows.score is None \
            or rows.share is None:
        raise ValueError("a vote block needs its votes, scores and shares")
    pv = rows.position_votes[i].tolist()
    for m in range(k):
        cell = f"{col_letter(a + 1 + m)}{r + 1}"
        ns.put(r, 1 + 3 * k + m, pv[m], f"=SUMPRODUCT(--EXACT({block},{cell}))", "int")
    vb = f"{col_letter(2 + 3 * k)}{r + 1}:{col_letter(1 + 4 * k)}{r + 1}"
    col = 1 + 4 * k
    ns.put(r, col, rows.value[i], f"=INDEX({block},MATCH(MAX({vb}),{vb},0))", "text")
    ns.put(r, col + 1, rows.votes[i], f"=MAX({vb})", "int")
    ns.put(r, col + 2, rows.score[i], f"=MAX({vb})/{c.k_cell}", "ratio")
    ns.put(r, col + 3, rows.share[i], f"=SUMPRODUCT(--EXACT({block},{c.focus_cell}))/{c.k_cell}",
           "ratio")


def _focus(model: ModelData, res: NeighbourVoteResult) -> str | float:
    """The class the work list ranks by: as given (checked on reading), else the rarest."""
    classes = res.classes_.tolist()
    given = model.settings["focus"]
    if given is not None:
        return next(c for c in classes if labels_equal(c, given))
    return classes[int(np.argmin(res.base_rate_))]


def _fitted_sheet(model: ModelData, res: _Result, refs: list[str], vote: bool,
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
    obs, fitted = res.y_.tolist(), res.fitted_.tolist()
    right = res.correct_.tolist() if isinstance(res, NeighbourVoteResult) else []
    for i, idx in enumerate(model.used):
        r = FIRST_ROW + i
        fs.put(r, 0, y.row_of(int(idx)), style="int")
        fs.put(r, 1, obs[i], f"={y.cell(int(idx))}", "text" if vote else "num")
        fs.put(r, 2, fitted[i], f"={refs[i]}", "text" if vote else "num")
        if vote:
            fs.put(r, 3, int(right[i]), f"=IF(EXACT(B{r + 1},C{r + 1}),1,0)", "int")
    last = FIRST_ROW + len(model.used) - 1
    plan_left_out(fs, model, len(heads) + 1)
    fs.widths = {0: 9, 1: 16, 2: 16, 3: 14}
    fs.freeze = (FIRST_ROW, 1)
    return fs, fs.col_range(2, FIRST_ROW, last)


def _settings_block(s: SheetPlan, model: ModelData, res: _Result, version: str, k: int,
                    vote: bool) -> int:
    """Title, notes and the stated settings; k sits in B5 (row 4) for formulas to use."""
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


def _k_table(s: SheetPlan, row: int, res: _Result, k: int, label: str, err_cell: str,
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


def _mean_summary(s: SheetPlan, model: ModelData, res: NeighbourMeanResult, fs: SheetPlan,
                  rs: SheetPlan, version: str, k: int) -> list[tuple[str, str]]:
    row = _settings_block(s, model, res, version, k, False)
    on = bool(res.scaling_.on)
    s.put(5, 1, "yes" if on else "no")
    s.put(5, 2, "distances in standard units" if on else "distances in the attributes' own "
          "units", style="note")
    n = res.n_
    last = FIRST_ROW + n - 1
    r_rng = rs.col_range(3, FIRST_ROW, last)
    y_rng = fs.col_range(1, FIRST_ROW, last)
    s.put(row, 0, "leave-one-out error (native formulas)", style="head")
    s.put(row, 1, "value", style="head")
    s.put(row, 2, "what it is", style="head")
    rmse, sdy = res.rmse_, res.y_sd_
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
    row_rmse = row + 2
    row = _k_table(s, row + len(lines) + 2, res, k, "RMSE", rmse_cell, rmse)
    s.put(row, 0, "Each prediction is read together with the spread of its neighbours' "
          "responses (smallest, median, largest) on the neighbours sheet.", style="note")
    s.widths = {0: 34, 1: 18, 2: 40}
    return [(f"sf_{model.tag}_loo", s.ref(row_rmse, 1))]  # read by the charts


def _vote_summary(s: SheetPlan, model: ModelData, res: NeighbourVoteResult, fs: SheetPlan,
                  ns: SheetPlan, new: _Rows | None, focus: str | float, version: str,
                  k: int) -> list[tuple[str, str]]:
    row = _settings_block(s, model, res, version, k, True)
    s.put(5, 1, focus if isinstance(focus, (str, float)) else str(focus), style="text")
    s.put(5, 2, "given in the settings" if model.settings["focus"] is not None
          else "the rarest class (setting focus changes it)", style="note")
    s.put(6, 0, "standard units", style="label")
    s.put(6, 1, "yes" if res.scaling_.on else "no")
    row += 1
    n = res.n_
    last = FIRST_ROW + n - 1
    obs = fs.col_range(1, FIRST_ROW, last)
    pred = fs.col_range(2, FIRST_ROW, last)
    right = fs.col_range(3, FIRST_ROW, last)
    n_right = int(np.count_nonzero(res.correct_))
    s.put(row, 0, "leave-one-out error (native formulas)", style="head")
    s.put(row, 1, "value", style="head")
    s.put(row + 1, 0, "rows used (n)", style="label")
    s.put(row + 1, 1, n, f"=COUNTA({obs})", "int")
    s.put(row + 2, 0, "error rate", style="label")
    err_rate = 1 - n_right / n  # as the formula has it; error_rate_ divides the wrong ones
    s.put(row + 2, 1, err_rate, f"=1-SUM({right})/B{row + 2}", "ratio")
    err_cell = absolute(row + 2, 1)
    err_row = row + 2
    n_cell = absolute(row + 1, 1)
    row += 4
    classes = res.classes_.tolist()
    C = len(classes)
    s.put(row, 0, "confusion matrix: actual (rows) × predicted (columns)", style="head")
    for b, cls in enumerate(classes):
        s.put(row, 1 + b, cls, style="head")
    s.put(row, 1 + C, "rows (actual)", style="head")
    s.put(row, 2 + C, "base rate", style="head")
    s.put(row, 3 + C, "recall", style="head")
    top = row + 1
    counts = res.confusion_
    base_rate, recall = res.base_rate_.tolist(), res.recall_.tolist()
    precision = res.precision_.tolist()
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
        s.put(r, 2 + C, base_rate[a], f"=SUMPRODUCT(--EXACT({obs},${cls_col}{r + 1}))/{n_cell}", "ratio")
        diag = f"{col_letter(2 + a)}{r + 1}"
        s.put(r, 3 + C, "n/a" if math.isnan(recall[a]) else recall[a],
              f'=IF({col_letter(2 + C)}{r + 1}=0,"n/a",{diag}/{col_letter(2 + C)}{r + 1})',
              "ratio")
    prow = top + C
    s.put(prow, 0, "rows (predicted)", style="label")
    s.put(prow + 1, 0, "precision", style="label")
    for b in range(C):
        L = col_letter(2 + b)
        csum = int(counts[:, b].sum())
        s.put(prow, 1 + b, csum, f"=SUM({L}{top + 1}:{L}{top + C})", "int")
        s.put(prow + 1, 1 + b, "n/a" if math.isnan(precision[b]) else precision[b],
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
    if new is not None:
        row = _work_list(s, row, model, res, ns, new, focus)
    _k_table(s, row, res, k, "error rate", err_cell, err_rate, "ratio")
    s.widths = {0: 34, 1: 14, 2: 14}
    return [(f"sf_{model.tag}_loo", s.ref(err_row, 1)),  # read by the charts
            (f"sf_{model.tag}_confusion", area(s.title, top, 1, top + C - 1, C))]


def _work_list(s: SheetPlan, top: int, model: ModelData, res: NeighbourVoteResult,
               ns: SheetPlan, new: _Rows, focus: str | float) -> int:
    """New rows ranked by the share of neighbours in the focus class (highest first)."""
    if new.share is None:
        raise ValueError("a work list needs the new rows' shares")
    k = int(res.k_)
    shares = new.share
    n_new = len(shares)
    order = sorted(range(n_new), key=lambda i: (-shares[i], i))
    col = 0
    s.put(top, col, f"work list: new rows by share of neighbours in {label_text(focus)}",
          style="label")
    s.put(top + 1, col, "rank", style="head")
    s.put(top + 1, col + 1, "new row", style="head")
    s.put(top + 1, col + 2, f"share {label_text(focus)}", style="head")
    s.put(top + 1, col + 3, "prediction", style="head")
    start = FIRST_ROW + res.n_ + 2
    pred_col = 1 + 4 * k
    for rank, i in enumerate(order, start=1):
        r = top + 1 + rank
        src = start + i
        s.put(r, col, rank, style="int")
        s.put(r, col + 1, new.first_ref[i], f"={ns.ref(src, 0, fixed=False)}", "int")
        s.put(r, col + 2, shares[i], f"={ns.ref(src, pred_col + 3, fixed=False)}", "ratio")
        s.put(r, col + 3, new.value[i], f"={ns.ref(src, pred_col, fixed=False)}", "text")
    s.put(top + 2 + n_new, 0, "A ranked list, not a verdict: choose the cut-off from the "
          "cost of a missed case against the cost of a needless follow-up.", style="note")
    return top + 4 + n_new
