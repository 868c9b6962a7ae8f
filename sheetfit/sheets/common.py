"""Pieces every model's sheets share: identifiers, checks, notes, cautions, the left-out
list and the residual sheet.

Helpers for planners (the least-squares planner included):

- ``put_keys`` / ``key_heads`` / ``key_width``: the identifier columns beside a row, as
  formulas pointing at the user's cells;
- ``check_cell``: a pass/fail verdict beside a check value, with its tolerance in words;
- ``column_notes``: the one-line plain-words note above each column header;
- ``plan_cautions`` / ``plan_methods``: the cautions and the "how it was computed"
  sections at the bottom of a sheet.
"""

from __future__ import annotations

import textwrap
import weakref
from collections.abc import Sequence

import numpy as np

from ..a1 import col_letter, quote_sheet
from ..declare.model import Column, Keys, ModelData
from ..fit._sums import exact_dot
from ..owned import sheet_title
from ..vectors import Lazy
from .columns import Part, template, this_row
from .plan import Scalar, SheetPlan, decimal_style

__all__ = [
    "COLNOTE_ROW",
    "FIRST_ROW",
    "GENERAL_CAUTIONS",
    "check_cell",
    "check_words",
    "column_notes",
    "consecutive_rows",
    "fsum_sq",
    "key_formula",
    "key_heads",
    "key_runs",
    "key_styles",
    "key_width",
    "plan_cautions",
    "plan_left_out",
    "plan_methods",
    "plan_residual_sheet",
    "put_keys",
    "ref_parts",
    "sheet_rows",
    "value_parts",
]

#: Row (0-based) of the first data row on row-by-row sheets (fitted, residual, neighbours).
FIRST_ROW = 4
#: Row (0-based) of the one-line notes saying what each column computes (above the header).
COLNOTE_ROW = 2

#: Cautions that hold for every model, whatever its method (common practice in cost
#: and audit work). Each method's own cautions are in its record (sheetfit/methods/).
GENERAL_CAUTIONS = (
    ("Association is not cause: a good fit does not show that the attributes drive the "
    "response."),
    "A relationship holds only while the business it describes stays the same.",
    ("These results support, and do not replace, your organisation's policies and the "
     "professional judgement of the preparer and the reviewer."),
)

#: What a check verdict cell shows.
HOLDS, FAILS = "holds", "FAILS"


def fsum_sq(v: Sequence[float] | np.ndarray | Lazy) -> float:
    """Sum of squares, exactly rounded (what SUMSQ gives up to rounding)."""
    return exact_dot(v, v)  # the same rounded products, summed exactly


# --- identifiers ------------------------------------------------------------------------

def key_width(*keys: Keys | None) -> int:
    """How many identifier columns a sheet needs for these key sets (the widest)."""
    return max((len(k.columns) for k in keys if k is not None), default=0)


def key_heads(keys: Keys | None, width: int | None = None) -> list[str]:
    """Header words of the identifier columns (padded with blanks to ``width``)."""
    heads = [c.name for c in keys.columns] if keys is not None else []
    n = len(heads) if width is None else width
    return (heads + [""] * n)[:n]


def key_formula(cell: str) -> str:
    """An identifier shown as the user's cell holds it; a blank cell shows blank, not 0."""
    return f'=IF(ISBLANK({cell}),"",{cell})'


#: The last sheet-row vector made by ``sheet_rows``: (its rows ``idx``, first row, the
#: vector), all weak, so that columns starting on the same row share one vector.
_last_rows: list[tuple[weakref.ref[np.ndarray], int, weakref.ref[np.ndarray]] | None] = [None]


def consecutive_rows(n: int, start: int) -> Lazy:
    """The row numbers start, start + 1, …, start + n − 1 (int64), made a block at a time."""
    return Lazy(n, lambda a, b: np.arange(start + a, start + b, dtype=np.int64), np.int64)


def sheet_rows(idx: np.ndarray | Sequence[int], first_row: int) -> np.ndarray | Lazy:
    """``idx + first_row`` as int64. Rows ``idx`` that follow one another (no row left out
    between them: the usual case) give a :class:`~sheetfit.vectors.Lazy` made a block at
    a time, nothing held; others the same array again for the same ``idx`` array and
    first row while the earlier one is still in use (one vector for every attribute of
    a million-row model instead of one each). Planners never change ``idx`` in place."""
    if isinstance(idx, np.ndarray) and idx.ndim == 1 and len(idx) and idx.dtype.kind in "iu" \
            and int(idx[-1]) - int(idx[0]) == len(idx) - 1 and bool(np.all(np.diff(idx) == 1)):
        return consecutive_rows(len(idx), int(idx[0]) + first_row)
    memo = _last_rows[0]
    if memo is not None and isinstance(idx, np.ndarray) and memo[0]() is idx \
            and memo[1] == first_row and (rows := memo[2]()) is not None:
        return rows
    rows = np.asarray(idx, dtype=np.int64) + first_row
    rows.setflags(write=False)  # shared by several runs
    if isinstance(idx, np.ndarray):
        _last_rows[0] = (weakref.ref(idx), first_row, weakref.ref(rows))
    return rows


def ref_parts(column: Column, idx: np.ndarray | Sequence[int]) -> tuple[Part, ...]:
    """Template parts (``sheets.columns.template``) of ``column``'s cells in the model's
    rows ``idx``: ``Data!C`` and the sheet rows, i.e. what ``Column.cell(i)`` writes."""
    rows = sheet_rows(idx, column.first_row)
    return (f"{quote_sheet(column.sheet)}!{col_letter(column.col)}", rows)


def value_parts(column: Column, idx: np.ndarray | Sequence[int]) -> tuple[Part, ...]:
    """Template parts of ``Column.value_ref`` in the model's rows ``idx`` (the cell, or the
    indicator ``IF(EXACT(cell,"level"),1,0)`` of a text attribute's level)."""
    cell = ref_parts(column, idx)
    if column.level is None:
        return cell
    text = column.level.replace('"', '""')
    return ("IF(EXACT(", *cell, f',"{text}"),1,0)')


def key_runs(sheet: SheetPlan, row0: int, col: int, keys: Keys | None,
             idx: np.ndarray | Sequence[int], styles: Sequence[str] | None = None) -> None:
    """:func:`put_keys` for the model's rows ``idx`` at once: one run per identifier
    column from ``row0``, each cell a formula pointing at the user's cell."""
    if keys is None:
        return
    for j, c in enumerate(keys.columns):
        vals = keys.values[j]
        cached = ["" if vals[int(i)] is None else vals[int(i)] for i in idx]
        cell = ref_parts(c, idx)
        sheet.run(col + j, row0, cached,
                  template("=IF(ISBLANK(", *cell, '),"",', *cell, ")"),
                  styles[j] if styles is not None else "key")


def put_keys(sheet: SheetPlan, row: int, col: int, keys: Keys | None, i: int,
             styles: Sequence[str] | None = None) -> None:
    """Identifier cells of the model's i-th row (``Column.cell(i)``) from column ``col``.

    Each is a formula pointing at the user's cell, cached with the value read from it
    (blank as empty text, which is what the formula gives). ``styles``: one per column,
    from :func:`key_styles` (computed once per sheet), else shown as they are.
    """
    if keys is None:
        return
    for j, c in enumerate(keys.columns):
        v = keys.values[j][i]
        style = styles[j] if styles is not None else "key"
        sheet.put(row, col + j, "" if v is None else v, key_formula(c.cell(i)), style)


def key_styles(keys: Keys | None) -> list[str]:
    """Identifiers shown in their cells' own number format (a date as a date, an amount
    as money); without one, numbers with decimals get thousands separators, the rest as is."""
    if keys is None:
        return []
    out = []
    for c, col in zip(keys.columns, keys.values, strict=True):
        if c.fmt:
            out.append("user:" + c.fmt)
            continue
        vals = [v for v in col if isinstance(v, float)]
        amounts = bool(vals) and any(v != round(v) for v in vals)
        out.append(decimal_style(vals) if amounts else "key")
    return out


# --- checks -----------------------------------------------------------------------------

def check_words(tolerance: float, what: str = "|difference|") -> str:
    """The stated tolerance of a check, e.g. 'holds: |cos| ≤ 1e-09'."""
    return f"{HOLDS}: {what} ≤ {tolerance:.0e}"


def check_cell(value_ref: str, value: float, tolerance: float,
               scale_ref: str | None = None, scale: float = 1.0) -> tuple[str, str]:
    """Formula and cached verdict of a pass/fail cell beside a check value.

    ``value_ref`` is the cell holding the check value (a difference, a cosine); the check
    holds when ``|value| ≤ tolerance`` (times ``|scale|`` when ``scale_ref`` names a cell
    whose size sets the scale, e.g. the RMSE a difference of RMSEs is measured against).
    Returns (formula, cached value), e.g. ``=IF(ABS(C8)<=1E-09,"holds","FAILS")``.
    """
    tol = f"{tolerance:.0E}"
    if scale_ref is None:
        formula = f'=IF(ABS({value_ref})<={tol},"{HOLDS}","{FAILS}")'
        ok = abs(value) <= float(tol)
    else:
        formula = f'=IF(ABS({value_ref})<={tol}*MAX(1,ABS({scale_ref})),"{HOLDS}","{FAILS}")'
        ok = abs(value) <= float(tol) * max(1.0, abs(scale))
    return formula, HOLDS if ok else FAILS


# --- notes, methods, cautions -----------------------------------------------------------

def column_notes(sheet: SheetPlan, notes: dict[int, str], row: int = COLNOTE_ROW) -> None:
    """A short plain-words note above column headers: what the formula computes, how to
    check it by hand. The row is made tall enough for the longest note to wrap."""
    lines = 1
    for col, text in notes.items():
        sheet.put(row, col, text, style="colnote")
    for col, text in notes.items():
        width = max(sheet.widths.get(col, 8.43), 12.0)
        lines = max(lines, len(textwrap.wrap(text, int(width * 1.15))))
    sheet.heights[row] = max(sheet.heights.get(row, 0), 11.0 * min(lines, 6) + 2)


def plan_methods(sheet: SheetPlan, row: int, lines: Sequence[str], width: int = 110) -> int:
    """The 'how these numbers were computed' section; returns the next free row."""
    sheet.put(row, 0, "How these numbers were computed", style="label")
    r = row + 1
    for text in lines:
        r = sheet.note(r, 0, text, width)
    return r + 1


def plan_cautions(sheet: SheetPlan, row: int, cautions: Sequence[str],
                  heading: str = "Read with care", width: int = 110) -> int:
    """A cautions section from ``row``, each caution a bullet wrapped at ``width``
    characters (a long line would widen the printed page); returns the next free row."""
    sheet.put(row, 0, heading, style="label")
    r = row + 1
    for text in cautions:
        for k, line in enumerate(textwrap.wrap(text, width)):
            sheet.put(r, 0, ("• " if k == 0 else "   ") + line, style="caution")
            r += 1
    return r + 1


# --- shared sheets ----------------------------------------------------------------------

def plan_left_out(sheet: SheetPlan, model: ModelData, col: int) -> None:
    """List the data rows left out of the fit, with the reason (and identifiers), from ``col``."""
    if not model.left_out:
        return
    kw = key_width(model.keys)
    sheet.put(3, col, "left-out data row", style="head")
    for j, h in enumerate(key_heads(model.keys)):
        sheet.put(3, col + 1 + j, h, style="head")
    sheet.put(3, col + 1 + kw, "why it was left out of the fit", style="head")
    styles = key_styles(model.keys)
    for i, lo in enumerate(model.left_out):
        sheet.put(FIRST_ROW + i, col, lo.sheet_row, style="row")
        put_keys(sheet, FIRST_ROW + i, col + 1, model.keys, lo.index, styles)
        sheet.put(FIRST_ROW + i, col + 1 + kw, lo.reason)
    sheet.widths[col + 1 + kw] = 44


def plan_residual_sheet(model: ModelData, fitted_ref: Sequence[Part],
                        fitted: np.ndarray | Lazy, resid: np.ndarray | Lazy, note: str,
                        keys: Keys | None = None) -> SheetPlan:
    """The residual sheet: observed, fitted (from another sheet), observed − fitted.

    ``fitted_ref`` are template parts (``sheets.columns.template``) of the fitted-value
    cells, row by row, e.g. ``("'sf m fitted'!F", rows)``.

    ``fitted`` and ``resid`` are the cached values (nan where the row has no fitted value,
    which the sheet shows blank; a :class:`~sheetfit.vectors.Lazy` has one in every row).
    With ``keys`` (pass ``model.keys``) the identifier columns stand beside the data row
    and the value columns move right by ``key_width(keys)``: observed, fitted and
    residual are then in columns 1, 2, 3 + that width (0-based).
    """
    y = model.y
    kw = key_width(keys)
    rs = SheetPlan(sheet_title(model.tag, "resid"))
    rs.put(0, 0, f"Residuals — model {model.tag}", style="title")
    rs.put(1, 0, note, style="note")
    heads = (["data row"] + key_heads(keys)
             + [f"{y.name} (observed)", f"fitted {y.name}", "residual"])
    for c, h in enumerate(heads):
        rs.put(3, c, h, style="head")
    ob, fc, rc = 1 + kw, 2 + kw, 3 + kw
    B, C = _letter(ob), _letter(fc)
    amount = (decimal_style(model.Y, fmt=model.y.fmt) if model.Y.dtype != object
              else "num")
    derived = (decimal_style(model.Y, least=2, fmt=model.y.fmt)
               if model.Y.dtype != object else "num")
    used = np.asarray(model.used, dtype=np.int64)
    n = len(used)
    rs.run(0, FIRST_ROW, sheet_rows(used, y.first_row), style="row")
    key_runs(rs, FIRST_ROW, 1, keys, used, key_styles(keys))
    rs.run(ob, FIRST_ROW, np.asarray(model.Y, dtype=float), template("=", *ref_parts(y, used)), amount)
    f = fitted if isinstance(fitted, Lazy) else np.asarray(fitted, dtype=float)
    blank = np.zeros(0, dtype=bool) if isinstance(f, Lazy) else np.isnan(f)
    if blank.any():  # a lazy vector has a fitted value in every row
        fit_vals: Sequence[Scalar] | np.ndarray | Lazy = [
            "" if b else v
            for b, v in zip(blank.tolist(), np.asarray(f).tolist(), strict=True)]
        res_vals: Sequence[Scalar] | np.ndarray | Lazy = [
            "" if b else v
            for b, v in zip(blank.tolist(), np.asarray(resid).tolist(), strict=True)]
    else:
        fit_vals = f
        res_vals = resid if isinstance(resid, Lazy) else np.asarray(resid, dtype=float)
    rs.run(fc, FIRST_ROW, fit_vals, template("=", *fitted_ref), derived)
    rs.run(rc, FIRST_ROW, res_vals,
           template(f"=IF({C}", this_row, f'="","",{B}', this_row, f"-{C}", this_row, ")"),
           derived)
    if n != len(fitted):
        raise ValueError("fitted values and used rows differ in number")
    rs.widths.update({0: 9, rc: 16})
    column_notes(rs, {ob: "your data cell", fc: "from the fitted-value sheet",
                      rc: "observed − fitted, row by row"})
    rs.freeze = (FIRST_ROW, 1)
    rs.columns.update({"observed": ob, "fitted": fc, "resid": rc})
    return rs


def _letter(col: int) -> str:
    """Column letter of a 0-based column."""
    return col_letter(col + 1)
