"""Cached formula values as a book stores them, read straight from the package XML.

Our own parser (relationships, shared strings, shared and array formulas), never the
library that wrote the book: :func:`cached_formula_values` gives every formula cell's
formula text and cached value, keyed like a recalculation's cells.
"""

from __future__ import annotations

import functools
import os
import posixpath
import re
import zipfile
from collections.abc import Callable
from dataclasses import dataclass
from typing import IO, Any, Literal

from defusedxml import ElementTree as SafeET

from .addresses import column_index, column_letters, split_address, split_range

__all__ = ["CachedCell", "CachedKind", "cached_formula_values"]

CachedKind = Literal["n", "s", "b", "e", "none"]


@dataclass(frozen=True)
class CachedCell:
    """A formula cell as stored in the file: its formula text and cached value."""

    sheet: str
    address: str
    formula: str  # without "=", as stored; for shared/array members see ``note``
    kind: CachedKind  # number, string, boolean, error, or no cached value
    value: float | str | bool | None
    note: str = ""  # e.g. "shared si=0 from C2" or "array E1:F2"


_REL_OFFICE_DOC = "/officeDocument"
_REL_WORKSHEET = "/worksheet"
_REL_SHARED_STRINGS = "/sharedStrings"
_REF_RE = re.compile(r"(?<![A-Za-z0-9_.!$])(\$?)([A-Z]{1,3})(\$?)(\d+)(?![A-Za-z0-9_(!])")
_QUOTED_RE = re.compile(r"(\"(?:[^\"]|\"\")*\"|'(?:[^']|'')*')")


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def _shift_formula(text: str, dcol: int, drow: int) -> str:
    """Move the relative A1 references of a shared formula's master text by an offset."""

    def shift(m: re.Match[str]) -> str:
        cabs, col, rabs, row = m.groups()
        c = column_index(col) if cabs else column_index(col) + dcol
        r = int(row) if rabs else int(row) + drow
        if c < 0 or r < 1:
            return "#REF!"
        return f"{cabs}{column_letters(c)}{rabs}{r}"

    parts = _QUOTED_RE.split(text)
    return "".join(p if i % 2 else _REF_RE.sub(shift, p) for i, p in enumerate(parts))


def _resolve_target(base_part: str, target: str) -> str:
    if target.startswith("/"):
        return target.lstrip("/")
    return posixpath.normpath(posixpath.join(posixpath.dirname(base_part), target))


def _rels_path(part: str) -> str:
    folder, name = posixpath.split(part)
    return posixpath.join(folder, "_rels", name + ".rels")


def _read_rels(zf: zipfile.ZipFile, part: str) -> dict[str, tuple[str, str]]:
    """rId -> (type, resolved part name) for one part's relationships."""
    name = _rels_path(part)
    if name not in zf.namelist():
        return {}
    root = SafeET.fromstring(zf.read(name))
    rels: dict[str, tuple[str, str]] = {}
    for rel in root:
        if _local(rel.tag) != "Relationship" or rel.get("TargetMode") == "External":
            continue
        rels[rel.get("Id", "")] = (
            rel.get("Type", ""),
            _resolve_target(part, rel.get("Target", "")),
        )
    return rels


def _text_of(elem: Any) -> str:
    """Concatenated <t> text of a string item (plain or rich text runs)."""
    return "".join(t.text or "" for t in elem.iter() if _local(t.tag) == "t")


def _worksheet_parts(zf: zipfile.ZipFile) -> tuple[list[tuple[str, str]], str | None]:
    root_rels = _read_rels(zf, "")
    book_part = next(
        (target for kind, target in root_rels.values() if kind.endswith(_REL_OFFICE_DOC)), None
    )
    if book_part is None:
        raise ValueError("no workbook part in the package (_rels/.rels)")
    book_rels = _read_rels(zf, book_part)
    book = SafeET.fromstring(zf.read(book_part))
    sheets: list[tuple[str, str]] = []
    for elem in book.iter():
        if _local(elem.tag) != "sheet":
            continue
        rid = next((v for k, v in elem.attrib.items() if _local(k) == "id"), None)
        rel = book_rels.get(rid or "")
        if rel is not None and rel[0].endswith(_REL_WORKSHEET):
            sheets.append((elem.get("name", ""), rel[1]))
    strings = next((t for k, t in book_rels.values() if k.endswith(_REL_SHARED_STRINGS)), None)
    return sheets, strings


def _shared_strings(zf: zipfile.ZipFile, part: str | None) -> list[str]:
    if part is None or part not in zf.namelist():
        return []
    root = SafeET.fromstring(zf.read(part))
    return [_text_of(si) for si in root if _local(si.tag) == "si"]


def _cached_value(
    cell: Any, v: Any, strings: Callable[[], list[str]]
) -> tuple[CachedKind, float | str | bool | None]:
    kind = cell.get("t", "n")
    if kind == "inlineStr":
        is_ = next((ch for ch in cell if _local(ch.tag) == "is"), None)
        return ("s", _text_of(is_)) if is_ is not None else ("none", None)
    if v is None:
        return ("s", "") if kind == "str" else ("none", None)
    text = v.text or ""
    if kind in ("n", ""):
        return "n", float(text)
    if kind == "str":
        return "s", text
    if kind == "b":
        return "b", text.strip() in ("1", "true")
    if kind == "e":
        return "e", text
    if kind == "s":
        return "s", strings()[int(text)]
    return "s", text  # "d" (ISO date text) and anything unknown: compare as text


def _sheet_cells(
    sheet: str, stream: IO[bytes], strings: Callable[[], list[str]]
) -> dict[str, CachedCell]:
    found: dict[str, CachedCell] = {}
    shared: dict[str, tuple[str, int, int]] = {}  # si -> (master text, col, row)
    arrays: list[tuple[int, int, int, int, str, str]] = []  # open array ranges, text, ref
    all_arrays: list[tuple[int, int, int, int, str, str]] = []
    row_index = -1
    # Whole rows are handled at their end event: cheaper than per-cell events, and the
    # row number is known for cells that omit their own reference.
    for _, row in SafeET.iterparse(stream, events=("end",)):
        if _local(row.tag) != "row":
            continue
        r = row.get("r")
        row_index = int(r) - 1 if r else row_index + 1
        if arrays:
            arrays[:] = [a for a in arrays if a[3] >= row_index]
        col_index = -1
        for elem in row:
            if _local(elem.tag) != "c":
                continue
            ref = elem.get("r")
            col_index = split_address(ref)[0] if ref else col_index + 1
            f = v = None
            for child in elem:
                name = _local(child.tag)
                if name == "f":
                    f = child
                elif name == "v":
                    v = child
            if f is None and not arrays:
                continue
            address = f"{column_letters(col_index)}{row_index + 1}"
            if f is None:
                for c0, r0, c1, r1, text, aref in arrays:
                    if c0 <= col_index <= c1 and r0 <= row_index <= r1:
                        kind, value = _cached_value(elem, v, strings)
                        found[address] = CachedCell(
                            sheet, address, text, kind, value, f"array {aref}"
                        )
                        break
                continue
            ftype = f.get("t", "normal")
            text = f.text or ""
            note = ""
            if ftype == "shared":
                si = f.get("si", "")
                if text:
                    shared[si] = (text, col_index, row_index)
                elif si in shared:
                    master, mcol, mrow = shared[si]
                    text = _shift_formula(master, col_index - mcol, row_index - mrow)
                    note = f"shared si={si} from {column_letters(mcol)}{mrow + 1}"
                else:
                    note = f"shared si={si}, master not found"
            elif ftype == "array":
                aref = f.get("ref") or address
                box = (*split_range(aref), text, aref)
                arrays.append(box)
                all_arrays.append(box)
                note = f"array {aref}"
            kind, value = _cached_value(elem, v, strings)
            found[address] = CachedCell(sheet, address, text, kind, value, note)
        row.clear()
    # Array members with no <c> element at all still show a value in the engine.
    for c0, r0, c1, r1, text, aref in all_arrays:
        for r in range(r0, r1 + 1):
            for c in range(c0, c1 + 1):
                address = f"{column_letters(c)}{r + 1}"
                if address not in found:
                    found[address] = CachedCell(sheet, address, text, "none", None, f"array {aref}")
    return found


def cached_formula_values(path: str | os.PathLike[str]) -> dict[tuple[str, str], CachedCell]:
    """Every formula cell's cached value, read from the package XML: (sheet, address) -> cell.

    Members of an array formula's range count as formula cells (the engine reports
    them so); shared-formula members get the master's text moved to their position.
    """
    out: dict[tuple[str, str], CachedCell] = {}
    with zipfile.ZipFile(path) as zf:
        sheets, strings_part = _worksheet_parts(zf)
        strings = functools.cache(lambda: _shared_strings(zf, strings_part))
        for name, part in sheets:
            with zf.open(part) as stream:
                for address, cell in _sheet_cells(name, stream, strings).items():
                    out[(name, address)] = cell
    return out
