"""A1-style references: parse a defined name's text into rectangular cell areas."""

from __future__ import annotations

import re
from dataclasses import dataclass

from ..a1 import MAX_COL, MAX_ROW, cell_ref, col_index, col_letter

__all__ = ["Area", "RefError", "parse_areas"]


class RefError(ValueError):
    """The text of a defined name is not a plain reference to cells of this workbook."""


@dataclass(frozen=True)
class Area:
    """A rectangle of cells on one sheet; rows and columns are 1-based and inclusive."""

    sheet: str
    row1: int
    col1: int
    row2: int
    col2: int
    whole_columns: bool = False

    @property
    def n_rows(self) -> int:
        return self.row2 - self.row1 + 1

    @property
    def n_cols(self) -> int:
        return self.col2 - self.col1 + 1

    def first_cell(self) -> str:
        return cell_ref(self.row1, self.col1)

    def with_rows(self, row1: int, row2: int) -> Area:
        """The same columns over other rows."""
        return Area(self.sheet, row1, self.col1, row2, self.col2, False)

    def a1(self) -> str:
        """Address without the sheet, e.g. ``B2:C40`` (or ``B:B`` for whole columns)."""
        if self.whole_columns:
            return f"{col_letter(self.col1)}:{col_letter(self.col2)}"
        a, b = cell_ref(self.row1, self.col1), cell_ref(self.row2, self.col2)
        return a if a == b else f"{a}:{b}"


_SHEET = r"(?:'(?P<qs>(?:[^']|'')+)'|(?P<ps>[^'!,()\s]+))"
_CELL = r"\$?(?P<{c}>[A-Za-z]{{1,3}})\$?(?P<{r}>[0-9]+)"
_AREA_RE = re.compile(
    _SHEET
    + r"!(?:"
    + _CELL.format(c="c1", r="r1")
    + r"(?::"
    + _CELL.format(c="c2", r="r2")
    + r")?|\$?(?P<wc1>[A-Za-z]{1,3}):\$?(?P<wc2>[A-Za-z]{1,3})"
    + r"|\$?(?P<wr1>[0-9]+):\$?(?P<wr2>[0-9]+))$"
)


def _split_top(text: str) -> list[str]:
    """Split on commas that are outside quotes (multi-area names)."""
    parts: list[str] = []
    buf: list[str] = []
    quoted = False
    for ch in text:
        if ch == "'":
            quoted = not quoted
        if ch == "," and not quoted:
            parts.append("".join(buf))
            buf = []
        else:
            buf.append(ch)
    parts.append("".join(buf))
    return [p.strip() for p in parts]


def parse_areas(text: str) -> list[Area]:
    """Areas of a defined name's text, e.g. ``Data!$B$2:$B$40,Data!$D:$D``.

    Raises RefError with a plain reason for anything that is not a reference to
    cells of this workbook: ``#REF!``, another workbook (``[1]Sheet!A1``), a
    constant or a formula such as OFFSET.
    """
    body = text.strip()
    if body.startswith("="):
        body = body[1:].strip()
    if body.startswith("(") and body.endswith(")"):
        body = body[1:-1]
    if "#REF!" in body.upper():
        raise RefError("it points to #REF! (its cells were deleted)")
    if re.search(r"\[[^\]]*\]", body):
        raise RefError("it points into another workbook")
    areas = []
    for part in _split_top(body):
        m = _AREA_RE.match(part)
        if not m:
            raise RefError(f"'{text}' is not a plain cell range of this workbook")
        sheet = m.group("qs").replace("''", "'") if m.group("qs") else m.group("ps")
        if m.group("wc1"):
            c1, c2 = sorted((col_index(m.group("wc1")), col_index(m.group("wc2"))))
            areas.append(Area(sheet, 1, c1, MAX_ROW, c2, True))
        elif m.group("wr1"):
            raise RefError("whole-row references are not supported; name the cells or columns")
        else:
            r1, c1 = int(m.group("r1")), col_index(m.group("c1"))
            r2 = int(m.group("r2")) if m.group("r2") else r1
            c2 = col_index(m.group("c2")) if m.group("c2") else c1
            r1, r2 = sorted((r1, r2))
            c1, c2 = sorted((c1, c2))
            if r2 > MAX_ROW or c2 > MAX_COL or r1 < 1:
                raise RefError(f"'{part}' is outside the sheet")
            areas.append(Area(sheet, r1, c1, r2, c2, r1 == 1 and r2 == MAX_ROW))
    return areas
