"""The number format of a user's cell: its style index in the sheet part, then styles.

Used for looks only (result sheets show amounts the way the user's data cells do), so
every failure here is an answer of None, never a refusal.
"""

from __future__ import annotations

import re
from typing import IO

from defusedxml import ElementTree

from ..a1 import col_index

__all__ = ["BUILTIN_FORMATS", "StyleTable", "amount_format", "row_style_indices"]

#: Built-in number formats by id (ECMA-376 Part 1, 18.8.30 numFmt; the common ones, from
#: memory of the standard's table).
BUILTIN_FORMATS = {
    0: "General", 1: "0", 2: "0.00", 3: "#,##0", 4: "#,##0.00", 9: "0%", 10: "0.00%",
    11: "0.00E+00", 12: "# ?/?", 13: "# ??/??", 14: "mm-dd-yy", 15: "d-mmm-yy",
    16: "d-mmm", 17: "mmm-yy", 18: "h:mm AM/PM", 19: "h:mm:ss AM/PM", 20: "h:mm",
    21: "h:mm:ss", 22: "m/d/yy h:mm", 37: "#,##0 ;(#,##0)", 38: "#,##0 ;[Red](#,##0)",
    39: "#,##0.00;(#,##0.00)", 40: "#,##0.00;[Red](#,##0.00)", 45: "mm:ss",
    46: "[h]:mm:ss", 47: "mmss.0", 48: "##0.0E+0", 49: "@",
}
_NS = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
#: How far into a sheet part the search for one cell goes (its first data rows are near
#: the top; a cell not found by then keeps sheetfit's own format).
SCAN_LIMIT = 8 << 20
_CHUNK = 1 << 20


class StyleTable:
    """Number format code of each cell style index, from a styles part."""

    def __init__(self, data: bytes) -> None:
        root = ElementTree.fromstring(data)
        custom = {}
        for nf in root.iter(f"{_NS}numFmt"):
            try:
                custom[int(nf.get("numFmtId", ""))] = nf.get("formatCode", "")
            except ValueError:
                continue
        self.codes: list[str | None] = []
        xfs = root.find(f"{_NS}cellXfs")
        for xf in (xfs if xfs is not None else []):
            try:
                fid = int(xf.get("numFmtId", "0"))
            except ValueError:
                fid = 0
            self.codes.append(custom.get(fid, BUILTIN_FORMATS.get(fid)))

    def code(self, index: int) -> str | None:
        return self.codes[index] if 0 <= index < len(self.codes) else None


def row_style_indices(fh: IO[bytes], row: int) -> dict[int, int]:
    """The ``s`` attribute (0 when absent) of each cell of sheet row ``row`` in a sheet part,
    by column number; empty when the row is not within ``SCAN_LIMIT`` bytes of the top.

    One scan serves every cell of the row (the first data row's columns, a row of new
    rows), so a row far down a large part is read once, not once per column.
    """
    cell = re.compile(rb'<c\b[^>]*\br="([A-Z]{1,3})' + str(row).encode() + rb'"[^>]*>')
    s_attr = re.compile(rb'\bs="(\d+)"')
    tail, seen = b"", 0
    found = None
    while seen < SCAN_LIMIT:
        chunk = fh.read(_CHUNK)
        if not chunk:
            break
        seen += len(chunk)
        buf = tail + chunk
        found = cell.search(buf)
        if found is not None:
            span = buf[found.start():]
            while b"</row>" not in span and seen < SCAN_LIMIT:  # the rest of the row
                more = fh.read(_CHUNK)
                if not more:
                    break
                seen += len(more)
                span += more
            end = span.find(b"</row>")
            out: dict[int, int] = {}
            for m in cell.finditer(span if end < 0 else span[:end]):
                s = s_attr.search(m.group(0))
                out.setdefault(col_index(m.group(1).decode()), int(s.group(1)) if s else 0)
            return out
        tail = buf[-512:]
    return {}


_DATE_TOKENS = re.compile(r"[ymdhsYMDHS]")


def amount_format(code: str | None) -> str | None:
    """``code`` when it shows a plain number (amount, count, percentage), else None.

    General, text (@) and dates or times keep sheetfit's own formats: a date format on a
    fitted cost would show a date.
    """
    if not code or code.strip().lower() == "general" or "@" in code:
        return None
    bare = re.sub(r'"[^"]*"|\[[^\]]*\]|\\.', "", code)  # quoted text, [Red], escapes
    if _DATE_TOKENS.search(bare.replace("E+", "").replace("E-", "").replace("e+", "")):
        return None
    return code if re.search(r"[0#?]", bare) else None
