"""A1 cell addresses for the engine test helper: column letters, cell and range splitting.

The one home of these helpers for both sides of the helper: the cached-value reader
(``cached.py``, project interpreter) and the UNO worker (``uno_worker.py``, system
interpreter, which imports this file as a sibling module). Standard library only, so
it runs under either. Columns and rows are 0-based here.

Deliberately independent of ``sheetfit.a1``: the helper checks what sheetfit wrote, so
it does not share sheetfit's code for reading addresses.
"""

from __future__ import annotations

import re

__all__ = ["column_index", "column_letters", "split_address", "split_range"]

_CELL_RE = re.compile(r"^\$?([A-Za-z]{1,3})\$?(\d+)$")


def column_index(letters: str) -> int:
    """0-based column index for spreadsheet column letters."""
    n = 0
    for ch in letters.upper():
        n = n * 26 + ord(ch) - 64
    return n - 1


def column_letters(index: int) -> str:
    """Spreadsheet column letters for a 0-based column index."""
    letters = ""
    index += 1
    while index:
        index, rem = divmod(index - 1, 26)
        letters = chr(65 + rem) + letters
    return letters


def split_address(address: str) -> tuple[int, int]:
    """0-based (column, row) of an A1 cell address; ``$`` markers are allowed."""
    m = _CELL_RE.match(address)
    if m is None:
        raise ValueError(f"not a cell address: {address!r}")
    return column_index(m.group(1)), int(m.group(2)) - 1


def split_range(ref: str) -> tuple[int, int, int, int]:
    """0-based (first column, first row, last column, last row) of an A1 range or cell."""
    first, _, last = ref.partition(":")
    c0, r0 = split_address(first)
    c1, r1 = split_address(last or first)
    return min(c0, c1), min(r0, r1), max(c0, c1), max(r0, r1)
