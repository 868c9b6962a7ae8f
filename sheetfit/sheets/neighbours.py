"""Sheet plans for neighbour models (k nearest neighbours: mean or vote).

A reviewer can pick any row and check, by hand, its standard units, the distance to
each listed neighbour, and the average (or the vote) of those neighbours' responses.
Every number comes from the fitted result (and its prediction for the new rows); the
numeric core computes them the way the formulas do (correctly rounded sums, products
for squares), so each cached value is what its formula gives.
Formula cost grows as n·k: no formula scans all rows for one row; the setting ``trail``
bounds how many data rows the neighbours sheet shows (``_nb_trail``). The row-by-row
sheets are column runs (``_nb_rows``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..a1 import absolute, area, col_letter, quote_sheet
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
from ._nb_rows import (
    Block,
    RowCells,
    fitted_sheet,
    mean_blocks,
    neighbour_block,
    std_sheet,
    vote_blocks,
)
from ._nb_trail import TRAIL_ALL_UP_TO, Trail, trail_of
from .common import (
    FIRST_ROW,
    check_cell,
    check_words,
    column_notes,
    consecutive_rows,
    key_heads,
    key_runs,
    key_styles,
    key_width,
    plan_methods,
    plan_residual_sheet,
    put_keys,
)
from .plan import Planned, SheetPlan, decimal_style

__all__ = ["TIE_RULE", "plan_neighbour_mean", "plan_neighbour_vote"]

#: The tie rules, in the words the sheets and the README use.
TIE_RULE = (
    f"Ties: distances that agree to {TIE_DIGITS} significant digits count as equal, and "
    "among equal distances the lower data row comes first; a row is never its own neighbour "
    "(leave-one-out). In a vote, among classes with equally many neighbours the class of "
    "the nearest of them wins."
)

_Result = NeighbourMeanResult | NeighbourVoteResult
_Prediction = MeanPrediction | VotePrediction


def plan_neighbour_mean(model: ModelData, fitted: Fitted[NeighbourMeanResult],
                        version: str) -> Planned:
    """Plan the summary, standard-units, neighbours, fitted and residual sheets of a mean."""
    res = fitted.result
    trail = _trail(model, res)
    data, new = mean_blocks(model, res, fitted.new, trail.rows)
    return _plan(model, res, fitted.new, data, new, None, version, fitted.extrapolated,
                 trail)


def plan_neighbour_vote(model: ModelData, fitted: Fitted[NeighbourVoteResult],
                        version: str) -> Planned:
    """Plan the summary, standard-units, neighbours and fitted sheets of a vote."""
    res = fitted.result
    focus = _focus(model, res)
    trail = _trail(model, res)
    data, new = vote_blocks(model, res, fitted.new, focus, trail.rows)
    return _plan(model, res, fitted.new, data, new, focus, version, fitted.extrapolated,
                 trail)


def _trail(model: ModelData, res: _Result) -> Trail:
    """The data rows the neighbours sheet shows (setting ``trail``)."""
    return trail_of(res.n_, str(model.settings.values.get("trail", "all")))


@dataclass(frozen=True)
class _Layout:
    """Rows of a neighbour model's first sheet: the answer, key figures, status, settings."""

    answer: int  # header row of the answer block
    figures: int  # header row of the key figures
    status: int  # the status line
    settings: int  # header row of the settings (k one row below, focus two)


def _layout(n_new: int, vote: bool) -> _Layout:
    answer = 3
    figures = answer + (n_new + 3 if n_new else 2)
    status = figures + (3 if vote else 4)
    return _Layout(answer, figures, status, status + 2)


def _plan(model: ModelData, res: _Result, prediction: _Prediction | None, data: Block,
          new: Block | None, focus: str | float | None, version: str,
          extrapolated: list[int], trail: Trail) -> Planned:
    """The sheets both neighbour methods share; ``focus`` is None for a mean, a class for a
    vote; ``data`` holds the rows of the ``trail``."""
    vote = focus is not None
    tag, y = model.tag, model.y
    k = int(res.k_)
    o = key_width(model.keys, model.new.keys if model.new is not None else None)
    ss, zcells, z_range = std_sheet(model, res, prediction)
    ns = SheetPlan(sheet_title(tag, "nbrs"))
    summary = SheetPlan(sheet_title(tag, "summary"))
    lay = _layout(model.new.n if model.new is not None and new is not None else 0, vote)
    k_cell = summary.ref(lay.settings + 1, 1)
    focus_cell = summary.ref(lay.settings + 2, 1)  # the focus class, on a vote's summary sheet

    ns.put(0, 0, f"Nearest neighbours — model {tag} (k = {k})", style="title")
    ns.put(1, 0, f"For each row: its {k} most similar rows of sheet '{y.sheet}', their "
           f"distances and {y.name}, then the prediction from them. Ties: see the first sheet."
           + ("" if trail.full else " " + trail.words(ns.title)), style="note")
    nb = 1 + o  # first neighbour-row column
    heads = (["data row"] + key_heads(model.keys, o)
             + [f"neighbour {m + 1} row" for m in range(k)]
             + [f"distance {m + 1}" for m in range(k)] + [f"{y.name} of {m + 1}" for m in range(k)])
    if vote:
        heads += [f"votes {m + 1}" for m in range(k)]
        heads += ["prediction", "votes for it", "score (share)", f"share {label_text(focus)}"]
    else:
        heads += ["prediction (mean)", "smallest", "median", "largest"]
    for c, h in enumerate(heads):
        ns.put(3, c, h, style="head")
    pred_col = nb + (4 if vote else 3) * k
    notes = {nb: "row number on sheet '" + y.sheet + "', nearest first (found by sheetfit)",
             nb + k: "√Σ(z difference)², over the z cells on the standard-units sheet",
             nb + 2 * k: "that row's value, from your cell"}
    if vote:
        notes.update({nb + 3 * k: "how many of the k share this neighbour's class",
                      pred_col: "the class with the most votes",
                      pred_col + 2: "votes ÷ k",
                      pred_col + 3: f"neighbours in {label_text(focus)} ÷ k"})
    else:
        notes.update({pred_col: f"AVERAGE of the {k} values to the left",
                      pred_col + 1: "MIN, MEDIAN, MAX of the same values"})
    ystyle = "class" if vote else decimal_style(res.y_.tolist(), fmt=model.y.fmt)
    derived = "class" if vote else decimal_style(res.y_.tolist(), least=2, fmt=model.y.fmt)
    ctx = RowCells(model, np.asarray(res.y_), zcells, k, k_cell, focus_cell, vote, o, ystyle,
                   derived)
    neighbour_block(ns, FIRST_ROW, data, ctx)  # the trail's rows only
    key_runs(ns, FIRST_ROW, 1, model.keys, np.asarray(model.used, dtype=np.int64)[trail.rows],
             key_styles(model.keys))
    names: list[tuple[str, str]] = []
    new_start = FIRST_ROW + len(trail.rows) + 2
    if new is not None and model.new is not None:
        ns.put(new_start - 1, 0, "new row", style="head")
        for c, h in enumerate(key_heads(model.new.keys, o) + heads[1 + o:], start=1):
            ns.put(new_start - 1, c, h, style="head")
        neighbour_block(ns, new_start, new, ctx)
        key_runs(ns, new_start, 1, model.new.keys, np.arange(model.new.n),
                 key_styles(model.new.keys))
        names.append((f"sf_{tag}_pred",
                       ns.col_range(pred_col, new_start, new_start + model.new.n - 1)))
    ns.widths = {0: 9}
    column_notes(ns, notes)
    ns.freeze = (FIRST_ROW, 1 + o)

    fs, fit_col = fitted_sheet(model, res, trail, ns, pred_col, vote, o, ystyle, derived)
    fit_rng = fs.col_range(fit_col, FIRST_ROW, FIRST_ROW + res.n_ - 1)
    sheets = [summary, ss, ns, fs]
    at = _At(ns, new_start, pred_col, new, extrapolated, lay, o, derived, trail)
    if isinstance(res, NeighbourVoteResult) and focus is not None:
        names = [(f"sf_{tag}_fitted", fit_rng)] + names
        names += _vote_summary(summary, model, res, fs, at, focus, version, k)
    elif isinstance(res, NeighbourMeanResult):
        rs = plan_residual_sheet(
            model, (f"{quote_sheet(fs.title)}!{col_letter(fit_col + 1)}",
                    consecutive_rows(res.n_, FIRST_ROW + 1)),
            res.fitted_, res.resid_,
            "residual = observed − fitted (the leave-one-out mean of the row's neighbours).",
            keys=model.keys)
        rc = 3 + key_width(model.keys)
        sheets.append(rs)
        names = [(f"sf_{tag}_fitted", fit_rng),
                 (f"sf_{tag}_resid", rs.col_range(rc, FIRST_ROW, FIRST_ROW + res.n_ - 1))
                 ] + names
        names += _mean_summary(summary, model, res, fs, rs, rc, at, version, k)
    else:
        raise TypeError(f"a neighbour plan for {type(res).__name__} with focus {focus!r}")
    names.append((f"sf_{tag}_z", z_range))  # read by the charts: the used rows' standard units
    return Planned(sheets, names)


@dataclass
class _At:
    """Where the new rows' predictions are, for the answer block of the first sheet."""

    ns: SheetPlan
    start: int  # first new row on the neighbours sheet
    pred_col: int
    new: Block | None
    extrapolated: list[int]
    lay: _Layout
    o: int
    derived: str
    trail: Trail


def _focus(model: ModelData, res: NeighbourVoteResult) -> str | float:
    """The class the work list ranks by: as given (checked on reading), else the rarest."""
    classes = res.classes_.tolist()
    given = model.settings["focus"]
    if given is not None:
        return next(c for c in classes if labels_equal(c, given))
    return classes[int(np.argmin(res.base_rate_))]


def _head_row(s: SheetPlan, row: int, heads: list[str]) -> None:
    for c, h in enumerate(heads):
        s.put(row, c, h, style="head")


def _flag(i: int, at: _At) -> str:
    return "outside the data's range: extrapolated" if i in at.extrapolated else ""


def _mean_answer(s: SheetPlan, model: ModelData, at: _At) -> None:
    """The first lines: each new row's prediction with its neighbours' spread and its flag."""
    y, row = model.y, at.lay.answer
    if at.new is None or model.new is None:
        s.put(row, 0, f"No new rows are declared (name sf_{model.tag}_new): the sheets below "
              "show how well the method predicts the data rows.", style="note")
        return
    heads = (["new row"] + key_heads(model.new.keys, at.o)
             + [f"predicted {y.name}", "smallest of the k", "median", "largest", "flag"])
    _head_row(s, row, heads)
    p = 1 + at.o
    column_notes(s, {p: "the average of the k neighbours' values",
                     p + 1: "the spread of those values: read the estimate with it"}, row - 1)
    nst = key_styles(model.new.keys)
    answer = at.derived.replace("dec", "answer")
    first, value = at.new.sheet_rows.tolist(), np.asarray(at.new.value).tolist()
    nan = [math.nan] * model.new.n
    los, meds, his = (a.tolist() for a in at.new.spread) if at.new.spread else (nan,) * 3
    for i in range(model.new.n):
        r, src = row + 1 + i, at.start + i
        s.put(r, 0, first[i], f"={at.ns.ref(src, 0, fixed=False)}", "row")
        put_keys(s, r, 1, model.new.keys, i, nst)
        lo, med, hi = los[i], meds[i], his[i]
        s.put(r, p, value[i], f"={at.ns.ref(src, at.pred_col, fixed=False)}", answer)
        for m, v in enumerate((lo, med, hi), start=1):
            s.put(r, p + m, v, f"={at.ns.ref(src, at.pred_col + m, fixed=False)}", at.derived)
        s.put(r, p + 4, _flag(i, at), style="flag")
    s.put(row + 1 + model.new.n, 0, "Each estimate comes from similar past rows; the "
          "neighbours sheet lists them row by row.", style="note")


def _figures(s: SheetPlan, row: int, lines: list[tuple[str, Any, str, str, str]]) -> None:
    _head_row(s, row, ["key figure", "value", "what it is"])
    for i, (label, value, formula, style, what) in enumerate(lines):
        s.put(row + 1 + i, 0, label, style="label")
        s.put(row + 1 + i, 1, value, formula, style)
        s.put(row + 1 + i, 2, what, style="note")


def _settings_block(s: SheetPlan, model: ModelData, res: _Result, version: str, k: int,
                    vote: bool, lay: _Layout) -> int:
    """Title, note, status cell and the stated settings (k one row under their header)."""
    what = "most common class" if vote else "average"
    xs = ", ".join(model.attribute_names)
    s.put(0, 0, f"Neighbour {'vote' if vote else 'mean'} — model {model.tag}: "
          f"{model.y.name} from {xs}", style="title")
    s.put(1, 0, f"Each prediction is the {what} of {model.y.name} over the {k} most similar "
          f"past rows; computed by sheetfit {version}. The answer first, the detail below.",
          style="note")
    s.status_cell = (lay.status, 0)
    row = lay.settings
    _head_row(s, row, ["setting", "value", "how it was set"])
    s.put(row + 1, 0, "k (neighbours)", style="label")
    s.put(row + 1, 1, k, style="int")
    s.put(row + 1, 2, "given in the settings" if res.k_given_
          else "chosen: smallest leave-one-out error in the k table below", style="note")
    s.put(row + 2, 0, "focus class" if vote else "standard units", style="label")
    return row + 4


def _trail_setting(s: SheetPlan, row: int, trail: Trail) -> None:
    """The settings line of the audit trail: its extent and what it shows."""
    s.put(row, 0, "audit trail", style="label")
    s.put(row, 1, trail.extent)
    if trail.full:
        how = (f"every data row (auto: every row up to {TRAIL_ALL_UP_TO:,})"
               if trail.extent == "auto" else "every data row")
    elif trail.seed is None:
        how = "the new rows only; the data rows' fitted values are sheetfit's, as values"
    else:
        how = (f"an audit sample of {len(trail.rows):,} of {trail.n:,} data rows, seed "
               f"{trail.seed} (see the neighbours sheet)")
    s.put(row, 2, how, style="note")


def _k_table(s: SheetPlan, row: int, res: _Result, k: int, label: str, err_cell: str,
             err_value: float, k_ref: str, style: str = "num") -> int:
    _head_row(s, row, ["k", f"leave-one-out {label}", ""])
    first = row + 1
    for i, (kk, err) in enumerate(res.k_table_):
        s.put(first + i, 0, int(kk), style="row")
        s.put(first + i, 1, float(err), style=style)
        if int(kk) == k:
            s.put(first + i, 2, "◀ used", style="label")
    last = first + len(res.k_table_) - 1
    r = last + 1
    if k <= len(res.k_table_):
        s.put(r, 0, "check: the table at k equals the figure above", style="label")
        diff = float(res.k_table_[k - 1][1]) - err_value
        s.put(r, 1, diff, f"=INDEX(B{first + 1}:B{last + 1},{k_ref})-{err_cell}", "check")
        formula, verdict = check_cell(absolute(r, 1), diff, 1e-9, err_cell, err_value)
        s.put(r, 2, verdict, formula, "verdict")
        s.put(r, 3, check_words(1e-9, "|difference| / max(1, figure)"), style="note")
    else:
        s.put(r, 0, f"k = {k} is beyond the table (it stops at {len(res.k_table_)})", style="note")
    return r + 2


def _methods(s: SheetPlan, row: int, res: _Result, vote: bool) -> None:
    on = bool(res.scaling_.on)
    plan_methods(s, row, [
        ("Distances: Euclidean, " + ("in standard units z = (x − mean) / SD with the mean and "
         "population SD (root mean square of deviations) of the rows used; new rows use the "
         "same mean and SD." if on else "on the attribute values as they are (standard "
         "units off).")),
        TIE_RULE,
        ("k: " + ("as given in the settings." if res.k_given_ else "the k with the smallest "
         "leave-one-out error " + ("rate" if vote else "RMSE") + " for k = 1 … "
         f"{len(res.k_table_)} (ties: the smaller k).")),
        ("The neighbour rows are chosen by sheetfit; every distance, value and prediction on "
        "these sheets is a native formula you can recalculate."),
    ])


def _mean_summary(s: SheetPlan, model: ModelData, res: NeighbourMeanResult, fs: SheetPlan,
                  rs: SheetPlan, rc: int, at: _At, version: str,
                  k: int) -> list[tuple[str, str]]:
    lay = at.lay
    row = _settings_block(s, model, res, version, k, False, lay)
    on = bool(res.scaling_.on)
    s.put(lay.settings + 2, 1, "yes" if on else "no")
    s.put(lay.settings + 2, 2, "distances in standard units" if on else "distances in the "
          "attributes' own units", style="note")
    _trail_setting(s, lay.settings + 3, at.trail)
    row += 1
    _mean_answer(s, model, at)
    n = res.n_
    last = FIRST_ROW + n - 1
    r_rng = rs.col_range(rc, FIRST_ROW, last)
    y_rng = fs.col_range(1 + at.o, FIRST_ROW, last)
    f = lay.figures
    rmse, sdy = res.rmse_, res.y_sd_
    _figures(s, f, [
        ("rows used (n)", n, f"=COUNT({r_rng})", "int", "data rows with a prediction"),
        ("RMSE", rmse, f"=SQRT(SUMSQ({r_rng})/B{f + 2})", at.derived,
         "typical error of a prediction: root mean squared leave-one-out residual"),
        ("SD of y", sdy, f"=STDEV.P({y_rng})", at.derived,
         "the same for predicting every row by the mean of y: the RMSE should be smaller"),
    ])
    rmse_cell = absolute(f + 2, 1)
    row = _k_table(s, row, res, k, "RMSE", rmse_cell, rmse, absolute(lay.settings + 1, 1),
                   at.derived)
    _methods(s, row, res, False)
    s.widths = {0: 34, 1: 18, 2: 16}
    return [(f"sf_{model.tag}_loo", s.ref(f + 2, 1))]  # read by the charts


def _vote_summary(s: SheetPlan, model: ModelData, res: NeighbourVoteResult, fs: SheetPlan,
                  at: _At, focus: str | float, version: str,
                  k: int) -> list[tuple[str, str]]:
    lay = at.lay
    row = _settings_block(s, model, res, version, k, True, lay)
    st = lay.settings
    s.put(st + 2, 1, focus if isinstance(focus, (str, float)) else str(focus), style="text")
    s.put(st + 2, 2, "given in the settings" if model.settings["focus"] is not None
          else "the rarest class (setting focus changes it)", style="note")
    s.put(st + 3, 0, "standard units", style="label")
    s.put(st + 3, 1, "yes" if res.scaling_.on else "no")
    _trail_setting(s, st + 4, at.trail)
    row += 2
    n = res.n_
    last = FIRST_ROW + n - 1
    ob = 1 + at.o
    obs = fs.col_range(ob, FIRST_ROW, last)
    pred = fs.col_range(ob + 1, FIRST_ROW, last)
    right = fs.col_range(ob + 2, FIRST_ROW, last)
    n_right = int(np.count_nonzero(res.correct_))
    f = lay.figures
    err_rate = 1 - n_right / n  # as the formula has it; error_rate_ divides the wrong ones
    _figures(s, f, [
        ("rows used (n)", n, f"=COUNTA({obs})", "int", "data rows with a prediction"),
        ("error rate", err_rate, f"=1-SUM({right})/B{f + 2}", "pct",
         "share of data rows whose leave-one-out prediction is wrong"),
    ])
    err_cell = absolute(f + 2, 1)
    err_row = f + 2
    n_cell = absolute(f + 1, 1)
    if at.new is not None:
        _work_list(s, lay.answer, model, res, at, focus)
    else:
        s.put(lay.answer, 0, f"No new rows are declared (name sf_{model.tag}_new): the sheets "
              "below show how well the method predicts the data rows.", style="note")
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
        s.put(r, 2 + C, base_rate[a], f"=SUMPRODUCT(--EXACT({obs},${cls_col}{r + 1}))/{n_cell}",
              "pct")
        diag = f"{col_letter(2 + a)}{r + 1}"
        s.put(r, 3 + C, "n/a" if math.isnan(recall[a]) else recall[a],
              f'=IF({col_letter(2 + C)}{r + 1}=0,"n/a",{diag}/{col_letter(2 + C)}{r + 1})',
              "pct")
    prow = top + C
    s.put(prow, 0, "rows (predicted)", style="label")
    s.put(prow + 1, 0, "precision", style="label")
    for b in range(C):
        L = col_letter(2 + b)
        csum = int(counts[:, b].sum())
        s.put(prow, 1 + b, csum, f"=SUM({L}{top + 1}:{L}{top + C})", "int")
        s.put(prow + 1, 1 + b, "n/a" if math.isnan(precision[b]) else precision[b],
              f'=IF({L}{prow + 1}=0,"n/a",{L}{top + 1 + b}/{L}{prow + 1})', "pct")
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
              f'&" in all."', "note")
    row = row + 2 + C
    row = _k_table(s, row, res, k, "error rate", err_cell, err_rate, absolute(st + 1, 1), "pct")
    _methods(s, row, res, True)
    s.widths = {0: 34, 1: 14, 2: 14}
    return [(f"sf_{model.tag}_loo", s.ref(err_row, 1)),  # read by the charts
            (f"sf_{model.tag}_confusion", area(s.title, top, 1, top + C - 1, C))]


def _work_list(s: SheetPlan, top: int, model: ModelData, res: NeighbourVoteResult,
               at: _At, focus: str | float) -> None:
    """The answer: new rows ranked by the share of neighbours in the focus class."""
    new, ns = at.new, at.ns
    if new is None or new.share is None or model.new is None:
        raise ValueError("a work list needs the new rows' shares")
    k = int(res.k_)
    shares = new.share.tolist()
    first, value = new.sheet_rows.tolist(), np.asarray(new.value).tolist()
    votes = None if new.votes is None else new.votes.tolist()
    n_new = len(shares)
    order = sorted(range(n_new), key=lambda i: (-shares[i], i))
    o = at.o
    heads = (["rank", "new row"] + key_heads(model.new.keys, o)
             + [f"share {label_text(focus)}", "prediction", "votes for it", "flag"])
    _head_row(s, top, heads)
    p = 2 + o
    column_notes(s, {p: f"share of the {k} neighbours in {label_text(focus)}",
                     p + 1: "the most common class among them"}, top - 1)
    pred_col = at.pred_col
    nst = key_styles(model.new.keys)
    for rank, i in enumerate(order, start=1):
        r = top + rank
        src = at.start + i
        s.put(r, 0, rank, style="row")
        s.put(r, 1, first[i], f"={ns.ref(src, 0, fixed=False)}", "row")
        put_keys(s, r, 2, model.new.keys, i, nst)
        s.put(r, p, shares[i], f"={ns.ref(src, pred_col + 3, fixed=False)}", "pct")
        s.put(r, p + 1, value[i], f"={ns.ref(src, pred_col, fixed=False)}", "class")
        if votes is not None:
            s.put(r, p + 2, votes[i], f"={ns.ref(src, pred_col + 1, fixed=False)}", "int")
        s.put(r, p + 3, _flag(i, at), style="flag")
    s.put(top + 1 + n_new, 0, "A ranked work list, not a verdict: choose the cut-off from "
          "the cost of a missed case against the cost of a needless follow-up.", style="note")
