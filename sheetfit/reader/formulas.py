"""Which cells of a worksheet hold something, whether as a formula, and where the plain
references among the formulas point.

``sheetfit check`` needs to know, for an owned sheet, whether a cell that sheetfit wrote
as a formula still holds one (a typed constant over a formula is a hand edit), whether a
formula has its result stored, which cells hold content sheetfit did not write, and, for
every formula that is a plain reference to one cell (``=Data!B5``), that cell. The values
themselves come from ``values.BookValues``.

A result sheet of a 200,000-row model holds millions of cells: they are kept column by
column as arrays (:class:`SheetKinds`), never as one object per cell. A UTF-8 part is
located a chunk at a time by the column reader's byte arithmetic (``_columnar.located``);
only each formula's text is looked at one by one, to tell plain references. Any other
part, or one the column reader does not take, goes through the same hardened streaming
parse as the values reader.
"""

from __future__ import annotations

import re
import zipfile
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import IO, NamedTuple
from xml.sax.saxutils import unescape

import numpy as np

from ..a1 import col_index
from ._columnar import Irregular, located
from ._sheetxml import _cells, _local, utf8

__all__ = ["CellKind", "PlainRefs", "SheetKinds", "plain_ref", "read_cell_kinds"]


class CellKind(NamedTuple):
    """A cell holding something: whether it holds a formula and whether a result is stored
    with it (an empty ``<v></v>`` is none, unless the result is typed as text: an empty
    text)."""

    formula: bool
    result: bool


#: A formula that is a plain reference to one cell of a sheet: ``Data!B5``, ``'My data'!$C$7``.
_PLAIN_REF = re.compile(
    r"^=?(?:'(?P<qs>(?:[^']|'')+)'|(?P<ps>[^'!,()\s]+))!\$?(?P<c>[A-Z]{1,3})\$?(?P<r>[0-9]+)$")
_ENTITIES = {"&quot;": '"', "&apos;": "'"}


def plain_ref(formula: str) -> tuple[str, int, int] | None:
    """(sheet, row, column) of a formula that is a plain reference to one cell, else None."""
    m = _PLAIN_REF.match(formula.strip())
    if m is None:
        return None
    sheet = m.group("qs").replace("''", "'") if m.group("qs") else m.group("ps")
    return sheet, int(m.group("r")), col_index(m.group("c"))


class PlainRefs:
    """Formula cells that are plain references: where they are (``rows``, ``cols``) and the
    cell each names (``sheet_names[sheets[i]]``, ``to_rows``, ``to_cols``), as int arrays,
    gathered a chunk at a time."""

    def __init__(self) -> None:
        self.sheet_names: list[str] = []
        self._ids: dict[str, int] = {}
        self._parts: list[tuple[np.ndarray, ...]] = []
        self._open: tuple[list[int], ...] = ([], [], [], [], [])
        self._arrays: tuple[np.ndarray, ...] | None = None

    def add(self, row: int, col: int, formula: str) -> None:
        ref = plain_ref(formula)
        if ref is not None:
            self.extend([row], [col], [ref[0]], [ref[1]], [ref[2]])

    def extend(self, rows: list[int], cols: list[int], sheets: list[str],
               to_rows: list[int], to_cols: list[int]) -> None:
        """References, given as lists of equal length (sheets by name)."""
        for sheet in dict.fromkeys(sheets):
            if sheet not in self._ids:
                self._ids[sheet] = len(self.sheet_names)
                self.sheet_names.append(sheet)
        for part, got in zip(self._open, (rows, cols, map(self._ids.__getitem__, sheets),
                                          to_rows, to_cols), strict=True):
            part.extend(got)

    def close_chunk(self) -> None:
        """Turn the references gathered so far into arrays (lists never grow long)."""
        if self._open[0]:
            self._parts.append(tuple(np.array(p, dtype=np.int32) for p in self._open))
            self._open = ([], [], [], [], [])
            self._arrays = None

    def _all(self) -> tuple[np.ndarray, ...]:
        self.close_chunk()
        if self._arrays is None:
            self._arrays = tuple(
                np.concatenate([p[k] for p in self._parts]) if self._parts
                else np.zeros(0, dtype=np.int32) for k in range(5))
            self._parts = [self._arrays] if self._parts else []
        return self._arrays

    rows = property(lambda self: self._all()[0], doc="Row of each referring cell.")
    cols = property(lambda self: self._all()[1], doc="Column of each referring cell.")
    sheets = property(lambda self: self._all()[2], doc="Index into sheet_names of each.")
    to_rows = property(lambda self: self._all()[3], doc="Row of each cell referred to.")
    to_cols = property(lambda self: self._all()[4], doc="Column of each cell referred to.")

    def listed(self) -> list[tuple[int, int, str, int, int]]:
        """Every reference as (row, col, sheet, to_row, to_col), in the order found."""
        r, c, s, tr, tc = (a.tolist() for a in self._all())
        return [(a, b, self.sheet_names[k], d, e) for a, b, k, d, e in zip(r, c, s, tr, tc,
                                                                          strict=True)]

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, PlainRefs):
            return NotImplemented
        return self.listed() == other.listed()

    __hash__ = None  # type: ignore[assignment]


@dataclass
class _KindColumn:
    rows: np.ndarray  # int32, ascending: the cells of the column that hold something
    formula: np.ndarray  # bool
    result: np.ndarray  # bool


class SheetKinds:
    """The cells of one worksheet that hold a value or a formula, column by column."""

    def __init__(self, columns: dict[int, _KindColumn], refs: PlainRefs) -> None:
        self.columns = columns
        self.refs = refs

    def __len__(self) -> int:
        return sum(len(c.rows) for c in self.columns.values())

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, SheetKinds):
            return NotImplemented
        return self.cells() == other.cells() and self.refs == other.refs

    __hash__ = None  # type: ignore[assignment]

    def get(self, pos: tuple[int, int]) -> CellKind | None:
        """The kind of the cell at (row, col), None when it holds nothing."""
        c = self.columns.get(pos[1])
        if c is None:
            return None
        i = int(np.searchsorted(c.rows, c.rows.dtype.type(pos[0])))  # no cast of the rows
        if i == len(c.rows) or c.rows[i] != pos[0]:
            return None
        return CellKind(bool(c.formula[i]), bool(c.result[i]))

    def cells(self) -> dict[tuple[int, int], CellKind]:
        """Every cell as a map (small sheets and tests only)."""
        return {(int(r), col): CellKind(bool(f), bool(v)) for col, c in self.columns.items()
                for r, f, v in zip(c.rows, c.formula, c.result, strict=True)}

    def column(self, col: int, row1: int, row2: int) -> tuple[np.ndarray, np.ndarray,
                                                                np.ndarray]:
        """(holds something, holds a formula, has a stored result) of rows row1..row2."""
        n = row2 - row1 + 1
        held, formula, result = (np.zeros(n, dtype=bool) for _ in range(3))
        c = self.columns.get(col)
        if c is not None:
            lo, hi = np.searchsorted(c.rows, np.array([row1, row2 + 1], dtype=c.rows.dtype))
            at = c.rows[lo:hi] - row1
            held[at], formula[at], result[at] = True, c.formula[lo:hi], c.result[lo:hi]
        return held, formula, result

    def outside(self, spans: dict[int, list[tuple[int, int]]]) -> Iterator[tuple[int, int]]:
        """(row, col) of the cells outside the given row spans of their column, in row
        order."""
        out: list[tuple[int, int]] = []
        for col, c in self.columns.items():
            keep = np.ones(len(c.rows), dtype=bool)
            for a, b in spans.get(col, ()):
                keep &= (c.rows < a) | (c.rows > b)
            out += [(int(r), col) for r in c.rows[keep]]
        return iter(sorted(out))

    def unsaved(self) -> int:
        """Formula cells stored without a result."""
        return sum(int(np.count_nonzero(c.formula & ~c.result)) for c in self.columns.values())


class _Gather:
    """Cells gathered in document order, then split into columns."""

    def __init__(self) -> None:
        self.rows: list[np.ndarray] = []
        self.cols: list[np.ndarray] = []
        self.formula: list[np.ndarray] = []
        self.result: list[np.ndarray] = []
        self.refs = PlainRefs()

    def add(self, rows: np.ndarray, cols: np.ndarray, formula: np.ndarray,
            result: np.ndarray) -> None:
        keep = formula | result
        self.rows.append(rows[keep].astype(np.int32))  # rows and columns fit 32 bits
        self.cols.append(cols[keep].astype(np.int32))
        self.formula.append(formula[keep])
        self.result.append(result[keep])

    def build(self) -> SheetKinds:
        if not self.rows:
            return SheetKinds({}, self.refs)
        rows, cols = np.concatenate(self.rows), np.concatenate(self.cols)
        formula, result = np.concatenate(self.formula), np.concatenate(self.result)
        order = np.lexsort((rows, cols))  # by column, then row
        rows, cols, formula, result = rows[order], cols[order], formula[order], result[order]
        cuts = np.flatnonzero(np.diff(cols)) + 1
        columns = {int(c[0]): _KindColumn(r, f, v) for r, c, f, v in zip(
            np.split(rows, cuts), np.split(cols, cuts), np.split(formula, cuts),
            np.split(result, cuts), strict=True) if len(c)}
        return SheetKinds(columns, self.refs)


def read_cell_kinds(path: Path, part: str) -> SheetKinds:
    """Every cell of the worksheet ``part`` that holds a value or a formula."""
    with zipfile.ZipFile(path) as zf:
        member = {n.lower(): n for n in zf.namelist()}[part.lower()]
        with zf.open(member) as fh:
            head = fh.read(256)
        if utf8(head):
            try:
                with zf.open(member) as fh:
                    return _scan(fh)
            except (Irregular, UnicodeDecodeError, ValueError):
                pass
        with zf.open(member) as fh:
            return _parse(fh)


def _formula_text(buf: bytes, at: int, end: int) -> str:
    """The text of the ``<f`` element starting at ``at`` ("" for an empty or self-closing
    one: a shared formula's follower), entities replaced."""
    close = buf.find(b">", at, end)
    if close < 0:
        raise Irregular("a formula tag without its end")
    if buf[close - 1] == ord("/"):
        return ""
    stop = buf.find(b"<", close + 1, end)
    if stop < 0 or not buf.startswith(b"</f>", stop):
        raise Irregular("a formula with markup inside")
    raw = buf[close + 1:stop].decode("utf-8")
    if "\r" in raw:
        raw = raw.replace("\r\n", "\n").replace("\r", "\n")
    return unescape(raw, _ENTITIES) if "&" in raw else raw


#: A plain ``<f>`` element holding a plain reference, matched in place in the part's bytes.
_PLAIN_F = re.compile(
    rb"<f>\s*=?(?:'((?:[^'<]|'')+)'|([^'!,()\s<]+))!\$?([A-Z]{1,3})\$?([0-9]+)\s*</f>")


def _scan(fh: IO[bytes]) -> SheetKinds:
    """The cells of a UTF-8 part, located a chunk at a time. A formula element without
    attributes is matched in place against the plain-reference pattern (no text made
    unless it is one); one with attributes (a shared or array formula) is read whole."""
    out = _Gather()
    sheets: dict[bytes, str] = {}
    letters: dict[bytes, int] = {}
    refs = out.refs
    for buf, ch in located(fh):
        result = (ch.is_at >= 0) | (ch.v_end > ch.v_start) | (
            (ch.v_start >= 0) & (ch.types == b"str"))
        out.add(ch.rows, ch.cols, ch.has_f, result)
        f_cells = np.flatnonzero(ch.has_f)
        if not len(f_cells):
            continue
        a = ch.a
        at = ch.f_at[f_cells]
        bare = a[np.minimum(at + 2, len(a) - 1)] == ord(">")
        gt = np.flatnonzero(a == ord(">"))
        closing = gt[np.minimum(np.searchsorted(gt, at), len(gt) - 1)]
        empty = a[closing - 1] == ord("/")  # <f t="shared" si="0"/>: a follower, no text
        read = bare | ~empty
        f_cells, at, bare = f_cells[read], at[read], bare[read]
        match = _PLAIN_F.match
        rows, cols = ch.rows[f_cells].tolist(), ch.cols[f_cells].tolist()
        got_rows, got_cols, got_sheets, got_to_rows, got_to_cols = [], [], [], [], []
        for k, (pos, plain) in enumerate(zip(at.tolist(), bare.tolist(), strict=True)):
            if plain:
                m = match(buf, pos)
                if m is None:
                    continue
                quoted, name, col, row = m.groups()
                key = quoted if quoted is not None else name
                sheet = sheets.get(key)
                if sheet is None:
                    text = _unescape_f(key)
                    sheet = sheets[key] = text.replace("''", "'") if quoted else text
                c = letters.get(col)
                if c is None:
                    c = letters[col] = col_index(col.decode())
                got_rows.append(rows[k])
                got_cols.append(cols[k])
                got_sheets.append(sheet)
                got_to_rows.append(int(row))
                got_to_cols.append(c)
            else:  # <f t="shared" ref=… si=…>text</f> and the like: read whole
                i = int(f_cells[k])
                end = int(ch.cells[i + 1]) if i + 1 < len(ch.cells) else len(buf)
                text = _formula_text(buf, pos, end)
                ref = plain_ref(text) if text and "!" in text else None
                if ref is not None:  # kept in document order with the others
                    got_rows.append(rows[k])
                    got_cols.append(cols[k])
                    got_sheets.append(ref[0])
                    got_to_rows.append(ref[1])
                    got_to_cols.append(ref[2])
        refs.extend(got_rows, got_cols, got_sheets, got_to_rows, got_to_cols)
        refs.close_chunk()
    return out.build()


def _unescape_f(raw: bytes) -> str:
    text = raw.decode("utf-8")
    return unescape(text, _ENTITIES) if "&" in text else text


def _parse(fh: object) -> SheetKinds:
    """The cells of any part, by the hardened streaming parse."""
    rows: list[int] = []
    cols: list[int] = []
    formulas: list[bool] = []
    results: list[bool] = []
    out = _Gather()
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
            rows.append(row)
            cols.append(col)
            formulas.append(formula is not None)
            results.append(result)
            if formula and "!" in formula:
                out.refs.add(row, col, formula)
    _add_lists(out, rows, cols, formulas, results)
    return out.build()


def _add_lists(out: _Gather, rows: Iterable[int], cols: Iterable[int],
               formulas: Iterable[bool], results: Iterable[bool]) -> None:
    out.add(np.array(list(rows), dtype=np.int64), np.array(list(cols), dtype=np.int64),
            np.array(list(formulas), dtype=bool), np.array(list(results), dtype=bool))
