"""Which cells of a worksheet hold something, and the formula of those that hold one.

``sheetfit check`` needs to know, for an owned sheet, whether a cell that sheetfit wrote
as a formula still holds one (a typed constant over a formula is a hand edit) and which
cells hold content sheetfit did not write. The values themselves come from
``values.BookValues``. A UTF-8 part is scanned with regular expressions over its bytes
(about ten times faster than a parse on 20,000-row result sheets); any other part goes
through the same hardened streaming parse as the values reader.
"""

from __future__ import annotations

import re
import zipfile
from pathlib import Path
from typing import NamedTuple
from xml.sax.saxutils import unescape

from ..a1 import col_index
from ._sheetxml import _cells, _local, part_bytes, utf8

__all__ = ["CellKind", "CellKinds", "read_cell_kinds"]


class CellKind(NamedTuple):
    """A cell holding something: its formula (None for a plain value; "" for a shared
    formula's follower) and whether a result is stored with it (an empty ``<v></v>`` is
    none, unless the result is typed as text: an empty text)."""

    formula: str | None
    result: bool


CellKinds = dict[tuple[int, int], CellKind]

_CELL = re.compile(rb"<(?:\w+:)?c\b([^>]*?)(?:/>|>(.*?)</(?:\w+:)?c>)", re.DOTALL)
_REF = re.compile(rb'\br="([A-Z]{1,3})([0-9]{1,7})"')
_TYPE_STR = re.compile(rb'\bt="str"')
_FORMULA = re.compile(rb"<(?:\w+:)?f\b[^>]*?(?:/>|>(.*?)</(?:\w+:)?f>)", re.DOTALL)
_VALUE = re.compile(rb"<(?:\w+:)?v>([^<]*)</(?:\w+:)?v>|<(?:\w+:)?is\b")
_ENTITIES = {"&quot;": '"', "&apos;": "'"}


def read_cell_kinds(path: Path, part: str) -> CellKinds:
    """Every cell of the worksheet ``part`` that holds a value or a formula."""
    with zipfile.ZipFile(path) as zf:
        member = {n.lower(): n for n in zf.namelist()}[part.lower()]
        data = part_bytes(zf, member)  # one buffer: zf.read holds a big part twice
        if utf8(data):
            found = _scan(data)
            if found is not None:
                return found
        with zf.open(member) as fh:
            return _parse(fh)


def _scan(data: bytes | bytearray) -> CellKinds | None:
    """The cells of a UTF-8 part by byte scan; None when a cell has no reference."""
    out: CellKinds = {}
    cols: dict[bytes, int] = {}  # column letters seen, by their number
    kinds: dict[tuple[str | None, bool], CellKind] = {}  # one object per distinct kind
    for m in _CELL.finditer(data):
        head, body = m.group(1), m.group(2) or b""
        ref = _REF.search(head)
        if ref is None:
            return None
        f = _FORMULA.search(body)
        if f is None:
            formula = None
        else:
            raw = f.group(1) or b""
            formula = unescape(raw.decode(), _ENTITIES) if b"&" in raw else raw.decode()
        v = _VALUE.search(body)
        result = v is not None and (v.group(1) is None or bool(v.group(1))
                                    or _TYPE_STR.search(head) is not None)
        if formula is not None or result:
            letters = ref.group(1)
            col = cols.get(letters)
            if col is None:
                col = cols[letters] = col_index(letters)
            kind = kinds.get((formula, result)) if not formula else None
            if kind is None:
                kind = CellKind(formula, result)
                if not formula:  # values and shared formulas' followers: a handful of kinds
                    kinds[(formula, result)] = kind
            out[(int(ref.group(2)), col)] = kind
    return out


def _parse(fh: object) -> CellKinds:
    out: CellKinds = {}
    for row, col, el in _cells(fh, None):  # type: ignore[arg-type]
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
