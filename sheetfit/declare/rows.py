"""The data rows of a model: its columns, which rows are used, the reasons others are left
out, and the arrays the fit takes (text attributes expanded into indicators)."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..a1 import cell_ref, col_letter
from ..errors import Context, DataError
from ..fit.totals import find_totals
from ..fit.totals import reason as totals_reason
from ..labels import label_text
from ..reader.columns import CODE
from ..reader.formats import amount_format
from ..reader.package import DefinedName
from ..reader.values import BLANK, NUMBER, BookValues, ColumnValues
from ..words import clip
from .data import Column, LeftOut, describe_value
from .levels import Coding, indicators
from .refs import Area

__all__ = [
    "check_headers",
    "check_numeric_columns",
    "data_columns",
    "expand",
    "leave_out_totals",
    "make_column",
    "read_rows",
]


def data_columns(cols: list[Column], n_rows: int, values: BookValues) -> list[ColumnValues]:
    """The data cells of each column (its n_rows rows below the header), read in bulk."""
    return [values.column(c.sheet, c.col, c.first_row, c.first_row + n_rows - 1) for c in cols]


def check_numeric_columns(xcols: list[Column], cells: list[ColumnValues], n_rows: int,
                          dx: DefinedName, file: str) -> None:
    """An attribute column without a single number is a declaration mistake, not data."""
    for c, cv in zip(xcols, cells, strict=True):
        if not cv.of_kind(NUMBER).any():
            filled = np.flatnonzero(~cv.of_kind(BLANK))
            what = describe_value(cv.value(int(filled[0]))) if len(filled) else "only blanks"
            raise DataError(
                f"attribute '{clip(c.name)}' holds no numbers ({what} ...); distances and "
                "fits need numeric attributes",
                Context(file, dx.name, c.sheet, c.span(0, n_rows - 1)),
                hint="code the attribute as numbers or leave it out of x",
            )


def make_column(a: Area, col: int, header: bool, values: BookValues, offset: int) -> Column:
    name = values.sheet(a.sheet).get(a.row1, col).text.strip() if header else col_letter(col)
    fmt = amount_format(values.number_format(a.sheet, a.row1 + offset, col))
    return Column(name, a.sheet, col, a.row1 + offset, fmt=fmt)


def check_headers(cols: list[Column], d: DefinedName, file: str) -> None:
    seen: dict[str, Column] = {}
    for c in cols:
        key = c.name.casefold()
        if key in seen:
            first = seen[key]
            raise DataError(
                f"two attribute columns are both called '{clip(c.name)}' "
                f"({cell_ref(first.first_row - 1, first.col)} and "
                f"{cell_ref(c.first_row - 1, c.col)})",
                Context(file, d.name, c.sheet, cell_ref(c.first_row - 1, c.col)),
                hint="give each attribute column its own header",
            )
        seen[key] = c


def read_rows(
    ycol: Column, xcols: list[Column], cells: list[ColumnValues], labels: bool = False,
    text: list[bool] | None = None,
) -> tuple[np.ndarray, list[LeftOut], np.ndarray, np.ndarray, dict[int, list[str]]]:
    """Used row indices, left-out rows, y (floats, or labels when ``labels``), X, levels.

    ``cells`` are the data cells of y then each x column (``data_columns``). A row is used
    when y holds a number (or, for labels, a number or a non-blank text) and every
    attribute a number, or a level for a text attribute (``text[j]``: its X column is nan
    and the levels of the used rows are returned under key j, ``declare/levels.py``).
    Otherwise the row is left out, the reason naming its first unusable cell from the left.
    """
    cols = [ycol] + xcols
    text = text or [False] * len(xcols)
    n = len(cells[0])
    ok = np.empty((n, len(cols)), dtype=bool)
    for j, cv in enumerate(cells):
        if j == 0 and labels:
            ok[:, 0] = cv.of_kind(NUMBER) | cv.levels()
        elif j > 0 and text[j - 1]:
            ok[:, j] = cv.levels()
        else:
            ok[:, j] = cv.of_kind(NUMBER)
    bad = ~ok
    rows_bad = np.flatnonzero(bad.any(axis=1))
    left: list[LeftOut] = []
    for i, j in zip(rows_bad.tolist(), bad[rows_bad].argmax(axis=1).tolist()):
        c, v = cols[j], cells[j].value(i)
        if j > 0 and text[j - 1]:
            what = (f"the number {clip(label_text(v.number), 20)}" if v.kind == NUMBER
                    else describe_value(v))
            reason = f"{what} in text attribute '{clip(c.name)}' ({c.cell(i)})"
        else:
            role = "y" if j == 0 else f"'{clip(c.name)}'"
            reason = f"{describe_value(v)} in {role} ({c.cell(i)})"
        left.append(LeftOut(i, ycol.row_of(i), reason))
    used = np.flatnonzero(~bad.any(axis=1))
    ycells = cells[0]
    if labels:
        Y = np.empty(len(used), dtype=object)
        Y[:] = [float(ycells.number[i]) if ycells.kind[i] == CODE[NUMBER] else ycells.text[i]
                for i in used.tolist()]
    else:
        Y = ycells.number[used]
    X = np.empty((len(used), len(xcols)))
    for j, cv in enumerate(cells[1:]):
        X[:, j] = np.nan if text[j] else cv.number[used]
    texts = {j: [cells[j + 1].text[i] for i in used.tolist()] for j, t in enumerate(text) if t}
    return used, left, Y, X, texts


def expand(xcols: list[Column], X: np.ndarray, texts: dict[int, list[str]],
            codings: dict[int, Coding]) -> tuple[list[Column], np.ndarray]:
    """Each text attribute replaced, in place, by its indicator columns."""
    cols: list[Column] = []
    blocks: list[np.ndarray] = []
    for j, c in enumerate(xcols):
        if j in codings:
            cols += [replace(c, name=f"{c.name} = {lv}", level=lv) for lv in codings[j].levels]
            blocks.append(indicators(texts[j], codings[j]))
        else:
            cols.append(c)
            blocks.append(X[:, j:j + 1])
    return cols, np.hstack(blocks)


def leave_out_totals(
    ycol: Column, used: np.ndarray, left: list[LeftOut], Y: np.ndarray, X: np.ndarray,
    labels: bool, some_text: bool = False,
) -> tuple[np.ndarray, list[LeftOut]]:
    """Which used rows to keep, leaving out rows that look like totals of the rows above.

    Compared: y and every numeric attribute (only the attributes when y holds class
    labels; text attributes never). With a single column to compare, chance equalities
    are too common to call a row a total, so nothing is left out (``sheetfit.fit.totals``
    has the rule). Returns the mask over ``used`` and the left-out list with the totals.
    """
    keep = np.ones(len(used), dtype=bool)
    if X.shape[1] + (0 if labels else 1) < 2 or len(used) == 0:
        return keep, left
    totals = find_totals(X) if labels else find_totals(Y, X)
    if not totals:
        return keep, left
    attrs = "every numeric attribute" if some_text else "every attribute"
    what = f"{attrs} equals its sum" if labels else f"y and {attrs} equal their sums"
    left = list(left)
    for t in totals:
        keep[t.row] = False
        r1, r2 = ycol.row_of(int(used[t.first])), ycol.row_of(int(used[t.last]))
        i = int(used[t.row])
        left.append(LeftOut(i, ycol.row_of(i), totals_reason(r1, r2, t, what)))
    left.sort(key=lambda lo: lo.index)
    return keep, left

