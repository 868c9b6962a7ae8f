"""Which cells of a worksheet hold something, and the formula of those that hold one.

``sheetfit check`` needs to know, for an owned sheet, whether a cell that sheetfit wrote
as a formula still holds one (a typed constant over a formula is a hand edit) and which
cells hold content sheetfit did not write. The values themselves come from
``values.BookValues``; this reads the same part with the same hardened streaming parse.
"""

from __future__ import annotations

import zipfile
from pathlib import Path
from typing import NamedTuple

from ._sheetxml import _cells, _local

__all__ = ["CellKind", "CellKinds", "read_cell_kinds"]


class CellKind(NamedTuple):
    """A cell holding something: its formula (None for a plain value; "" for a shared
    formula's follower) and whether a result is stored with it (an empty ``<v></v>`` is
    none, unless the result is typed as text: an empty text)."""

    formula: str | None
    result: bool


CellKinds = dict[tuple[int, int], CellKind]


def read_cell_kinds(path: Path, part: str) -> CellKinds:
    """Every cell of the worksheet ``part`` that holds a value or a formula."""
    out: CellKinds = {}
    with zipfile.ZipFile(path) as zf:
        member = {n.lower(): n for n in zf.namelist()}[part.lower()]
        with zf.open(member) as fh:
            for row, col, el in _cells(fh, None):
                formula: str | None = None
                result = False
                for child in el:
                    name = _local(child.tag)
                    if name == "f":
                        formula = child.text or ""
                    elif name == "is" or (name == "v" and (child.text or el.get("t") == "str")):
                        result = True
                if formula is not None or result:
                    out[(row, col)] = CellKind(formula, result)
    return out
