"""Our own reading of worksheet XML: a cheap byte scan, and a hardened streaming parse.

The byte scan (UTF-8 parts only, C-speed ``bytes`` searches plus two regular
expressions run only when the part holds errors or formulas) finds what the fast
reader does not report — error cells and formula cells without a saved result — and
measures where the values lie, so the caller can tell whether the fast reader's dense
rectangle would be far larger than the values it holds.

The streaming parse (defusedxml ``iterparse``: no entities, no DTD, any declared
encoding) reads one sheet part cell by cell into a sparse map, with the shared
strings, and is the fallback whenever the fast reader cannot open a book or a sheet,
or would build a rectangle of mostly empty cells. Numbers are numbers (no date
conversion by number format), shared and inline strings are text, booleans are
booleans, errors are error texts.
"""

from __future__ import annotations

import datetime as dt
import re
import zipfile
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from io import BufferedIOBase
from typing import IO, Any, cast

from defusedxml.ElementTree import iterparse

from ..a1 import MAX_COL, col_index

__all__ = ["TEXT_CAP", "Scan", "SparseCells", "read_shared_strings", "scan", "stream_sheet"]

#: Characters of a cell's text that are kept when read: the format's own limit per cell.
TEXT_CAP = 32_767

_REF = re.compile(r"([A-Z]{1,3})([0-9]{1,7})$")
_REF_B = re.compile(rb"\br=\"([A-Z]{1,3})([0-9]{1,7})\"")
_ERROR_CELL = re.compile(
    rb"<(?:\w+:)?c\b(?=[^>]*\bt=\"e\")[^>]*?\br=\"([A-Z]+)([0-9]+)\"[^>]*>"
    rb"(?:.*?<(?:\w+:)?v>([^<]*)</(?:\w+:)?v>)?",
    re.DOTALL,
)
# A cell whose only child is a formula: <c r="B2"><f>A2*2</f></c> or <c ...><f .../></c>.
_UNSAVED_CELL = re.compile(
    rb"<(?:\w+:)?c\b([^>]*)>\s*<(?:\w+:)?f\b(?:[^>]*/>|[^>]*>[^<]*</(?:\w+:)?f>)\s*</(?:\w+:)?c>"
)
_DIMENSION = re.compile(rb"<(?:\w+:)?dimension\b[^>]*\bref=\"([A-Z]{1,3})[0-9]*(?::([A-Z]{1,3}))?")
_COLUMN = re.compile(rb"\br=\"([A-Z]{1,3})[0-9]")
# Markers of a cell holding something: a value, an inline string, a formula.
_CONTENT = (b"</v>", b"</is>", b"</f>", b"<f ")


def _ref(text: str | bytes | None) -> tuple[int, int] | None:
    if text is None:
        return None
    m = _REF.match(text.decode("ascii", "replace") if isinstance(text, bytes) else text)
    if m is None:
        return None
    return int(m.group(2)), col_index(m.group(1))


def utf8(data: bytes | bytearray) -> bool:
    """Whether an XML part is UTF-8 (no BOM of another encoding, no other declaration)."""
    if data[:2] in (b"\xff\xfe", b"\xfe\xff") or data[:4] in (b"\x00\x00\xfe\xff", b"<\x00?\x00"):
        return False
    head = data[:200].lower()
    if head.startswith(b"<?xml"):
        decl = head[: head.find(b"?>")]
        m = re.search(rb"encoding\s*=\s*[\"']([^\"']+)", decl)
        return m is None or m.group(1).replace(b"-", b"") in (b"utf8", b"usascii", b"ascii")
    return True


@dataclass
class Scan:
    """What the byte scan of one UTF-8 sheet part found."""

    errors: dict[tuple[int, int], str]
    unsaved: set[tuple[int, int]]
    #: Cells holding a value (an estimate: counts of value and inline-string ends).
    n_values: int
    #: First and last row holding content, and the width of the columns that may (0 = none).
    first_row: int = 0
    last_row: int = 0
    n_cols: int = 0
    #: Bytes after the last cell with content (empty rows and styled blanks).
    tail: int = 0
    #: Whether the scan could locate the content (plain, unprefixed cells with references).
    located: bool = True

    def rectangle(self) -> int:
        """Cells of the dense rectangle a reader spanning the content would build."""
        if self.last_row == 0:
            return 0
        return (self.last_row - self.first_row + 1) * max(self.n_cols, 1)


def _cell_at(data: bytes | bytearray, pos: int) -> tuple[int, int] | None:
    """The (row, col) of the cell element that encloses byte offset ``pos``."""
    start = data.rfind(b"<c ", 0, pos)
    if start < 0:
        return None
    m = _REF_B.search(data, start, data.find(b">", start) + 1)
    return None if m is None else (int(m.group(2)), col_index(m.group(1)))


def scan(data: bytes | bytearray) -> Scan:
    """Error cells, formula cells without a result, and the extent of the content."""
    errors: dict[tuple[int, int], str] = {}
    if b't="e"' in data:
        errors = {
            (int(m.group(2)), col_index(m.group(1))): (m.group(3) or b"#N/A").decode()
            for m in _ERROR_CELL.finditer(data)
        }
    unsaved: set[tuple[int, int]] = set()
    if b"f>" in data or b"f " in data:
        for m in _UNSAVED_CELL.finditer(data):
            ref = _REF_B.search(m.group(1))
            if ref is not None:
                unsaved.add((int(ref.group(2)), col_index(ref.group(1))))
    n = data.count(b"</v>") + data.count(b"</is>")
    out = Scan(errors, unsaved, n)
    ends = [data.rfind(k) for k in _CONTENT]
    last_pos = max(ends)
    if last_pos < 0:
        return out
    starts = [p for p in (data.find(k) for k in _CONTENT) if p >= 0]
    first, last = _cell_at(data, min(starts)), _cell_at(data, last_pos)
    if first is None or last is None:
        out.located = False
        return out
    out.first_row, out.last_row = first[0], last[0]
    out.tail = len(data) - last_pos
    dim = _DIMENSION.search(data, 0, 4096)
    if dim is not None and dim.group(2) is not None:
        out.n_cols = col_index(dim.group(2)) - col_index(dim.group(1)) + 1
    else:  # no dimension to go by: every column letter that a cell reference uses
        cols = [col_index(c) for c in set(_COLUMN.findall(data))]
        out.n_cols = max(cols) - min(cols) + 1 if cols else MAX_COL
    return out


@dataclass
class SparseCells:
    """Cells of one sheet read by the streaming parse: row -> {col: value}."""

    rows: dict[int, dict[int, Any]] = field(default_factory=dict)
    errors: dict[tuple[int, int], str] = field(default_factory=dict)
    unsaved: set[tuple[int, int]] = field(default_factory=set)


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def _text_of(el: Any) -> str:
    """Text of a string item (<si> or <is>): its <t>, or its runs' <t>s; phonetic runs skipped."""
    parts: list[str] = []
    size = 0
    for child in el:
        name = _local(child.tag)
        if name == "t":
            got = [child.text or ""]
        elif name == "r":
            got = [t.text or "" for t in child if _local(t.tag) == "t"]
        else:
            continue
        parts += got
        size += sum(map(len, got))
        if size > TEXT_CAP:
            break
    return "".join(parts)[:TEXT_CAP]


def read_shared_strings(fh: IO[bytes]) -> list[str]:
    """The shared strings of a book, each capped at TEXT_CAP characters."""
    out: list[str] = []
    holder = None
    for event, el in iterparse(fh, events=("start", "end")):
        if event == "start":
            if holder is None:
                holder = el
            continue
        if _local(el.tag) == "si":
            out.append(_text_of(el))
            if holder is not None:
                holder.clear()
    return out


def raw_value(kind: str, v: str | None, inline: str | None,
              strings: Callable[[], list[str]]) -> Any:
    """A cell's raw value in the shapes the fast reader returns ("" for blank), from its
    type, the text of its ``<v>`` (None when it has none), the text of its inline string
    (None when it has none) and the book's shared strings (asked for only when needed).
    The streaming parse and the column reader (``_columnar``) both read cells by this."""
    if kind == "inlineStr":
        return inline if inline is not None else (v or "")[:TEXT_CAP]
    if v is None:
        return ""
    if kind == "s":
        try:
            return strings()[int(v)]
        except (ValueError, IndexError):
            return ""
    if kind == "b":
        return v.strip() in ("1", "true")
    if kind == "str":
        return v[:TEXT_CAP]
    if kind == "d":
        try:
            return dt.datetime.fromisoformat(v.strip())
        except ValueError:
            return v[:TEXT_CAP]
    if v.strip() == "":
        return ""
    try:
        return float(v)
    except ValueError:
        return v[:TEXT_CAP]


def _cells(fh: IO[bytes], stop_row: int | None) -> Iterator[tuple[int, int, Any]]:
    """(row, col, <c> element) for each cell, clearing the tree behind it."""
    row, col = 0, 0
    data_el = None
    for event, el in iterparse(fh, events=("start", "end")):
        name = _local(el.tag)
        if event == "start":
            if name == "row":
                r = el.get("r")
                row = int(r) if r is not None and r.isdigit() else row + 1
                col = 0
                if stop_row is not None and row > stop_row:
                    return
            elif name == "sheetData":
                data_el = el
            continue
        if name == "c":
            ref = _ref(el.get("r"))
            if ref is not None:
                row, col = ref
            else:
                col += 1
            yield row, col, el
        elif name == "row" and data_el is not None:
            data_el.clear()


def stream_sheet(fh: IO[bytes], strings: list[str], stop_row: int | None = None) -> SparseCells:
    """Every cell of a worksheet part (to ``stop_row`` when given) as a sparse map."""
    out = SparseCells()
    for row, col, el in _cells(fh, stop_row):
        kind = el.get("t", "n")
        v = inline = formula = None
        for child in el:
            name = _local(child.tag)
            if name == "v":
                v = child.text or ""
            elif name == "is":
                inline = child
            elif name == "f":
                formula = child
        if kind == "e":
            out.errors[(row, col)] = (v or "#N/A").strip()
            continue
        if formula is not None and v is None and inline is None:
            out.unsaved.add((row, col))
            continue
        raw = raw_value(kind, v, None if inline is None else _text_of(inline),
                        lambda: strings)
        if raw != "":
            out.rows.setdefault(row, {})[col] = raw
    return out


#: Bytes of a part read at a time into its buffer.
_READ_CHUNK = 1 << 20


def part_bytes(zf: zipfile.ZipFile, member: str) -> bytearray:
    """One part's bytes in a single buffer of its stated size, filled a chunk at a time.

    ``ZipFile.read`` joins the chunks as it goes and so holds a large part about twice
    at its peak (a 285 MB sheet part: about 570 MB); a size that turns out wrong only
    costs a resize.
    """
    size = zf.getinfo(member).file_size
    buf = bytearray(size)
    pos = 0
    with zf.open(member) as part, memoryview(buf) as view:
        fh = cast(BufferedIOBase, part)  # a ZipExtFile
        while pos < size:
            got = fh.readinto(view[pos:pos + _READ_CHUNK])
            if not got:
                break
            pos += got
        rest = fh.read() if pos == size else b""
    if pos < size:
        del buf[pos:]
    buf += rest
    return buf
