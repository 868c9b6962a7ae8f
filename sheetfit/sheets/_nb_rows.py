"""The row-by-row sheets of a neighbour model, as column runs: standard units, the
neighbours sheet (the audit trail: k neighbour rows, distances and values per row, then
the mean or the vote) and the fitted values.

Every cached value is the result's own number (the numeric core computes them the way
the formulas do); the formulas are templates over the result's arrays, one run per
column, so no per-cell object is built.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..a1 import absolute, col_letter, quote_sheet
from ..declare.model import ModelData
from ..fit._classes import class_index, position_votes
from ..fit.neighbours import (
    MeanPrediction,
    NeighbourMeanResult,
    NeighbourVoteResult,
    VotePrediction,
)
from ..owned import sheet_title
from ..vectors import Lazy
from ._nb_trail import Trail
from .columns import Part, template, this_row
from .common import (
    FIRST_ROW,
    column_notes,
    key_heads,
    key_runs,
    key_styles,
    key_width,
    plan_left_out,
    ref_parts,
    sheet_rows,
)
from .plan import SheetPlan, decimal_style

__all__ = ["STD_FIRST", "Block", "RowCells", "ZCells", "fitted_sheet", "mean_blocks",
           "neighbour_block", "std_sheet", "vote_blocks"]

STD_FIRST = 6  # first data row (0-based) on the standard-units sheet

_Result = NeighbourMeanResult | NeighbourVoteResult
_Prediction = MeanPrediction | VotePrediction


def _letter(col: int) -> str:
    """Column letter of a 0-based column."""
    return col_letter(col + 1)


def _vals(a: np.ndarray) -> np.ndarray | list[Any]:
    """Cached values of a run: floats stay an array; whole numbers and labels become a
    list (the bulk writer caches a formula's whole number as written, 7 not 7.0, only
    from Python ints)."""
    a = np.asarray(a)
    return a if a.dtype.kind == "f" else a.tolist()


@dataclass(frozen=True)
class ZCells:
    """Where the standard units are: the z columns of the data rows and of the new rows
    on the standard-units sheet, whose first row is :data:`STD_FIRST` in both blocks."""

    prefix: str  # the quoted sheet title and '!'
    data: tuple[str, str]  # first and last z column letters of the data rows
    new: tuple[str, str] | None

    def parts(self, new: bool, rows: np.ndarray) -> tuple[Part, ...]:
        """Template parts of the z row (``'sf m std'!$F$7:$G$7``) of each row position."""
        cols = self.new if new else self.data
        if cols is None:
            raise ValueError("no standard units of new rows on this sheet")
        r = np.asarray(rows, dtype=np.int64) + STD_FIRST + 1
        return (f"{self.prefix}${cols[0]}$", r, f":${cols[1]}$", r)


def std_sheet(model: ModelData, res: _Result, new: _Prediction | None
              ) -> tuple[SheetPlan, ZCells, str]:
    """Standard-units sheet; returns it, where its z cells are, and the data rows' z range."""
    tag = model.tag
    ss = SheetPlan(sheet_title(tag, "std"))
    m = len(model.xs)
    n = res.n_
    on = bool(res.scaling_.on)
    o = key_width(model.keys)
    ss.put(0, 0, f"Standard units — model {tag}", style="title")
    ss.put(1, 0, "Each attribute measured in standard deviations from its mean, so that no "
           "attribute outweighs another in the distances." if on else "Standard units are "
           "off (setting standard_units = no): distances use the attribute values as they are.",
           style="note")
    last = STD_FIRST + n - 1
    ss.put(3, 0, "mean", style="label")
    ss.put(4, 0, "SD (population)", style="label")
    ss.put(5, 0, "data row", style="head")
    for j, h in enumerate(key_heads(model.keys)):
        ss.put(5, 1 + j, h, style="head")
    xc = 1 + o  # first attribute column
    zc = xc + m  # first z column
    mean, sd = res.X_mean_.tolist(), res.X_sd_.tolist()
    xstyle = [decimal_style(model.X[:, j].tolist(), fmt=model.xs[j].fmt) for j in range(m)]
    for j, c in enumerate(model.xs):
        xcol = xc + j
        rng = f"{_letter(xcol)}{STD_FIRST + 1}:{_letter(xcol)}{last + 1}"
        ss.put(3, xcol, mean[j], f"=AVERAGE({rng})", "num")
        ss.put(4, xcol, sd[j], f"=STDEV.P({rng})", "num")
        ss.put(5, xcol, c.name, style="head")
        ss.put(5, zc + j, f"z {c.name}" if on else f"{c.name} (as is)", style="head")
    notes = {xc: "your data cell; mean and SD of the column above"}
    if on:
        notes[zc] = "(value − mean) / SD, with the mean and SD of its column"
    column_notes(ss, notes)
    used = np.asarray(model.used, dtype=np.int64)
    ss.run(0, STD_FIRST, sheet_rows(used, model.y.first_row), style="row")
    key_runs(ss, STD_FIRST, 1, model.keys, used, key_styles(model.keys))
    for j, c in enumerate(model.xs):
        cell = ref_parts(c, used)
        ss.run(xc + j, STD_FIRST, np.asarray(res.X_[:, j], dtype=float),
               template("=", *cell), xstyle[j])
        ss.run(zc + j, STD_FIRST, np.asarray(res.Z_[:, j], dtype=float),
               _z_template(cell, xc + j, on), "z")
    z_new: tuple[str, str] | None = None
    if model.new is not None and new is not None:
        nk = model.new.keys
        side = zc + m + 1
        ss.put(5, side, "new row", style="head")
        for j, h in enumerate(key_heads(nk)):
            ss.put(5, side + 1 + j, h, style="head")
        nx = side + 1 + key_width(nk)
        for j in range(m):
            ss.put(5, nx + j, model.xs[j].name, style="head")
            ss.put(5, nx + m + j, f"z {model.xs[j].name}" if on else model.xs[j].name,
                   style="head")
        rows = np.arange(model.new.n, dtype=np.int64)
        ss.run(side, STD_FIRST, rows + model.new.columns[0].first_row, style="row")
        key_runs(ss, STD_FIRST, side + 1, nk, rows, key_styles(nk))
        for j, c in enumerate(model.new.columns):
            cell = ref_parts(c, rows)
            ss.run(nx + j, STD_FIRST, np.asarray(model.new.X[:, j], dtype=float),
                   template("=", *cell), xstyle[j])
            ss.run(nx + m + j, STD_FIRST, np.asarray(new.Z[:, j], dtype=float),
                   _z_template(cell, xc + j, on), "z")
        z_new = (_letter(nx + m), _letter(nx + 2 * m - 1))
    ss.widths = {0: 16}
    ss.freeze = (STD_FIRST, 1 + o)
    zcells = ZCells(f"{quote_sheet(ss.title)}!", (_letter(zc), _letter(zc + m - 1)), z_new)
    z_range = ss.ref(STD_FIRST, zc) + ":" + absolute(last, zc + m - 1)
    return ss, zcells, z_range


def _z_template(cell: Sequence[Part], stat_col: int, on: bool) -> Any:
    """z of the data cells, from the mean (row 4) and SD (row 5) cells of their attribute."""
    if not on:
        return template("=", *cell)
    letter = _letter(stat_col)
    return template("=(", *cell, f"-{letter}$4)/{letter}$5")


@dataclass(frozen=True)
class Block:
    """The rows of one block of the neighbours sheet (data rows or new rows), as arrays."""

    sheet_rows: np.ndarray  # each row's sheet row on its own sheet (data or new rows)
    z_rows: np.ndarray  # each row's position in its block of the standard-units sheet
    new: bool
    neighbours: np.ndarray  # r × k positions among the rows used, nearest first
    distances: np.ndarray
    value: np.ndarray  # the prediction (mean or class)
    spread: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None  # smallest, median, largest
    position_votes: np.ndarray | None = None  # vote: votes for each neighbour's class
    votes: np.ndarray | None = None  # vote: votes for the winning class
    score: np.ndarray | None = None  # vote: votes / k
    share: np.ndarray | None = None  # vote: share of the k in the focus class



def _data_rows(model: ModelData) -> np.ndarray:
    return np.asarray(model.used, dtype=np.int64) + model.y.first_row


def _new_rows(model: ModelData) -> np.ndarray:
    if model.new is None:
        raise ValueError("no new rows declared")
    return np.arange(model.new.n, dtype=np.int64) + model.new.columns[0].first_row


def mean_blocks(model: ModelData, res: NeighbourMeanResult, new: MeanPrediction | None,
                rows: np.ndarray) -> tuple[Block, Block | None]:
    """The data rows at positions ``rows`` (the audit trail's) and the new rows of a mean;
    the neighbours' spread is worked out for those rows only (row by row, as the result's
    ``nb_min_``, ``nb_median_`` and ``nb_max_`` would give them)."""
    J = res.neighbours_[rows]
    nb_y = res.y_[J]
    data = Block(_data_rows(model)[rows], rows, False, J, res.distances_[rows],
                 res.fitted_[rows],
                 spread=(nb_y.min(axis=1), np.median(nb_y, axis=1), nb_y.max(axis=1)))
    del nb_y
    if new is None or model.new is None:
        return data, None
    return data, Block(_new_rows(model), np.arange(model.new.n), True, new.neighbours,
                       new.distances, new.value,
                       spread=(new.nb_min, new.nb_median, new.nb_max))


def vote_blocks(model: ModelData, res: NeighbourVoteResult, new: VotePrediction | None,
                focus: str | float, rows: np.ndarray) -> tuple[Block, Block | None]:
    """The data rows at positions ``rows`` (the audit trail's) and the new rows of a vote;
    votes, scores and shares worked out for those rows only, row by row as the result's
    own (``position_votes_``, ``score_``, ``share``) give them."""
    J = res.neighbours_[rows]
    codes = res.y_code_[J]
    c = class_index(list(res.classes_), focus)
    votes = res.votes_[rows]
    data = Block(_data_rows(model)[rows], rows, False, J, res.distances_[rows],
                 res.fitted_[rows], position_votes=position_votes(codes, len(res.classes_)),
                 votes=votes, score=votes / res.k_, share=np.mean(codes == c, axis=1))
    if new is None or model.new is None:
        return data, None
    return data, Block(_new_rows(model), np.arange(model.new.n), True, new.neighbours,
                       new.distances, new.value, position_votes=new.position_votes,
                       votes=new.votes, score=new.score, share=new.share(focus))


@dataclass(frozen=True)
class RowCells:
    """What every row of the neighbours sheet refers to."""

    model: ModelData
    y: np.ndarray  # the training responses (numbers or class labels)
    z: ZCells
    k: int
    k_cell: str
    focus_cell: str
    vote: bool
    o: int  # identifier columns between the row number and the neighbours
    ystyle: str  # the responses' style
    derived: str  # the predictions' style


def neighbour_block(ns: SheetPlan, r0: int, b: Block, c: RowCells) -> None:
    """The rows of block ``b`` on the neighbours sheet from sheet row ``r0`` (0-based):
    one run per column (identifiers are the caller's)."""
    if not len(b.sheet_rows):
        return
    model, k = c.model, c.k
    yc = model.y
    used = np.asarray(model.used, dtype=np.int64)
    nb = 1 + c.o
    ns.run(0, r0, b.sheet_rows, style="row")
    own = c.z.parts(b.new, b.z_rows)
    for m in range(k):
        j = np.asarray(b.neighbours[:, m], dtype=np.int64)
        ns.run(nb + m, r0, used[j] + yc.first_row, style="row")
        ns.run(nb + k + m, r0, np.asarray(b.distances[:, m], dtype=float),
               template("=SQRT(SUMXMY2(", *own, ",", *c.z.parts(False, j), "))"), "dist")
        ns.run(nb + 2 * k + m, r0, _vals(c.y[j]), template("=", *ref_parts(yc, used[j])),
               c.ystyle)
    r = this_row
    A, B = _letter(nb + 2 * k), _letter(nb + 3 * k - 1)
    block: tuple[Part, ...] = (A, r, ":" + B, r)
    if not c.vote:
        if b.spread is None:
            raise ValueError("a mean block needs its neighbours' spread")
        col = nb + 3 * k
        ns.run(col, r0, np.asarray(b.value, dtype=float),
               template("=AVERAGE(", *block, ")"), c.derived)
        for d, (fn, a, style) in enumerate(zip(("MIN", "MEDIAN", "MAX"), b.spread,
                                              (c.ystyle, c.derived, c.ystyle), strict=True)):
            ns.run(col + 1 + d, r0, np.asarray(a, dtype=float),
                   template(f"={fn}(", *block, ")"), style)
        return
    if b.position_votes is None or b.votes is None or b.score is None or b.share is None:
        raise ValueError("a vote block needs its votes, scores and shares")
    for m in range(k):
        ns.run(nb + 3 * k + m, r0, _vals(b.position_votes[:, m]),
               template("=SUMPRODUCT(--EXACT(", *block, ",", _letter(nb + 2 * k + m), r, "))"),
               "int")
    vb: tuple[Part, ...] = (_letter(nb + 3 * k), r, ":" + _letter(nb + 4 * k - 1), r)
    col = nb + 4 * k
    ns.run(col, r0, _vals(b.value),
           template("=INDEX(", *block, ",MATCH(MAX(", *vb, "),", *vb, ",0))"), "class")
    ns.run(col + 1, r0, _vals(b.votes), template("=MAX(", *vb, ")"), "int")
    ns.run(col + 2, r0, np.asarray(b.score, dtype=float),
           template("=MAX(", *vb, f")/{c.k_cell}"), "pct")
    ns.run(col + 3, r0, np.asarray(b.share, dtype=float),
           template("=SUMPRODUCT(--EXACT(", *block, f",{c.focus_cell}))/{c.k_cell}"), "pct")


def _segments(inside: np.ndarray) -> list[tuple[int, int, bool]]:
    """Maximal stretches [a, b) of equal flags: (a, b, flag)."""
    n = len(inside)
    if n == 0:
        return []
    cuts = np.flatnonzero(inside[1:] != inside[:-1]) + 1
    starts = [0, *cuts.tolist()]
    ends = [*cuts.tolist(), n]
    flags = inside[starts].tolist()
    return list(zip(starts, ends, flags, strict=True))


def fitted_sheet(model: ModelData, res: _Result, trail: Trail, ns: SheetPlan, pred_col: int,
                 vote: bool, o: int, ystyle: str, derived: str) -> tuple[SheetPlan, int]:
    """The fitted-value sheet; returns it and its fitted-value column. A row in the trail
    takes its fitted value from the neighbours sheet; any other row holds sheetfit's
    computed value as a value."""
    y = model.y
    fs = SheetPlan(sheet_title(model.tag, "fitted"))
    fs.put(0, 0, f"Fitted values — model {model.tag}", style="title")
    note = ("Each row predicted from its neighbours, never from itself (leave-one-out), so "
            "the errors here are honest estimates for new rows.")
    if not trail.full:
        note += (" Rows not in the audit trail show sheetfit's computed value (a value, not "
                 "a formula); " + trail.words(ns.title))
    fs.put(1, 0, note, style="note")
    ob = 1 + o
    heads = (["data row"] + key_heads(model.keys, o)
             + [f"{y.name} (observed)", f"predicted {y.name}" if vote else f"fitted {y.name}"])
    if vote:
        heads.append("right (1) / wrong (0)")
    if not trail.full:
        heads.append(f"row on sheet '{ns.title}'")
    for c, h in enumerate(heads):
        fs.put(3, c, h, style="head")
    used = np.asarray(model.used, dtype=np.int64)
    n = len(used)
    fs.run(0, FIRST_ROW, sheet_rows(used, y.first_row), style="row")
    key_runs(fs, FIRST_ROW, 1, model.keys, used, key_styles(model.keys))
    fs.run(ob, FIRST_ROW, _vals(res.y_), template("=", *ref_parts(y, used)), ystyle)
    fitted = _vals(res.fitted_)
    at = np.full(n, -1, dtype=np.int64)  # each data row's sheet row (1-based) on the trail
    at[trail.rows] = np.arange(len(trail.rows)) + FIRST_ROW + 1
    ref = f"{quote_sheet(ns.title)}!{_letter(pred_col)}"
    mark = ob + (3 if vote else 2)
    for a, b, inside in _segments(at > 0):
        if inside:
            fs.run(ob + 1, FIRST_ROW + a, fitted[a:b], template("=" + ref, at[a:b]), derived)
        else:
            fs.run(ob + 1, FIRST_ROW + a, fitted[a:b], style=derived)
    if not trail.full:  # one run, blank (nothing written) where the row is not in the trail
        fs.run(mark, FIRST_ROW, Lazy(n, lambda a, b: [int(v) if v > 0 else None
                                                       for v in at[a:b].tolist()], None))
    if isinstance(res, NeighbourVoteResult):
        B, C = _letter(ob), _letter(ob + 1)
        fs.run(ob + 2, FIRST_ROW, np.asarray(res.correct_, dtype=np.int64).tolist(),
               template(f"=IF(EXACT({B}", this_row, f",{C}", this_row, "),1,0)"), "int")
    plan_left_out(fs, model, len(heads) + 1)
    fs.widths.update({0: 9, ob: 16, ob + 1: 16})
    notes = {ob: "your data cell",
             ob + 1: f"from sheet '{ns.title}', same row" if trail.full else
             f"from sheet '{ns.title}' for a row in the audit trail, else sheetfit's value"}
    if vote:
        notes[ob + 2] = "1 when the two agree exactly (EXACT)"
    if not trail.full:
        notes[mark] = "where the row is checked step by step; blank: not in the trail"
    column_notes(fs, notes)
    fs.freeze = (FIRST_ROW, 1 + o)
    return fs, ob + 1
