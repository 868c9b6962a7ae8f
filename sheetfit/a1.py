"""A1 references, the one set of helpers both sides use: reading declarations, writing sheets.

Rows and columns are 1-based here, as in A1 addresses; sheet plans pass 0-based
positions to :func:`absolute` and :func:`area`, which say so.
"""

from __future__ import annotations

import re

__all__ = [
    "MAX_COL",
    "MAX_ROW",
    "absolute",
    "area",
    "cell_ref",
    "col_index",
    "col_letter",
    "quote_sheet",
]

#: Last row and column of an xlsx sheet.
MAX_ROW = 1_048_576
MAX_COL = 16_384

_PLAIN_TITLE = re.compile(r"[A-Za-z_][A-Za-z0-9_.]*")
_CELL_LIKE = re.compile(r"[A-Za-z]{1,3}[0-9]+")


def col_letter(col: int) -> str:
    """Column letters for a 1-based column number (1 -> A, 27 -> AA)."""
    out = ""
    while col:
        col, rem = divmod(col - 1, 26)
        out = chr(65 + rem) + out
    return out


def col_index(letters: str | bytes) -> int:
    """1-based column number for column letters (text or ASCII bytes)."""
    n = 0
    for ch in letters.upper() if isinstance(letters, str) else letters.upper().decode("ascii"):
        n = n * 26 + ord(ch) - 64
    return n


def cell_ref(row: int, col: int) -> str:
    """A1 address of a 1-based row and column, e.g. (5, 3) -> C5."""
    return f"{col_letter(col)}{row}"


def quote_sheet(title: str) -> str:
    """Sheet title as it appears in a formula reference (quoted when needed)."""
    if _PLAIN_TITLE.fullmatch(title) and not _CELL_LIKE.fullmatch(title):
        return title
    return "'" + title.replace("'", "''") + "'"


def absolute(row: int, col: int) -> str:
    """Absolute A1 address of a 0-based row and column, e.g. (4, 1) -> $B$5."""
    return f"${col_letter(col + 1)}${row + 1}"


def area(title: str, row1: int, col1: int, row2: int, col2: int) -> str:
    """Absolute reference to a rectangle of a sheet (0-based corners), e.g. 'sf a coef'!$B$5:$B$7."""
    a, b = absolute(row1, col1), absolute(row2, col2)
    return f"{quote_sheet(title)}!{a}" + ("" if a == b else f":{b}")
