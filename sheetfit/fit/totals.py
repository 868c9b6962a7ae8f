"""Rows that look like totals or subtotals of the rows above them (arrays in, positions out).

A table typed or pasted into a workbook often carries a "Total" row, or subtotals
under blocks of rows. Fitted as data, such a row is an extreme point with enormous
leverage: it drags a least-squares line towards itself and gives nearest-neighbour
and strip methods a row that resembles nothing real. This module finds them from the
numbers alone.

The rule (one pass, O(n·m) for n rows and m columns, running sums only; the rows are
examined a window at a time with array operations):

* a row is a **total** when every column equals the sum of that column over a block
  of at least two other rows directly above it: the *detail* rows (rows not already
  found to be totals) since the previous total, or since the start;
* a row is also a total when it equals the sum of every detail row since the previous
  *grand* total (or the start), skipping the subtotals between them: the grand total
  under blocks that each carry a subtotal;
* a row of zeros in every column is never a total (nothing to add up).

Allowing any block ending right above a row (not only the rows since the previous total)
makes small-integer data full of chance matches: two rows of digits 1–9 add up to the next
in every one of three columns about once in 8,000 row triples; with the block pinned to
the previous total, a chance match needs the running sum of all rows since it to land on a
row's value, which the growing sum soon makes impossible (see ``test_totals.py`` for the
observed false-positive count).

Equality is to 9 significant digits: ``|row − sum| ≤ 1e-9 · Σ|block values|`` per column.
A total computed by a spreadsheet's SUM carries rounding of at most about
``k · 2⁻⁵³ · Σ|values|`` for k rows (≤ 1e-10 relative for a million rows), and so do our
running sums; both are far inside 1e-9, while two honest data values that differ
in their 9th significant digit or earlier are told apart. Relative to Σ|values| rather
than |sum| so that columns whose block sums cancel to near 0 are still compared on the
scale their rounding lives on.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["TOTAL_RTOL", "Total", "find_totals", "reason"]

#: Relative tolerance of "equal to the sum" (9 significant digits; see the module note).
TOTAL_RTOL = 1e-9
#: Fewest rows a block must hold for its sum row to count as a total.
MIN_BLOCK = 2


@dataclass(frozen=True)
class Total:
    """A row that equals the column sums of a block of detail rows above it.

    ``row`` is its 0-based position among the rows given; the block is the rows
    ``first``..``last`` (positions); ``skipped`` counts the subtotal rows inside it that
    the sum leaves out (0 for a plain total, whose block is all detail rows).
    """

    row: int
    first: int
    last: int
    skipped: int


#: Rows examined at once after a total is found; doubled while none is found (to _MAX_WINDOW).
_MIN_WINDOW = 64
_MAX_WINDOW = 1 << 16


class _Running:
    """Column sums and absolute sums of the detail rows since a reset."""

    def __init__(self, m: int) -> None:
        self.m = m
        self.reset()

    def reset(self) -> None:
        self.total = np.zeros(self.m)
        self.size = np.zeros(self.m)
        self.count = 0
        self.first = -1
        self.last = -1
        self.skipped = 0

    def window(self, rows: np.ndarray, nonzero: np.ndarray) -> tuple[np.ndarray, np.ndarray,
                                                                      np.ndarray]:
        """For each of ``rows`` (in order, none a total), whether it matches the sum of the
        detail rows before it; and the running sums before each row and after the last.

        The running sums are accumulated row after row (``np.cumsum`` adds in order), so
        they are bit for bit the sums a row-by-row loop keeps.
        """
        total = np.cumsum(np.vstack([self.total, rows]), axis=0)
        size = np.cumsum(np.vstack([self.size, np.abs(rows)]), axis=0)
        count = self.count + np.arange(len(rows))
        close = np.all(np.abs(rows - total[:-1]) <= TOTAL_RTOL * size[:-1], axis=1)
        return nonzero & (count >= MIN_BLOCK) & close, total, size

    def advance(self, start: int, k: int, total: np.ndarray, size: np.ndarray) -> None:
        """Add rows start..start+k-1 (sums after them: ``total[k]``, ``size[k]``)."""
        if k == 0:
            return
        if self.count == 0:
            self.first = start
        self.total, self.size = total[k].copy(), size[k].copy()
        self.count += k
        self.last = start + k - 1


def reason(first: int, last: int, total: Total, what: str) -> str:
    """Why the row is left out, in plain words; ``first``/``last`` name the block's rows."""
    extra = f"; its {total.skipped} subtotal{'s' if total.skipped != 1 else ''} not counted" \
        if total.skipped else ""
    return f"looks like the total of rows {first}–{last} ({what}{extra})"


def find_totals(Z: np.ndarray, *more: np.ndarray) -> list[Total]:
    """Rows of ``Z`` (rows × columns, finite floats) that look like totals, in row order.

    ``more`` are further columns of the same rows (1-D or rows × columns), taken as if
    placed to the right of ``Z``: a million-row response and attribute table is then
    never copied into one array, only a window of rows at a time."""
    parts = [np.asarray(z, dtype=np.float64) for z in (Z, *more)]
    parts = [z[:, None] if z.ndim == 1 and more else z for z in parts]
    if any(z.ndim != 2 for z in parts) or len({len(z) for z in parts}) > 1:
        raise ValueError("find_totals needs 2-D arrays of rows × columns, the same rows")
    n, m = len(parts[0]), sum(z.shape[1] for z in parts)
    if m == 0:
        return []
    def window(i: int, j: int) -> np.ndarray:
        return parts[0][i:j] if len(parts) == 1 else np.hstack([z[i:j] for z in parts])
    block, grand = _Running(m), _Running(m)
    nonzero = np.zeros(n, dtype=bool)
    for z in parts:
        nonzero |= np.any(z != 0, axis=1)
    found: list[Total] = []
    i, width = 0, _MIN_WINDOW
    while i < n:
        j = min(n, i + width)
        rows = window(i, j)
        sub, b_total, b_size = block.window(rows, nonzero[i:j])
        grand_hit, g_total, g_size = grand.window(rows, nonzero[i:j])
        if grand.skipped == 0:  # a grand total sums subtotalled blocks
            grand_hit[:] = False
        hits = np.flatnonzero(sub | grand_hit)
        if len(hits) == 0:
            block.advance(i, j - i, b_total, b_size)
            grand.advance(i, j - i, g_total, g_size)
            i, width = j, min(2 * width, _MAX_WINDOW)
            continue
        t = int(hits[0])
        k = i + t
        block.advance(i, t, b_total, b_size)
        grand.advance(i, t, g_total, g_size)
        if sub[t]:  # a subtotal: the grand running sum skips it
            found.append(Total(k, block.first, block.last, 0))
            grand.skipped += 1
        else:
            found.append(Total(k, grand.first, k - 1, grand.skipped))
            grand.reset()
        block.reset()
        i, width = k + 1, _MIN_WINDOW
    return found
