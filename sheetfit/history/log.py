"""The refresh log (``sf log``): one row per refresh and model, carried forward, capped.

Each refresh reads the rows of the previous log (before the graft replaces the owned
sheets), appends one row per model and keeps the last ``LOG_CAP`` rows. A row: when
(UTC), tool version, model, method, rows used, the data window (first and last
identifier of the used rows when the model declares identifiers, else their sheet rows),
the largest relative shift of a key figure since the model's previous row and which
figure it was (marked when above ``SHIFT_LEVEL``), then each key figure's name, value
before (the previous row's value after) and value after.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from ..declare.model import KeyValue, ModelData
from ..owned import LOG_SHEET
from ..reader.values import BookValues
from ..sheets.plan import SheetPlan
from ._grid import Plain, read_rows

__all__ = ["FIGURES", "LOG_CAP", "SHIFT_LEVEL", "LogRow", "key_text", "log_rows", "plan_log",
           "read_log", "shift_text"]

#: Rows the log keeps: the newest, oldest dropped first.
LOG_CAP = 500
#: A relative shift above this is marked.
SHIFT_LEVEL = 0.10
#: Key figures a row holds (a degree-10 polynomial has 11 coefficients).
FIGURES = 12
#: Sheet row (1-based) of the first log row; the column headers are on the row above.
FIRST_ROW = 6
_FIXED = ["refreshed (UTC)", "tool version", "model", "method", "rows used",
          "data window from", "data window to", "largest shift", "in figure", "marked"]
_WIDTH = len(_FIXED) + 3 * FIGURES


@dataclass
class LogRow:
    """One row of the log as plain values (numbers as floats)."""

    cells: list[Plain]

    @property
    def model(self) -> str:
        return str(self.cells[2] or "")

    def figures(self) -> dict[str, float]:
        """Key figure name -> value after this refresh."""
        out = {}
        for k in range(len(_FIXED), len(self.cells) - 2, 3):
            name, after = self.cells[k], self.cells[k + 2]
            if isinstance(name, str) and isinstance(after, float):
                out[name] = after
        return out

    def text(self) -> str:
        """The row in one line (for the documentation sheet)."""
        c = self.cells
        shift = shift_text(c[7]) if isinstance(c[7], float) else "no earlier refresh"
        where = f" in {c[8]}" if c[8] else ""
        return (f"{c[0]}, sheetfit {c[1]}: {_num(c[4])} rows used, data {c[5]} to {c[6]}; "
                f"largest shift {shift}{where}")


def _num(v: Plain) -> str:
    return f"{v:g}" if isinstance(v, float) else str(v or "")


def shift_text(v: float) -> str:
    return f"{100 * v:.1f} %"


def key_text(values: list[KeyValue]) -> str:
    """Identifiers of one row as text: whole numbers without a decimal point, joined by ' / '."""
    out = []
    for v in values:
        if isinstance(v, float):
            out.append(str(int(v)) if v.is_integer() and abs(v) < 1e15 else repr(v))
        else:
            out.append("" if v is None else str(v))
    return " / ".join(out)


def _window(model: ModelData) -> tuple[str, str]:
    first, last = int(model.used[0]), int(model.used[-1])
    if model.keys is not None:
        return key_text(model.keys.row(first)), key_text(model.keys.row(last))
    return f"row {model.y.row_of(first)}", f"row {model.y.row_of(last)}"


def read_log(values: BookValues) -> list[LogRow]:
    """The rows of the owned log sheet (the caller makes sure it is owned)."""
    return [LogRow(r) for r in read_rows(values, LOG_SHEET, FIRST_ROW, _WIDTH)
            if isinstance(r[2], str) and r[2]]


def log_rows(previous: list[LogRow],
             entries: list[tuple[ModelData, str, list[tuple[str, float]]]],
             stamp: str, version: str) -> list[LogRow]:
    """The log after this refresh: the previous rows, one new row per model, the last LOG_CAP.

    ``entries`` are (model, method title, key figures) per model fitted now.
    """
    last: dict[str, dict[str, float]] = {}
    for row in previous:
        last[row.model.casefold()] = row.figures()
    rows = list(previous)
    for model, title, figures in entries:
        before = last.get(model.tag.casefold(), {})
        # a figure that does not exist this time (an RMSE with no fitted row) is left blank
        now: list[tuple[str, float | None]] = [(n, v if math.isfinite(v) else None)
                                               for n, v in figures]
        shift, where = None, ""
        for name, after in now:
            if after is None:
                continue
            b = before.get(name)
            if b is None or b == 0:
                continue
            s = abs(after - b) / abs(b)
            if shift is None or s > shift:
                shift, where = s, name
        lo, hi = _window(model)
        cells: list[Plain] = [stamp, version, model.tag, title, float(len(model.used)), lo, hi,
                              shift, where if shift else None,
                              f"above {100 * SHIFT_LEVEL:g} %" if shift is not None
                              and shift > SHIFT_LEVEL else None]
        for name, value in now[:FIGURES]:
            cells += [name, before.get(name), value]
        rows.append(LogRow(cells))
    return rows[-LOG_CAP:]


def plan_log(rows: list[LogRow]) -> SheetPlan:
    s = SheetPlan(LOG_SHEET)
    s.put(0, 0, "sheetfit — refresh log", style="title")
    s.put(1, 0, (f"One row per refresh and model, oldest first. Each refresh carries these rows "
                 f"forward and adds its own; the newest {LOG_CAP} rows are kept."), style="note")
    s.put(2, 0, ("Before is the figure at the model's previous refresh, after the figure now; "
                 "the largest shift is |after − before| / |before| over the key figures "
                 f"(a figure that was 0 is not compared), marked above {100 * SHIFT_LEVEL:g} %."),
          style="note")
    heads: list[str] = list(_FIXED)
    for k in range(1, FIGURES + 1):
        heads += [f"figure {k}", "before", "after"]
    head = FIRST_ROW - 2
    for c, h in enumerate(heads):
        s.put(head, c, h, style="head")
    for i, row in enumerate(rows):
        r = head + 1 + i
        for c, v in enumerate(row.cells):
            if v is None:
                continue
            style: Any = "text"
            if c == 7 and isinstance(v, float):
                style = "pct"
            elif c == 9:
                style = "caution"
            elif c == 4:
                style = "int"
            s.put(r, c, v, style=style)
    s.widths = {0: 22, 2: 14, 3: 14, 5: 14, 6: 14, 8: 16, 9: 12}
    s.freeze = (FIRST_ROW - 1, 3)
    return s
