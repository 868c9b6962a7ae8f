"""Our own column reader of a worksheet part: a few megabytes of XML at a time, every cell
located by vectorised byte arithmetic, the numbers parsed in bulk, nothing held per cell.

A data sheet of a million rows and six columns is about 200 MB of XML. Holding it, or a
reader's list of cell objects (about 70 bytes a cell), costs more than the numbers
themselves (8 bytes a cell). This reader inflates the part a chunk at a time, cut after a
``</row>``, and in each chunk finds with numpy:

- the cell start tags (``<c`` followed by a space), each one's end (the next ``>``) and
  its ``r`` and ``t`` attributes (an ``="`` inside the start tag, after a space and the
  attribute's letter);
- the column letters and row digits of ``r``, turned into numbers arithmetically;
- the ``<v>``…``</v>``, ``<f`` and ``<is>`` children, given to the cell that encloses them;
- the numbers of all plain number cells at once, by blanking every byte outside their
  ``<v>`` and parsing the rest with numpy's text parser (correctly rounded, as
  ``float``; checked against ``float`` in tests/test_values_columnar.py).

Cells holding anything but a number (shared and inline strings, logicals, errors,
formula text results, ISO dates) are few in a data sheet and are read one by one, exactly
as the streaming parse (``_sheetxml.stream_sheet``) reads them: numbers are numbers (no
date conversion by number format), errors go to ``errors``, a formula cell without a
saved result to ``unsaved``.

The store keeps, per column, the rows and numbers of its number cells (the rows only
when they are not one unbroken run) and a map of its other cells, so a stray value in
row 1,048,576 costs one entry, not a rectangle.

Anything outside the plain shape — a prefixed namespace, a cell without an ``r``
reference, cells out of order, comments or processing instructions in the sheet data,
an unmatched ``<v>`` — raises :class:`Irregular`, and the caller reads the part another
way (the fast or the streaming reader). Nothing is guessed.
"""

from __future__ import annotations

import itertools
import re
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import IO, Any

import numpy as np

from ._sheetxml import TEXT_CAP, raw_value
from .columns import Mixed

__all__ = ["CHUNK", "Columnar", "Irregular", "Read", "located", "read_columns", "shared_strings",
           "sheet_chunks"]

#: Bytes of inflated XML parsed at a time (the chunk is cut after its last ``</row>``).
CHUNK = 2 << 20
#: Bytes before the sheet data (column widths, views) beyond which the part is not plain.
_HEAD_LIMIT = 64 << 20

_LT, _GT, _EQ, _QUOTE, _SPACE, _SLASH = (ord(c) for c in '<>=" /')
_A, _Z, _0, _9 = ord("A"), ord("Z"), ord("0"), ord("9")
#: Row references have at most seven digits (1,048,576), column references three letters.
_ROW_DIGITS, _COL_LETTERS = 7, 3
_ENTITY = re.compile(r"&(#x[0-9A-Fa-f]+|#[0-9]+|lt|gt|amp|quot|apos);")
_NAMED = {"lt": "<", "gt": ">", "amp": "&", "quot": '"', "apos": "'"}
_PLAIN_INLINE = re.compile(rb'<is><t(?: xml:space="preserve")?>([^<]*)</t></is>')
_TEXT_RUN = re.compile(rb"<t(?:\s[^>]*)?>([^<]*)</t>|<t\s*/>")
_RUN_OR_PHONETIC = re.compile(rb"<rPh\b.*?</rPh>", re.DOTALL)


class Irregular(Exception):
    """The part is not in the plain shape this reader takes; read it another way."""


def _unescape(raw: bytes | bytearray) -> str:
    """Element text as an XML parser gives it: line ends normalised, entities replaced."""
    text = raw.decode("utf-8").replace("\r\n", "\n").replace("\r", "\n")
    if "&" not in text:
        return text

    def one(m: re.Match[str]) -> str:
        name = m.group(1)
        if name[0] == "#":
            return chr(int("0x" + name[2:], 0) if name[1] in "xX" else int(name[1:]))
        return _NAMED[name]

    out = _ENTITY.sub(one, text)
    if "&" in _ENTITY.sub("", text):
        raise Irregular("an entity this reader does not know")
    return out


class Columnar:
    """A sheet's values, column by column: the numbers as arrays, other values in maps.

    Gives exactly the raw values the other readers give (``raw``, ``column``,
    ``last_row``; tests/test_values.py compares them cell by cell).
    """

    def __init__(self, columns: dict[int, _Column]) -> None:
        self.columns = columns

    def raw(self, row: int, col: int) -> Any:
        c = self.columns.get(col)
        return "" if c is None else c.raw(row)

    def column(self, col: int, row1: int, row2: int) -> list[Any] | np.ndarray | Mixed:
        """Raw values of rows row1..row2 ("" where no cell holds one); an unbroken run of
        plain numbers comes back as a read-only float64 view."""
        c = self.columns.get(col)
        if c is None:
            return [""] * (row2 - row1 + 1)
        return c.column(row1, row2)

    def last_row(self, col1: int, col2: int) -> int:
        return max((c.last_row() for k, c in self.columns.items() if col1 <= k <= col2),
                   default=0)


@dataclass
class _Column:
    """One column: its number cells (rows ascending) and its other cells by row."""

    numbers: np.ndarray
    #: Rows of ``numbers``; None when they are the unbroken run first, first + 1, ...
    rows: np.ndarray | None
    first: int
    others: dict[int, Any]

    def _span(self, row1: int, row2: int) -> tuple[int, int]:
        """Index range of the number cells in rows row1..row2."""
        if self.rows is None:
            lo = min(max(row1 - self.first, 0), len(self.numbers))
            hi = min(max(row2 - self.first + 1, 0), len(self.numbers))
            return lo, max(lo, hi)
        return (int(np.searchsorted(self.rows, row1, "left")),
                int(np.searchsorted(self.rows, row2, "right")))

    def _row_of(self, i: int) -> int:
        return self.first + i if self.rows is None else int(self.rows[i])

    def raw(self, row: int) -> Any:
        found = self.others.get(row)
        if found is not None:
            return found
        lo, hi = self._span(row, row)
        return float(self.numbers[lo]) if hi > lo else ""

    def column(self, row1: int, row2: int) -> np.ndarray | Mixed:
        n = row2 - row1 + 1
        lo, hi = self._span(row1, row2)
        inside = ([r for r in self.others if row1 <= r <= row2]
                  if len(self.others) < n else
                  [r for r in range(row1, row2 + 1) if r in self.others])
        if hi - lo == n and not inside:  # every row a number: a view, no copy
            view = self.numbers[lo:hi].view()
            view.flags.writeable = False
            return view
        number = np.full(n, np.nan)
        has = np.zeros(n, dtype=bool)
        if hi > lo:
            at = (slice(self.first + lo - row1, self.first + hi - row1) if self.rows is None
                  else self.rows[lo:hi] - row1)
            number[at] = self.numbers[lo:hi]
            has[at] = True
        return Mixed(number, has, {r - row1: self.others[r] for r in inside})

    def last_row(self) -> int:
        last = self._row_of(len(self.numbers) - 1) if len(self.numbers) else 0
        return max(last, max(self.others, default=0))


@dataclass
class Read:
    """What the column reader found in one sheet part."""

    cells: Columnar
    errors: dict[tuple[int, int], str] = field(default_factory=dict)
    unsaved: set[tuple[int, int]] = field(default_factory=set)


def _starts(a: np.ndarray, lt: np.ndarray, second: int, third: tuple[int, ...]) -> np.ndarray:
    """Positions of ``<`` followed by ``second`` and then one of ``third``."""
    n = len(a)
    ok = a[np.minimum(lt + 1, n - 1)] == second
    nxt = a[np.minimum(lt + 2, n - 1)]
    third_ok = np.zeros(len(lt), dtype=bool)
    for t in third:
        third_ok |= nxt == t
    return lt[ok & third_ok & (lt + 2 < n)]


def _owner(cells: np.ndarray, tag_ends: np.ndarray, pos: np.ndarray, inside_tag: bool
           ) -> np.ndarray:
    """Index of the cell each position belongs to (-1 when none).

    ``inside_tag``: the position must lie within the cell's start tag (an attribute),
    else after it (a child).
    """
    k = np.searchsorted(cells, pos, "right") - 1
    ok = k >= 0
    kk = np.where(ok, k, 0)
    if inside_tag:
        ok &= pos < tag_ends[kk]
    else:
        ok &= pos > tag_ends[kk]
    return np.where(ok, k, -1)


def _gather(a: np.ndarray, start: np.ndarray, width: int) -> np.ndarray:
    """``width`` bytes from each start (0 past the end), as an (n, width) array."""
    idx = start[:, None] + np.arange(width)[None, :]
    out = np.zeros(idx.shape, dtype=np.uint8)
    ok = idx < len(a)
    out[ok] = a[idx[ok]]
    return out


def _refs(a: np.ndarray, r_at: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Row and column numbers of the references starting at ``r_at`` (just after ``r="``)."""
    head = _gather(a, r_at, _COL_LETTERS + _ROW_DIGITS + 1)
    letter = (head >= _A) & (head <= _Z)
    n_letters = np.argmin(letter, axis=1)  # letters come first
    digit = (head >= _0) & (head <= _9)
    col = np.zeros(len(r_at), dtype=np.int64)
    for k in range(_COL_LETTERS):
        use = n_letters > k
        col = np.where(use, col * 26 + (head[:, k].astype(np.int64) - _A + 1), col)
    row = np.zeros(len(r_at), dtype=np.int64)
    n_digits = np.zeros(len(r_at), dtype=np.int64)
    width = head.shape[1]
    ends = np.full(len(r_at), -1, dtype=np.int64)
    for k in range(width):
        after_letters = k >= n_letters
        is_digit = digit[:, k] & after_letters & (ends < 0)
        row = np.where(is_digit, row * 10 + (head[:, k].astype(np.int64) - _0), row)
        n_digits += is_digit
        closing = after_letters & ~digit[:, k] & (ends < 0)
        ends = np.where(closing, k, ends)
    good = ((n_letters >= 1) & (n_letters <= _COL_LETTERS) & (n_digits >= 1)
            & (n_digits <= _ROW_DIGITS) & (ends == n_letters + n_digits))
    closing_quote = head[np.arange(len(r_at)), np.clip(ends, 0, width - 1)] == _QUOTE
    if not (good & closing_quote).all():
        raise Irregular("a cell reference this reader does not take")
    return row, col


def _attribute(a: np.ndarray, eq: np.ndarray, cells: np.ndarray, tag_ends: np.ndarray,
               letter: int) -> np.ndarray:
    """Per cell, the position just after ``<letter>="`` in its start tag (-1 if absent)."""
    n = len(a)
    named = eq[(a[eq - 1] == letter) & (a[np.maximum(eq - 2, 0)] == _SPACE)
               & (a[np.minimum(eq + 1, n - 1)] == _QUOTE)]
    owner = _owner(cells, tag_ends, named, inside_tag=True)
    named, owner = named[owner >= 0], owner[owner >= 0]
    if (np.diff(owner) == 0).any():  # positions ascend, so owners do: repeats are adjacent
        raise Irregular("an attribute given twice")
    out = np.full(len(cells), -1, dtype=np.int64)
    out[owner] = named + 2
    return out


def _types(a: np.ndarray, t_at: np.ndarray) -> np.ndarray:
    """Cell type codes from the ``t`` attribute: b"n" (absent or "n"), b"s", b"b", ..."""
    kinds = np.full(len(t_at), b"n", dtype="S9")
    has = np.flatnonzero(t_at >= 0)
    if len(has):
        head = _gather(a, t_at[has], 10)
        close = np.argmax(head == _QUOTE, axis=1)
        if not (head[np.arange(len(has)), close] == _QUOTE).all():
            raise Irregular("a cell type this reader does not take")
        words = [bytes(h[:k]) for h, k in zip(head, close.tolist(), strict=True)]
        kinds[has] = words
    return kinds


@dataclass
class _Chunk:
    """Positions of one chunk's cells and of their parts."""

    a: np.ndarray
    cells: np.ndarray
    tag_ends: np.ndarray
    rows: np.ndarray
    cols: np.ndarray
    types: np.ndarray
    v_start: np.ndarray  # per cell: first byte of the <v> text, -1 when none
    v_end: np.ndarray
    has_f: np.ndarray
    f_at: np.ndarray  # per cell: position of its <f, -1 when none
    is_at: np.ndarray  # per cell: position of <is>, -1 when none
    empty: np.ndarray  # per cell: self-closing start tag


def _locate(buf: bytes) -> _Chunk | None:
    """Find every cell of one chunk of sheet data; None when it holds none."""
    a = np.frombuffer(buf, dtype=np.uint8)
    n = len(a)
    lt = np.flatnonzero(a == _LT)
    if not len(lt):
        return None
    after = a[np.minimum(lt + 1, n - 1)]
    if ((after == ord("!")) | (after == ord("?"))).any():
        raise Irregular("comments, CDATA or processing instructions in the sheet data")
    cells = _starts(a, lt, ord("c"), (_SPACE, _GT, _SLASH))
    if not len(cells):
        return None
    gt = np.flatnonzero(a == _GT)
    k = np.searchsorted(gt, cells)
    if (k >= len(gt)).any():
        raise Irregular("a cell cut off")
    tag_ends = gt[k]
    empty = a[tag_ends - 1] == _SLASH
    eq = np.flatnonzero(a == _EQ)
    eq = eq[eq >= 2]
    r_at = _attribute(a, eq, cells, tag_ends, ord("r"))
    if (r_at < 0).any():
        raise Irregular("a cell without a reference")
    rows, cols = _refs(a, r_at)
    types = _types(a, _attribute(a, eq, cells, tag_ends, ord("t")))
    v_open = _starts(a, lt, ord("v"), (_GT,))
    v_close = lt[(after == _SLASH) & (a[np.minimum(lt + 2, n - 1)] == ord("v"))
                 & (a[np.minimum(lt + 3, n - 1)] == _GT)]
    if len(v_open) != len(v_close) or (len(v_open) and (
            (v_close <= v_open).any() or (v_open[1:] <= v_close[:-1]).any())):
        raise Irregular("unmatched value tags")
    v_start = np.full(len(cells), -1, dtype=np.int64)
    v_end = np.full(len(cells), -1, dtype=np.int64)
    if len(v_open):
        owner = _owner(cells, tag_ends, v_open, inside_tag=False)
        if (owner < 0).any() or (np.diff(owner) == 0).any() or empty[owner].any():
            raise Irregular("a value outside a cell, or two in one")
        v_start[owner], v_end[owner] = v_open + 3, v_close
    has_f = np.zeros(len(cells), dtype=bool)
    f_at = np.full(len(cells), -1, dtype=np.int64)
    f_open = _starts(a, lt, ord("f"), (_SPACE, _GT, _SLASH))
    if len(f_open):
        owner = _owner(cells, tag_ends, f_open, inside_tag=False)
        keep = owner >= 0
        has_f[owner[keep]] = True
        f_at[owner[keep]] = f_open[keep]
    is_at = np.full(len(cells), -1, dtype=np.int64)
    is_open = _starts(a, lt, ord("i"), (ord("s"),))
    plain_is = a[np.minimum(is_open + 3, n - 1)] == _GT
    if not plain_is.all():  # <is …> or <isX: not a shape read here
        raise Irregular("an inline string tag with attributes")

    if len(is_open):
        owner = _owner(cells, tag_ends, is_open, inside_tag=False)
        keep = owner >= 0
        is_at[owner[keep]] = is_open[keep]
    return _Chunk(a, cells, tag_ends, rows, cols, types, v_start, v_end, has_f, f_at, is_at,
                  empty)


def _numbers(ch: _Chunk, which: np.ndarray) -> np.ndarray | None:
    """The numbers in the ``<v>`` of cells ``which``, parsed at once; None when some value
    is not a plain number (blank, text) and the cells must be read one by one."""
    starts, ends = ch.v_start[which], ch.v_end[which]
    mark = np.zeros(len(ch.a) + 1, dtype=np.int8)
    mark[starts] += 1
    mark[ends] -= 1
    inside = np.cumsum(mark[:-1], dtype=np.int8).astype(bool)
    text = np.where(inside, ch.a, np.uint8(_SPACE)).tobytes()
    try:
        out = np.fromstring(text, dtype=np.float64, sep=" ")  # type: ignore[call-overload]
    except ValueError:
        return None
    return out if len(out) == len(which) else None


def _one_value(kind: bytes, v: bytes | None, inline: str | None,
               strings: Callable[[], list[str]]) -> Any:
    """One cell's raw value, as the streaming parse gives it (``_sheetxml.raw_value``)."""
    return raw_value(kind.decode("ascii"), None if v is None else _unescape(v), inline, strings)


def _inline_text(buf: bytes, at: int, end: int) -> str:
    """The text of an ``<is>`` element starting at ``at`` (its cell ends before ``end``)."""
    close = buf.find(b"</is>", at, end)
    if close < 0:
        raise Irregular("an inline string without its end")
    item = buf[at:close + 5]
    m = _PLAIN_INLINE.fullmatch(item)
    if m is not None:
        return _unescape(m.group(1))[:TEXT_CAP]
    body = _RUN_OR_PHONETIC.sub(b"", item)
    return "".join(_unescape(t.group(1) or b"") for t in _TEXT_RUN.finditer(body))[:TEXT_CAP]


_SI = re.compile(rb"<si>(.*?)</si>|<si/>", re.DOTALL)
_SIMPLE_T = re.compile(rb'<t(?: xml:space="preserve")?>([^<]*)</t>')


def shared_strings(data: bytes | bytearray) -> list[str]:
    """The shared strings of a UTF-8 ``sharedStrings`` part, each capped at TEXT_CAP, read
    with byte searches: what ``_sheetxml.read_shared_strings`` (defusedxml iterparse)
    gives, about five times faster. Raises :class:`Irregular` for anything outside the
    plain shape (prefixes, comments, CDATA, processing instructions, unknown entities)."""
    at = data.find(b"?>") + 2 if data.startswith(b"<?xml") else 0  # past the declaration
    if any(data.find(mark, at) >= 0 for mark in (b"<!", b"<?", b":si", b":t>")):
        raise Irregular("shared strings not in the plain shape")
    items = _SI.findall(data, at)
    if len(items) != data.count(b"<si>", at) + data.count(b"<si/>", at):
        raise Irregular("a shared string item this reader does not take")
    out = []
    for item in items:
        m = _SIMPLE_T.fullmatch(item)
        if m is not None:
            out.append(_unescape(m.group(1))[:TEXT_CAP])
            continue
        plain = _RUN_OR_PHONETIC.sub(b"", item)
        out.append("".join(_unescape(t.group(1) or b"")
                           for t in _TEXT_RUN.finditer(plain))[:TEXT_CAP])
    return out


class _Builder:
    """Numbers and other values by column, gathered chunk by chunk."""

    def __init__(self) -> None:
        #: Per column, per chunk: its rows, or (first, count) for an unbroken run.
        self.rows: dict[int, list[np.ndarray | tuple[int, int]]] = {}
        self.numbers: dict[int, list[np.ndarray]] = {}
        self.others: dict[int, dict[int, Any]] = {}

    def add_numbers(self, rows: np.ndarray, cols: np.ndarray, values: np.ndarray) -> None:
        if not len(rows):
            return
        order = np.argsort(cols, kind="stable")
        rows, cols, values = rows[order], cols[order], values[order]
        cuts = np.flatnonzero(np.diff(cols)) + 1
        for r, c, v in zip(np.split(rows, cuts), np.split(cols, cuts), np.split(values, cuts),
                           strict=True):
            col = int(c[0])
            first = int(r[0])
            run = int(r[-1]) - first + 1 == len(r)  # ascending: an unbroken run
            self.rows.setdefault(col, []).append((first, len(r)) if run else r.astype(np.int32))
            self.numbers.setdefault(col, []).append(v.copy())  # its own: freed column by column

    def add_other(self, row: int, col: int, value: Any) -> None:
        self.others.setdefault(col, {})[row] = value

    def build(self) -> Columnar:
        columns: dict[int, _Column] = {}
        for col in set(self.numbers) | set(self.others):
            parts = self.rows.pop(col, [])
            nparts = self.numbers.pop(col, [])
            numbers = (nparts[0] if len(nparts) == 1
                       else np.concatenate(nparts) if nparts else np.zeros(0))
            del nparts
            columns[col] = _Column(numbers, *_rows(parts), self.others.get(col, {}))
        return Columnar(columns)


def _rows(parts: list[np.ndarray | tuple[int, int]]) -> tuple[np.ndarray | None, int]:
    """(rows, first) of a column's number cells from its chunks' rows: rows None when they
    make one unbroken run from ``first``."""
    if not parts:
        return None, 0
    runs = [p for p in parts if isinstance(p, tuple)]
    if len(runs) == len(parts) and all(a[0] + a[1] == b[0] for a, b in
                                       itertools.pairwise(runs)):
        return None, runs[0][0]
    rows = np.concatenate([np.arange(p[0], p[0] + p[1], dtype=np.int32)
                           if isinstance(p, tuple) else p for p in parts])
    first = int(rows[0])
    return (None if int(rows[-1]) - first + 1 == len(rows) else rows), first


def _shared_texts(ch: _Chunk, out: _Builder, strings: Callable[[], list[str]]) -> np.ndarray:
    """Read the cells of one chunk that refer to a shared string, in bulk: their indices
    parsed at once, the texts looked up in one pass. Returns the mask of the cells read
    (none when some index is not a whole number within the table: then all go one by one,
    as ``raw_value`` reads them)."""
    done = np.zeros(len(ch.cells), dtype=bool)
    which = np.flatnonzero((ch.types == b"s") & (ch.v_end > ch.v_start) & (ch.is_at < 0))
    if not len(which):
        return done
    index = _numbers(ch, which)
    table = strings()
    if index is None or not (np.all(index == np.floor(index)) and np.all(index >= 0)
                             and np.all(index < len(table))):
        return done
    texts = [table[i] for i in index.astype(np.int64).tolist()]
    rows, cols = ch.rows[which].tolist(), ch.cols[which].tolist()
    for row, col, text in zip(rows, cols, texts, strict=True):
        if text != "":
            out.add_other(row, col, text)
    done[which] = True
    return done


def _chunk(buf: bytes, ch: _Chunk, out: _Builder, read: Read,
           strings: Callable[[], list[str]]) -> None:
    """Read the located cells of one chunk into ``out`` and ``read``."""
    plain = (ch.types == b"n") & (ch.v_end > ch.v_start) & (ch.is_at < 0)
    which = np.flatnonzero(plain)
    values = _numbers(ch, which) if len(which) else np.zeros(0)
    if values is None:  # some value is not a plain number: those cells one by one below
        plain[:] = False
        which = which[:0]
        values = np.zeros(0)
    else:
        nan = np.isnan(values)
        if nan.any():  # a nan is kept as a value of its own, as the other readers keep it
            plain[which[nan]] = False
            which, values = which[~nan], values[~nan]
    out.add_numbers(ch.rows[which], ch.cols[which], values)
    plain |= _shared_texts(ch, out, strings)
    rest = np.flatnonzero(~plain & (~ch.empty | (ch.types == b"e")))  # <c t="e"/> is #N/A
    for i in rest.tolist():
        row, col = int(ch.rows[i]), int(ch.cols[i])
        kind = bytes(ch.types[i])
        v = buf[ch.v_start[i]:ch.v_end[i]] if ch.v_start[i] >= 0 else None
        end = int(ch.cells[i + 1]) if i + 1 < len(ch.cells) else len(buf)
        inline = _inline_text(buf, int(ch.is_at[i]), end) if ch.is_at[i] >= 0 else None
        if kind == b"e":
            read.errors[(row, col)] = _unescape(v).strip() if v else "#N/A"
            continue
        if ch.has_f[i] and v is None and inline is None:
            read.unsaved.add((row, col))
            continue
        raw = _one_value(kind, v, inline, strings)
        if raw != "":
            out.add_other(row, col, raw)


def sheet_chunks(fh: IO[bytes], chunk: int | None = None) -> Iterator[bytes]:
    """The sheet data of one UTF-8 worksheet part, a chunk at a time, each cut after a
    ``</row>`` (so no cell is split). Raises :class:`Irregular` when there is no plain,
    unprefixed sheet data. ``chunk``: bytes read at a time (``CHUNK`` when not given)."""
    chunk = chunk or CHUNK
    pending = b""
    started = finished = False
    while not finished:
        got = fh.read(chunk)
        data = pending + got if pending else got
        if not started:
            at = data.find(b"<sheetData")
            if at < 0:
                if not got or len(data) > _HEAD_LIMIT:
                    raise Irregular("no unprefixed sheet data")
                pending = data
                continue
            close = data.find(b">", at)
            if close < 0:
                if not got:
                    raise Irregular("the sheet data tag has no end")
                pending = data
                continue
            if data[close - 1] == _SLASH:  # <sheetData/>
                return
            data = data[close + 1:]
            started = True
        end = data.find(b"</sheetData>")
        if end >= 0:
            body, pending, finished = data[:end], b"", True
        elif not got:
            raise Irregular("the sheet data has no end")
        else:
            cut = data.rfind(b"</row>")
            if cut < 0:
                pending = data
                continue
            body, pending = data[:cut + 6], data[cut + 6:]
        yield body


def located(fh: IO[bytes], chunk: int | None = None) -> Iterator[tuple[bytes, _Chunk]]:
    """Each chunk of sheet data with its cells located (``_locate``), cells checked to
    come in order, each once."""
    last = 0
    for body in sheet_chunks(fh, chunk):
        ch = _locate(body)
        if ch is None:
            continue
        order = ch.rows * (1 << 16) + ch.cols
        if (np.diff(order) <= 0).any() or order[0] <= last:
            raise Irregular("cells out of order or given twice")
        last = int(order[-1])
        yield body, ch


def read_columns(fh: IO[bytes], strings: Callable[[], list[str]],
                 chunk: int | None = None) -> Read:
    """Every cell of one UTF-8 worksheet part, as column arrays and maps.

    ``strings`` gives the book's shared strings (called only if a cell refers to one).
    Raises :class:`Irregular` when the part is not in the shape this reader takes.
    """
    out, read = _Builder(), Read(Columnar({}))
    for body, ch in located(fh, chunk):
        _chunk(body, ch, out, read, strings)
    read.cells = out.build()
    return read
