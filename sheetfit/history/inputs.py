"""The ``sf inputs`` sheet: each model's declared ranges as last fitted, for ``sheetfit check``.

One row per declared range (model, role, defined name, range, cells, range digest, the
model's fingerprint, then the cell digests in chunks of ``CHUNK`` cells), and one row per
model for its settings as used. The recipe is in ``declare/fingerprint.py``.
"""

from __future__ import annotations

from collections.abc import Sequence

from ..declare.fingerprint import DIGEST_HEX, InputRecord, RangeRecord
from ..owned import INPUTS_SHEET
from ..reader.values import BookValues
from ..sheets.columns import Pieces
from ..sheets.plan import SheetPlan
from ._grid import read_rows

__all__ = ["CHUNK", "FIRST_ROW", "plan_inputs", "read_inputs"]

#: Cell digests per sheet cell (8 hex digits each: 32,000 of a cell's 32,767 characters).
CHUNK = 4000
#: The sheet row (1-based) of the first record.
FIRST_ROW = 5
_SETTINGS = "settings"
_HEADS = ["model", "role", "defined name", "range (or settings as used)", "cells",
          "range digest", "fingerprint", "cell digests (8 hex digits per cell, in order)"]


def plan_inputs(records: Sequence[InputRecord]) -> SheetPlan:
    s = SheetPlan(INPUTS_SHEET)
    s.put(0, 0, "sheetfit — the inputs each model was last fitted from", style="title")
    s.put(1, 0, ("One row per declared range: its cells' digests as read at the last refresh; "
                 "'sheetfit check BOOK' reads the ranges again and names the ones that changed."),
          style="note")
    s.put(2, 0, ("The recipe is in sheetfit's README (section 'Checking a book'). Replaced on "
                 "every refresh; do not edit."), style="note")
    for c, h in enumerate(_HEADS):
        s.put(FIRST_ROW - 2, c, h, style="head")
    r = FIRST_ROW - 1
    for rec in records:
        fp = rec.fingerprint
        for rr in rec.ranges:
            s.put(r, 0, rec.tag, style="label")
            s.put(r, 1, rr.role)
            s.put(r, 2, rr.name)
            s.put(r, 3, rr.ref)
            s.put(r, 4, rr.n_cells, style="int")
            s.put(r, 5, rr.digest)
            s.put(r, 6, fp)
            if rr.n_cells or rr.text:  # cut into cells only as the sheet is written
                s.span(r, 7, Pieces(rr.text, CHUNK * DIGEST_HEX) if rr.text is not None
                       else Pieces(rr.packed, CHUNK * DIGEST_HEX // 2))
            r += 1
        s.put(r, 0, rec.tag, style="label")
        s.put(r, 1, _SETTINGS)
        s.put(r, 3, rec.settings)
        s.put(r, 6, fp)
        r += 1
    s.widths = {0: 14, 1: 9, 2: 16, 3: 30, 5: 18, 6: 18, 7: 40}
    s.freeze = (FIRST_ROW - 1, 1)
    return s


def read_inputs(values: BookValues) -> dict[str, tuple[InputRecord, str]]:
    """The records on the owned ``sf inputs`` sheet: model (case-folded) -> (record, fingerprint
    as written). The caller makes sure the sheet is an owned one."""
    ranges: dict[str, list[RangeRecord]] = {}
    settings: dict[str, tuple[str, str, str]] = {}
    for row in read_rows(values, INPUTS_SHEET, FIRST_ROW, 7, more=True):
        tag, role = row[0], row[1]
        if not isinstance(tag, str) or not isinstance(role, str):
            continue
        key = tag.casefold()
        if role == _SETTINGS:
            settings[key] = (tag, str(row[3] or ""), str(row[6] or ""))
            continue
        cells = "".join(str(v) for v in row[7:] if v is not None)
        ranges.setdefault(key, []).append(
            RangeRecord.from_text(role, str(row[2] or ""), str(row[3] or ""), cells))
    return {key: (InputRecord(tag, tuple(ranges.get(key, [])), text), fp)
            for key, (tag, text, fp) in settings.items()}
