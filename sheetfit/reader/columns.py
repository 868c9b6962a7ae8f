"""One column of a sheet over a run of rows, read at once into arrays.

A declared range of 200,000 rows is 200,000 cells per column; a :class:`Value` per cell
costs about a microsecond and a hundred bytes each. :class:`ColumnValues` holds the same
facts as arrays: a kind code per cell, the numbers as float64 (nan where the cell holds
no number), and the text of the few cells that hold text, an error or a logical. Its
``value(i)`` is exactly ``SheetValues.get`` of that cell (tests/test_values.py compares
them cell by cell), for messages that name one cell.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import repeat
from typing import Any

import numpy as np

from ._sheetxml import TEXT_CAP
from .cells import BLANK, ERROR, NUMBER, OTHER, TEXT, UNSAVED, Value, classify

__all__ = ["CODE", "KINDS", "ColumnValues", "Mixed", "column_values"]

#: Kind words by code (the index), and codes by kind word.
KINDS = (BLANK, NUMBER, TEXT, ERROR, OTHER, UNSAVED)
CODE = {k: np.uint8(i) for i, k in enumerate(KINDS)}
_BLANK, _NUMBER, _TEXT, _ERROR, _OTHER, _UNSAVED = range(len(KINDS))
#: Raw value types the bulk path knows (exact types: bool, a subclass of int, is not one).
_FLOAT, _STR, _ANY = 0, 1, 2
_TYPE_CODE = {float: _FLOAT, str: _STR}


@dataclass(frozen=True)
class ColumnValues:
    """The cells of column ``col`` of ``sheet``, rows ``row1`` onwards, as arrays.

    ``kind[i]`` is the code of the kind of the cell in row ``row1 + i`` (``KINDS[code]``
    is the word), ``number[i]`` its number (nan unless a number), ``text[i]`` its text for
    text, error and logical cells only (capped as the readers cap it).
    """

    sheet: str
    col: int
    row1: int
    kind: np.ndarray
    number: np.ndarray
    text: dict[int, str]

    def __len__(self) -> int:
        return int(self.kind.shape[0])

    @property
    def row2(self) -> int:
        return self.row1 + len(self) - 1

    def value(self, i: int) -> Value:
        """The cell in row ``row1 + i`` as a Value (the same as ``SheetValues.get``)."""
        kind = KINDS[int(self.kind[i])]
        if kind == NUMBER:
            return Value(NUMBER, float(self.number[i]))
        if kind in (BLANK, UNSAVED):
            return Value(kind)
        return Value(kind, text=self.text.get(i, ""))

    def of_kind(self, kind: str) -> np.ndarray:
        """Mask of the cells of one kind."""
        return self.kind == CODE[kind]

    def levels(self) -> np.ndarray:
        """Mask of the text cells holding something other than spaces (a level, a label)."""
        out = np.zeros(len(self), dtype=bool)
        for i, t in self.text.items():
            if self.kind[i] == _TEXT and t.strip():
                out[i] = True
        return out


@dataclass(frozen=True)
class Mixed:
    """Raw values of a stretch of a column as the column store keeps them: the plain
    numbers in place in a float64 array (nan elsewhere), a mask of the rows holding one,
    and every other cell's raw value by its offset (a header, a stray text). A million
    rows with a header above them then never become a million Python floats."""

    number: np.ndarray
    has: np.ndarray
    others: dict[int, Any]

    def __len__(self) -> int:
        return int(self.number.shape[0])

    def tolist(self) -> list[Any]:
        """The raw values one by one ("" where no cell holds one), as a list."""
        out: list[Any] = [v if h else "" for v, h in zip(self.number.tolist(),
                                                         self.has.tolist(), strict=True)]
        for i, raw in self.others.items():
            out[i] = raw
        return out


def column_values(sheet: str, col: int, row1: int, raws: list[Any] | np.ndarray | Mixed,
                  errors: dict[tuple[int, int], str], unsaved: set[tuple[int, int]],
                  date1904: bool) -> ColumnValues:
    """Classify one column's raw values (row ``row1`` onwards) in bulk.

    ``errors`` and ``unsaved`` are the sheet's error cells and formula cells without a
    saved result, which override the raw value as ``SheetValues.get`` does. A float64
    array of ``raws`` is a run of plain numbers (the fast reader's column store), a
    :class:`Mixed` the store's numbers with other cells among them.
    """
    n = len(raws)
    kind = np.zeros(n, dtype=np.uint8)
    text: dict[int, str] = {}
    if isinstance(raws, np.ndarray):  # the store's own read-only array: no copy
        return _overrides(sheet, col, row1, np.full(n, _NUMBER, dtype=np.uint8),
                          np.asarray(raws, dtype=np.float64), text, errors, unsaved)
    if isinstance(raws, Mixed):
        kind[raws.has] = _NUMBER
        for i, raw in raws.others.items():
            _one(raws.number, kind, text, i, raw, date1904)
        return _overrides(sheet, col, row1, kind, raws.number, text, errors, unsaved)
    codes = np.fromiter(map(_TYPE_CODE.get, map(type, raws), repeat(_ANY)), dtype=np.uint8,
                        count=n)
    if n and not codes.any():  # the common case: a column of plain numbers
        number = np.array(raws, dtype=np.float64)
        kind[:] = _NUMBER
    else:
        number = np.full(n, np.nan)
        floats = np.flatnonzero(codes == _FLOAT)
        if len(floats):
            number[floats] = np.array(raws, dtype=object)[floats].astype(np.float64)
            kind[floats] = _NUMBER
        for i in np.flatnonzero(codes == _STR).tolist():
            if raws[i]:
                kind[i], text[i] = _TEXT, raws[i][:TEXT_CAP]
        for i in np.flatnonzero(codes == _ANY).tolist():
            _one(number, kind, text, i, raws[i], date1904)
    return _overrides(sheet, col, row1, kind, number, text, errors, unsaved)


def _one(number: np.ndarray, kind: np.ndarray, text: dict[int, str], i: int, raw: Any,
         date1904: bool) -> None:
    """Item ``i`` of the arrays from one raw value, as the bulk path above classifies it."""
    code = _TYPE_CODE.get(type(raw), _ANY)
    if code == _FLOAT:
        number[i], kind[i] = raw, _NUMBER
    elif code == _STR:
        if raw:
            kind[i], text[i] = _TEXT, raw[:TEXT_CAP]
    else:
        v = classify(raw, date1904)
        kind[i] = CODE[v.kind]
        if v.kind == NUMBER:
            number[i] = v.number
        elif v.kind != BLANK:
            text[i] = v.text


def _overrides(sheet: str, col: int, row1: int, kind: np.ndarray, number: np.ndarray,
               text: dict[int, str], errors: dict[tuple[int, int], str],
               unsaved: set[tuple[int, int]]) -> ColumnValues:
    """Error cells and formula cells without a saved result over the raw values."""
    row2 = row1 + len(kind) - 1
    if not number.flags.writeable and any(
            c == col and row1 <= r <= row2 for r, c in (*unsaved, *errors)):
        number = number.copy()  # a view of the reader's store: written only as a copy
    for r, c in unsaved:
        if c == col and row1 <= r <= row2:
            i = r - row1
            kind[i], number[i] = _UNSAVED, np.nan
            text.pop(i, None)
    for (r, c), err in errors.items():
        if c == col and row1 <= r <= row2:
            i = r - row1
            kind[i], number[i], text[i] = _ERROR, np.nan, err
    return ColumnValues(sheet, col, row1, kind, number, text)
