"""Reading back what sheetfit wrote on an owned sheet: rows of plain values."""

from __future__ import annotations

from ..reader.values import BLANK, NUMBER, BookValues, Value

__all__ = ["Plain", "plain", "read_rows"]

Plain = float | str | None


def plain(v: Value) -> Plain:
    """A cell as a plain value: a float, a text (errors and logicals as their text), None."""
    if v.kind == NUMBER:
        return v.number
    if v.kind == BLANK:
        return None
    return v.text


def read_rows(values: BookValues, title: str, first_row: int, n_cols: int,
              more: bool = False) -> list[list[Plain]]:
    """Rows ``first_row`` (1-based) to the last used one, columns 1..n_cols as plain values.

    With ``more``, each row also runs on to the right while cells hold something.
    """
    sv = values.sheet(title)
    last = sv.last_used_row(1, n_cols)
    rows = []
    for r in range(first_row, last + 1):
        row = [plain(sv.get(r, c)) for c in range(1, n_cols + 1)]
        if more:
            c = n_cols + 1
            while (v := plain(sv.get(r, c))) is not None:
                row.append(v)
                c += 1
        rows.append(row)
    return rows
