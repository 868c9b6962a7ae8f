"""The fast reader's rectangle, stored column by column.

python-calamine hands a sheet over as rows of raw values ("" for an empty cell). Held as
a list of lists that is one Python object per cell (about 32 bytes for a float), on top
of calamine's own copy while it converts. :class:`Dense` keeps each column as a float64
array of its numbers (nan where the cell holds no number) and a small map of the cells
holding anything else (text, a logical, a date or time, an int, a float nan), or an
object array once a column is mostly such cells; an empty cell is nan in the numbers
and absent from the map. ``raw``, ``column`` and ``last_row`` give exactly the values
and types the list of lists gave (tests/test_values.py compares them).

The rows are pulled from calamine's row iterator a block at a time, so the whole sheet
is never a list of lists, and the calamine sheet is dropped once converted.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from itertools import islice
from math import isnan
from typing import Any

import numpy as np

__all__ = ["BLOCK", "Dense", "dense_from_rows"]

#: Rows converted at a time.
BLOCK = 4096
#: A column switches from a map to an object array once more than 1 cell in this many
#: holds something other than a number (a map entry costs about ten times a slot).
_OBJECT_SHARE = 8
_NAN = float("nan")

_Others = dict[int, Any] | np.ndarray


class Dense:
    """The rectangle from A1: ``height`` rows, numbers and other values by column."""

    def __init__(self, height: int, numbers: list[np.ndarray | None],
                 others: list[_Others]) -> None:
        self.height = height
        #: Per column (0-based from A): float64 numbers, nan elsewhere; None if none.
        self.numbers = numbers
        #: Per column: {row index: raw} of the cells holding anything but a number, or an
        #: object array with None where the numbers say what the cell holds.
        self.others = others

    def raw(self, row: int, col: int) -> Any:
        if not (0 < row <= self.height and 0 < col <= len(self.numbers)):
            return ""
        i, c = row - 1, col - 1
        other = self.others[c]
        found = other.get(i) if isinstance(other, dict) else other[i]
        if found is not None:
            return found
        nums = self.numbers[c]
        if nums is None:
            return ""
        v = float(nums[i])
        return "" if isnan(v) else v

    def column(self, col: int, row1: int, row2: int) -> list[Any] | np.ndarray:
        """Raw values of rows row1..row2 of one column ("" beyond the rectangle).

        A run of plain numbers comes back as a float64 array (a view: read-only).
        """
        n = row2 - row1 + 1
        if col < 1 or row1 < 1 or col > len(self.numbers):
            return [self.raw(r, col) for r in range(row1, row2 + 1)]
        c, lo, hi = col - 1, row1 - 1, min(row2, self.height)
        if hi <= lo:
            return [""] * n
        nums, other = self.numbers[c], self.others[c]
        if isinstance(other, dict):
            inside = ([i for i in other if lo <= i < hi]
                      if len(other) < hi - lo else [i for i in range(lo, hi) if i in other])
        else:
            inside = (np.flatnonzero(other[lo:hi] != None) + lo).tolist()
        if nums is None:
            out: list[Any] = [""] * (hi - lo)
        else:
            part = nums[lo:hi]
            blanks = np.flatnonzero(np.isnan(part))
            if not len(blanks) and not inside and hi - lo == n:
                view = part.view()
                view.flags.writeable = False
                return view
            out = part.tolist()
            for i in blanks.tolist():
                out[i] = ""
        for i in inside:
            out[i - lo] = other[i]
        return out + [""] * (n - len(out))

    def last_row(self, col1: int, col2: int) -> int:
        last = 0
        for c in range(max(col1, 1) - 1, min(col2, len(self.numbers))):
            nums, other = self.numbers[c], self.others[c]
            if nums is not None:
                held = np.flatnonzero(~np.isnan(nums))
                if len(held):
                    last = max(last, int(held[-1]) + 1)
            if isinstance(other, dict):
                if other:
                    last = max(last, max(other) + 1)
            else:
                held = np.flatnonzero(other != None)
                if len(held):
                    last = max(last, int(held[-1]) + 1)
        return last


def dense_from_rows(rows: Iterable[list[Any]], height: int, width: int) -> Dense:
    """Build the rectangle of ``height`` rows by ``width`` columns from A1.

    ``rows`` are all the rows from row 1, each holding the cells of its last columns
    (calamine's row iterator starts at the first column holding a value). Raises
    ValueError when the rows do not fill the rectangle exactly.
    """
    numbers: list[np.ndarray | None] = [None] * width
    others: list[_Others] = [{} for _ in range(width)]
    it: Iterator[list[Any]] = iter(rows)
    start = 0
    while block := list(islice(it, BLOCK)):
        end = start + len(block)
        col0 = width - len(block[0])
        if end > height or col0 < 0:
            raise ValueError(f"the fast reader gave more than {height} x {width} cells")
        for k, cells in enumerate(zip(*block, strict=True)):
            _put(numbers, others, col0 + k, start, cells, height)
        start = end
    if start != height:
        raise ValueError(f"the fast reader gave {start} rows, not {height}")
    return Dense(height, numbers, others)


def _put(numbers: list[np.ndarray | None], others: list[_Others], c: int, start: int,
         cells: tuple[Any, ...], height: int) -> None:
    """Store one column of one block of rows (rows ``start`` onwards)."""
    kinds = set(map(type, cells))
    if kinds == {str} and not any(cells):  # all empty
        return
    nums = numbers[c]
    if float in kinds and nums is None:
        nums = numbers[c] = np.full(height, _NAN)
    end = start + len(cells)
    if kinds == {float} and nums is not None:
        nums[start:end] = cells
        if not np.isnan(nums[start:end]).any():
            return
        found = {start + i: v for i, v in enumerate(cells) if isnan(v)}
    else:
        if nums is not None:
            nums[start:end] = [v if type(v) is float else _NAN for v in cells]
        found = {start + i: v for i, v in enumerate(cells)
                 if (isnan(v) if type(v) is float else (type(v) is not str or v != ""))}
    other = others[c]
    if isinstance(other, dict):
        other.update(found)
        if len(other) * _OBJECT_SHARE > height:
            objects = np.full(height, None, dtype=object)
            for i, v in other.items():
                objects[i] = v
            others[c] = objects
    else:
        for i, v in found.items():
            other[i] = v
