"""Read cell values of a user's workbook: only the sheets asked for, never refusing a sheet
our own parser can read.

Three readers give the same values (tests/test_values.py compares them cell by cell),
tried in this order:

- **columnar** — our own column reader (``_columnar``): the sheet's XML a couple of
  megabytes at a time, cells located with numpy, numbers parsed in bulk into one array
  per column, other values in small maps; nothing per cell and never the whole part in
  memory (a 1,000,000 x 6 sheet: ~50 MB of arrays where the fast reader held ~410 MB).
  Takes UTF-8 parts in the plain shape every common writer produces; anything else
  (``_columnar.Irregular``) goes to the next reader.
- **fast** — python-calamine (about 8x faster than openpyxl on 1M cells,
  docs/engine-facts.md R1). It shows error cells as empty strings and formula cells
  without a saved result as blanks, so one byte scan of the sheet's XML
  (``_sheetxml.scan``) finds both. It builds a dense rectangle from the first to the
  last cell holding a value, so the scan also measures that rectangle first.
- **streaming** — our own hardened parse of the one sheet part (``_sheetxml``) into a
  sparse map. Used when the fast reader cannot open the book or the sheet (UTF-16
  parts, macro-sheet parts, relationships it does not follow), when the part is not
  UTF-8, and when the fast reader's rectangle would be mostly empty (a stray value in
  row 1,048,576; millions of styled blank rows after the data), so memory follows the
  cells that hold values, not the sheet's extent.

Text is capped at ``TEXT_CAP`` characters per cell (the format's own limit). Each sheet
is read on first use; the file is opened once and held until the reader is closed.
"""

from __future__ import annotations

import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from types import TracebackType
from typing import Any, Protocol, Self

import numpy as np
import python_calamine
from defusedxml import DefusedXmlException
from defusedxml.ElementTree import ParseError

from ..errors import Context, PackageError
from ._columnar import Irregular, Read, read_columns, shared_strings
from ._dense import Dense, dense_from_rows
from ._sheetxml import TEXT_CAP, part_bytes, read_shared_strings, scan, stream_sheet, utf8
from .cells import BLANK, ERROR, NUMBER, OTHER, TEXT, UNSAVED, Value, classify
from .columns import ColumnValues, Mixed, column_values
from .formats import StyleTable, row_style_indices
from .package import parse_rels, rels_part_of

__all__ = [
    "BLANK",
    "ERROR",
    "NUMBER",
    "OTHER",
    "TEXT",
    "TEXT_CAP",
    "UNSAVED",
    "BookValues",
    "ColumnValues",
    "SheetValues",
    "Value",
]

_SHARED_STRINGS = "/sharedStrings"
#: The fast reader may build this many cells beyond four per value before we stream instead.
DENSE_SLACK = 1 << 20
#: Bytes of trailing blank rows after the last content beyond which we stream (and stop there).
TAIL_LIMIT = 16 << 20


class _Cells(Protocol):
    def raw(self, row: int, col: int) -> Any: ...

    def column(self, col: int, row1: int, row2: int) -> list[Any] | np.ndarray | Mixed: ...

    def last_row(self, col1: int, col2: int) -> int: ...


@dataclass
class _Sparse:
    """The streaming reader's cells: row -> {col: raw value}, only cells holding one."""

    rows: dict[int, dict[int, Any]]
    _order: list[int] = field(default_factory=list)

    def raw(self, row: int, col: int) -> Any:
        cells = self.rows.get(row)
        return "" if cells is None else cells.get(col, "")

    def column(self, col: int, row1: int, row2: int) -> list[Any]:
        """Raw values of rows row1..row2 of one column ("" where no cell holds one)."""
        out: list[Any] = [""] * (row2 - row1 + 1)
        if len(self.rows) < len(out):
            for r, cells in self.rows.items():
                if row1 <= r <= row2 and col in cells:
                    out[r - row1] = cells[col]
        else:
            for r in range(row1, row2 + 1):
                found = self.rows.get(r)
                if found is not None and col in found:
                    out[r - row1] = found[col]
        return out

    def last_row(self, col1: int, col2: int) -> int:
        if len(self._order) != len(self.rows):
            self._order = sorted(self.rows, reverse=True)
        for r in self._order:
            if any(col1 <= c <= col2 for c in self.rows[r]):
                return r
        return 0


@dataclass
class SheetValues:
    """The values of one sheet, addressed by 1-based row and column."""

    name: str
    cells: _Cells
    errors: dict[tuple[int, int], str]
    unsaved: set[tuple[int, int]] = field(default_factory=set)
    date1904: bool = False

    def get(self, row: int, col: int) -> Value:
        """The value at (row, col); cells beyond the used area are blank."""
        err = self.errors.get((row, col))
        if err is not None:
            return Value(ERROR, text=err)
        if self.unsaved and (row, col) in self.unsaved:
            return Value(UNSAVED)
        return classify(self.cells.raw(row, col), self.date1904)

    def column(self, col: int, row1: int, row2: int) -> ColumnValues:
        """Rows row1..row2 of one column at once, as arrays (``reader/columns.py``)."""
        return column_values(self.name, col, row1, self.cells.column(col, row1, row2),
                             self.errors, self.unsaved, self.date1904)

    def last_used_row(self, col1: int, col2: int) -> int:
        """The last row holding any value, error or formula in columns col1..col2; 0 if none."""
        last = self.cells.last_row(col1, col2)
        for r, c in (*self.errors, *self.unsaved):
            if col1 <= c <= col2 and r > last:
                last = r
        return last

    def unsaved_in(self, row1: int, row2: int, col1: int, col2: int) -> list[tuple[int, int]]:
        """Formula cells without a saved result inside the rectangle, in row order."""
        return sorted(
            (r, c) for r, c in self.unsaved if row1 <= r <= row2 and col1 <= c <= col2
        )


def _fast_reader_failed(exc: BaseException) -> bool:
    """Whether the fast reader's exception means "read this one yourself".

    A Rust panic in the fast reader arrives as pyo3's PanicException, a BaseException.
    """
    return isinstance(exc, Exception) or type(exc).__name__ == "PanicException"


def _dense_sheet(sheet: Any) -> Dense:
    """A calamine sheet as a column store, converted a block of rows at a time.

    Its row iterator (python-calamine 0.9) starts at row 1 but at the first column
    holding a value; a version whose rows start elsewhere is converted from the whole
    list of rows instead (which holds the sheet once more while converting).
    """
    end = sheet.end
    if end is None:
        return Dense(0, [], [])
    height, width = end[0] + 1, end[1] + 1
    if hasattr(sheet, "iter_rows"):
        try:
            return dense_from_rows(sheet.iter_rows(), height, width)
        except ValueError:
            pass
    return dense_from_rows(sheet.to_python(skip_empty_area=False), height, width)


@dataclass
class BookValues:
    """Lazy per-sheet value reader for one workbook file.

    Each sheet is read on first use, and only the sheets asked for are parsed. The
    first read opens the file, which stays open for the other sheets until
    :meth:`close`; use the reader as a context manager. Sheets read before closing
    stay available afterwards.
    """

    path: Path
    sheet_parts: dict[str, str]
    date1904: bool = False
    workbook_part: str = "xl/workbook.xml"
    #: Which reader read each sheet ("columnar", "fast" or "stream"), by sheet name.
    readers: dict[str, str] = field(default_factory=dict)
    _cache: dict[str, SheetValues] = field(default_factory=dict)
    _columns: dict[tuple[str, int, int, int], ColumnValues] = field(
        default_factory=dict, init=False, repr=False)
    _book: Any = None
    _book_failed: bool = field(default=False, init=False, repr=False)
    _strings: list[str] | None = field(default=None, init=False, repr=False)
    _zip: zipfile.ZipFile | None = field(default=None, init=False, repr=False)
    _members: dict[str, str] = field(default_factory=dict, init=False, repr=False)
    _closed: bool = field(default=False, init=False, repr=False)
    _styles: StyleTable | None = field(default=None, init=False, repr=False)
    #: Style index of the cells of each sheet row asked for, by (sheet, row): column -> index.
    _row_styles: dict[tuple[str, int], dict[int, int]] = field(
        default_factory=dict, init=False, repr=False)

    def __enter__(self) -> Self:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()

    def close(self) -> None:
        """Close the file; reading a sheet not read yet is then a ValueError."""
        self._closed = True
        zf, book = self._zip, self._book
        self._zip = self._book = None
        try:
            if zf is not None:
                zf.close()
        finally:
            close_book = getattr(book, "close", None)  # python-calamine < 0.3 has no close()
            if close_book is not None:
                close_book()

    def sheet(self, name: str) -> SheetValues:
        """Values of the sheet called ``name`` (case-insensitive), read on first use."""
        key = self._canonical(name)
        if key not in self._cache:
            self._cache[key] = self._load(key)
        return self._cache[key]

    def column(self, sheet: str, col: int, row1: int, row2: int,
               keep: bool = True) -> ColumnValues:
        """Rows row1..row2 of one column of ``sheet`` as arrays, read once per reader:
        models that share a range share its arrays (treat them as read-only). With
        ``keep=False`` a column not read before is made for the caller alone (one use:
        the cell digests, which keep their own memo)."""
        key = (self._canonical(sheet), col, row1, row2)
        found = self._columns.get(key)
        if found is None:
            found = self.sheet(sheet).column(col, row1, row2)
            if keep:
                self._columns[key] = found
        return found

    def forget(self, name: str) -> None:
        """Let go of a sheet's values and columns read so far (read again if asked for);
        ``sheetfit check`` reads one result sheet after another."""
        try:
            key = self._canonical(name)
        except KeyError:
            return
        self._cache.pop(key, None)
        for k in [k for k in self._columns if k[0] == key]:
            del self._columns[k]

    def _canonical(self, name: str) -> str:
        for known in self.sheet_parts:
            if known.casefold() == name.casefold():
                return known
        raise KeyError(name)

    def _archive(self) -> zipfile.ZipFile:
        """The open zip (opened on first use)."""
        if self._zip is None:
            self._zip = zipfile.ZipFile(self.path)
            self._members = {n.lower(): n for n in self._zip.namelist()}
        return self._zip

    def _member(self, part: str) -> str:
        """The zip entry of a part (part names ignore case); KeyError if there is none."""
        self._archive()
        return self._members[part.lower()]

    def number_format(self, sheet: str, row: int, col: int) -> str | None:
        """The number format code of one cell (None when it has none that can be read)."""
        try:
            if self._styles is None:
                self._styles = self._style_table()
            key = (self._canonical(sheet), row)
            if key not in self._row_styles:
                with self._archive().open(self._member(self.sheet_parts[key[0]])) as fh:
                    self._row_styles[key] = row_style_indices(fh, row)
            index = self._row_styles[key].get(col)
            return None if index is None else self._styles.code(index)
        except (KeyError, ValueError, OSError, zipfile.BadZipFile, StopIteration,
                ParseError, DefusedXmlException, PackageError):
            return None  # looks only: an unreadable style keeps sheetfit's own format

    def _style_table(self) -> StyleTable:
        rels_part = rels_part_of(self.workbook_part)
        rels = parse_rels(self._archive().read(self._member(rels_part)), self.workbook_part)
        part = next(r.part for r in rels if r.type.endswith("/styles") and r.part)
        return StyleTable(self._archive().read(self._member(part)))

    def _load(self, name: str) -> SheetValues:
        if self._closed:
            raise ValueError(f"values reader of {self.path} closed before sheet {name!r} was read")
        try:
            return self._read(name)
        except PackageError:
            raise
        except Exception as exc:  # the part or its XML is unreadable even to our own parser
            raise PackageError(
                f"cannot read the values of this sheet ({exc.__class__.__name__}: "
                f"{str(exc)[:200]})",
                Context(str(self.path), sheet=name),
            ) from exc

    def _read(self, name: str) -> SheetValues:
        member = self._member(self.sheet_parts[name])
        zf = self._archive()
        columns = self._columnar(member)
        if columns is not None:
            self.readers[name] = "columnar"
            return SheetValues(name, columns.cells, columns.errors, columns.unsaved,
                               self.date1904)
        data = part_bytes(zf, member)
        found = scan(data) if utf8(data) else None
        del data  # the sheet's XML is not held while the fast reader parses the same part
        stop: int | None = None
        if found is not None and found.located:
            if found.last_row == 0:  # nothing in the sheet holds a value or a formula
                self.readers[name] = "fast"
                return SheetValues(name, Dense(0, [], []), found.errors, found.unsaved, self.date1904)
            dense = found.rectangle() <= 4 * found.n_values + DENSE_SLACK
            if dense and found.tail <= TAIL_LIMIT:
                store = self._fast(name)
                if store is not None:
                    self.readers[name] = "fast"
                    return SheetValues(name, store, found.errors, found.unsaved,
                                       self.date1904)
            if found.tail > TAIL_LIMIT:
                stop = found.last_row
        with zf.open(member) as fh:
            cells = stream_sheet(fh, self._shared_strings(), stop)
        self.readers[name] = "stream"
        return SheetValues(name, _Sparse(cells.rows), cells.errors, cells.unsaved, self.date1904)

    def _columnar(self, member: str) -> Read | None:
        """Our own column reader's values of one part, or None when the part is not UTF-8
        or not in the plain shape it takes (``_columnar.Irregular``)."""
        zf = self._archive()
        with zf.open(member) as fh:
            if not utf8(fh.read(256)):
                return None
        try:
            with zf.open(member) as fh:
                return read_columns(fh, self._shared_strings)
        except (Irregular, UnicodeDecodeError, ValueError, OverflowError):
            return None

    def _fast(self, name: str) -> Dense | None:
        """The fast reader's rectangle of one sheet, or None when it cannot read it."""
        if self._book_failed:
            return None
        try:
            if self._book is None:
                self._book = python_calamine.load_workbook(str(self.path))
            return _dense_sheet(self._book.get_sheet_by_name(name))
        except BaseException as exc:
            if not _fast_reader_failed(exc):
                raise
            if self._book is None:
                self._book_failed = True
            return None

    def _shared_strings(self) -> list[str]:
        if self._strings is None:
            self._strings = []
            try:
                rels = parse_rels(self._zip_read(rels_part_of(self.workbook_part)),
                                  self.workbook_part)
            except KeyError:
                rels = []
            for rel in rels:
                if rel.type.endswith(_SHARED_STRINGS) and rel.part is not None:
                    try:
                        member = self._member(rel.part)
                    except KeyError:
                        continue
                    self._strings = self._read_strings(member)
                    break
        return self._strings

    def _read_strings(self, member: str) -> list[str]:
        """The shared strings: by byte searches when the part is plain UTF-8
        (``_columnar.shared_strings``), else by the hardened streaming parse."""
        data = part_bytes(self._archive(), member)
        if utf8(data):
            try:
                return shared_strings(data)
            except (Irregular, UnicodeDecodeError, ValueError, OverflowError):
                pass
        del data
        with self._archive().open(member) as fh:
            return read_shared_strings(fh)

    def _zip_read(self, part: str) -> bytes:
        return self._archive().read(self._member(part))
