"""The input record of a model: what each declared range held when it was read, re-derivable.

A refresh stores this record (``sf inputs`` sheet, index fingerprint); ``sheetfit check``
computes it again from the book and compares. The recipe (also in the README):

1. **Cell token.** Each cell of a declared range, as the values reader sees it, becomes
   one text: ``n:`` + the number in Python ``repr`` form (the shortest decimal that reads
   back as the same double: ``12.0``, ``0.1``, ``1e-05``, ``1.5e+16``; a date is its serial
   number), ``t:`` + the text, ``b:`` for a blank, ``e:`` + the error text (``e:#DIV/0!``),
   ``l:TRUE`` / ``l:FALSE`` for a logical.
2. **Cell digest.** The first 8 hexadecimal digits of SHA-256 of the token (UTF-8).
3. **Range.** The range is the declared name's areas as the declaration reads them
   (whole columns cut at the last used row; identifier columns over the rows of the
   range they name), written ``Sheet!$A$1:$A$41`` (sheet quoted as in a formula), areas
   joined by ``,``. Cells go area by area, row by row, left to right. The range digest is
   the first 16 hex digits of SHA-256 of ``<range>`` + a line feed + the cell digests
   run together.
4. **Fingerprint.** The first 16 hex digits of SHA-256 of the lines
   ``sheetfit inputs 1``, ``model <name>``, one ``<role> <range digest>`` per declared
   role in the order y, x, new, opts, key, newkey, rule, and ``settings <list>``, where the list
   is the method's settings as used, ``name=value`` joined by ``;`` in the order
   ``method`` then the method's own settings in its record's order (yes/no for switches,
   nothing after ``=`` for a setting without a value such as an automatic k, numbers as
   in step 1, a threshold as ``sd 2.0`` or ``amount 250.0``, text as it is); each line
   ends in a line feed.
"""

from __future__ import annotations

import hashlib
import operator
import re
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..a1 import absolute, quote_sheet
from ..reader.columns import KINDS
from ..reader.values import (
    BLANK,
    ERROR,
    NUMBER,
    OTHER,
    TEXT,
    UNSAVED,
    BookValues,
    ColumnValues,
    Value,
)
from .refs import Area

__all__ = [
    "DIGEST_HEX",
    "RECIPE",
    "DigestMemo",
    "InputRecord",
    "RangeRecord",
    "area_digests",
    "cell_addresses",
    "cell_token",
    "column_digests",
    "digest_cell",
    "record_inputs",
    "settings_text",
]

#: First line of the text a fingerprint hashes; changes when the recipe changes.
RECIPE = "sheetfit inputs 1"
#: Hex digits kept of each cell's digest.
DIGEST_HEX = 8
#: Digest text that packs exactly into bytes (whole cells of lower-case hex).
_PACKED_HEX = re.compile(f"(?:[0-9a-f]{{{DIGEST_HEX}}})*")


def cell_token(v: Value) -> str:
    """The text one cell contributes (step 1 of the recipe)."""
    if v.kind == NUMBER:
        return "n:" + repr(float(v.number))
    if v.kind == TEXT:
        return "t:" + v.text
    if v.kind == ERROR:
        return "e:" + v.text
    if v.kind == OTHER:
        return "l:" + v.text
    if v.kind == BLANK:
        return "b:"
    return "u:"  # a formula without a saved result: refused before a record is made


def digest_cell(v: Value) -> str:
    return hashlib.sha256(cell_token(v).encode("utf-8", "surrogatepass")).hexdigest()[:DIGEST_HEX]


def range_text(areas: Sequence[Area]) -> str:
    """``Sheet!$A$1:$A$41`` per area, joined by commas."""
    out = []
    for a in areas:
        first, last = absolute(a.row1 - 1, a.col1 - 1), absolute(a.row2 - 1, a.col2 - 1)
        out.append(f"{quote_sheet(a.sheet)}!{first}" + ("" if first == last else f":{last}"))
    return ",".join(out)


def cell_addresses(areas: Sequence[Area]) -> Iterator[tuple[str, int, int]]:
    """(sheet, row, col) of every cell of the areas, in recipe order."""
    for a in areas:
        for r in range(a.row1, a.row2 + 1):
            for c in range(a.col1, a.col2 + 1):
                yield a.sheet, r, c


@dataclass(frozen=True)
class RangeRecord:
    """One declared range as read: role, defined name, areas, and its cell digests.

    The digests are held packed, ``DIGEST_HEX // 2`` bytes a cell (half the hex text:
    24 MB rather than 48 MB of text for a million rows of six cells); the hex text is
    made a piece at a time when hashed, compared or written. A record read back from the
    sheet whose digest cells are not such hex keeps their text as it is (``text``), so its
    digest is still the hash of what the sheet holds.
    """

    role: str
    name: str
    ref: str
    packed: bytes
    text: str | None = None

    @classmethod
    def from_text(cls, role: str, name: str, ref: str, text: str) -> RangeRecord:
        """The record of digest text as read from a sheet."""
        if _PACKED_HEX.fullmatch(text):
            return cls(role, name, ref, bytes.fromhex(text))
        return cls(role, name, ref, b"", text)

    @property
    def n_cells(self) -> int:
        if self.text is not None:
            return len(self.text) // DIGEST_HEX
        return len(self.packed) // (DIGEST_HEX // 2)

    @property
    def digest(self) -> str:
        h = hashlib.sha256(f"{self.ref}\n".encode())
        if self.text is not None:
            for k in range(0, len(self.text), 1 << 20):  # a megabyte of text at a time
                h.update(self.text[k:k + (1 << 20)].encode())
        else:
            for k in range(0, len(self.packed), 1 << 19):  # the same text, made as hashed
                h.update(self.packed[k:k + (1 << 19)].hex().encode())
        return h.hexdigest()[:16]

    def cell(self, i: int) -> str:
        if self.text is not None:
            return self.text[i * DIGEST_HEX:(i + 1) * DIGEST_HEX]
        return self.packed[i * (DIGEST_HEX // 2):(i + 1) * (DIGEST_HEX // 2)].hex()


@dataclass(frozen=True)
class InputRecord:
    """Every declared range of one model and its settings as used; the fingerprint."""

    tag: str
    ranges: tuple[RangeRecord, ...]
    settings: str

    @property
    def fingerprint(self) -> str:
        lines = [RECIPE, f"model {self.tag}"]
        lines += [f"{r.role} {r.digest}" for r in self.ranges]
        lines.append(f"settings {self.settings}")
        text = "".join(line + "\n" for line in lines)
        return hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()[:16]

    def range(self, role: str) -> RangeRecord | None:
        return next((r for r in self.ranges if r.role == role), None)


def _setting_word(v: Any) -> str:
    if isinstance(v, bool):
        return "yes" if v else "no"
    if v is None:
        return ""
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, tuple):
        return " ".join(_setting_word(p) for p in v)
    return str(v)


def settings_text(values: Mapping[str, Any], names: Sequence[str]) -> str:
    """``method=least_squares;intercept=yes;degree=1`` for the settings ``names``."""
    return ";".join(f"{n}={_setting_word(values[n])}" for n in names)


#: Cells whose tokens are built and hashed together (bounds the memory the tokens take).
_CHUNK = 1 << 16
#: Cells of a column whose distinct numbers are found together (a number repeated across
#: stretches is hashed once per stretch; the digests are the same).
_CELLS = 1 << 18
_PREFIX = {TEXT: "t:", ERROR: "e:", OTHER: "l:"}
_FIXED = {BLANK: "b:", UNSAVED: "u:"}

#: Cell digests of columns already hashed, by (sheet, column, first row, last row).
DigestMemo = dict[tuple[str, int, int, int], np.ndarray]


def _digest4(token: bytes) -> bytes:
    return hashlib.sha256(token).digest()[:DIGEST_HEX // 2]


_DIGEST = operator.methodcaller("digest")


def _hash_all(tokens: list[bytes]) -> np.ndarray:
    """The first 4 bytes of each token's SHA-256 (as ``_digest4``), hashed by C-level maps
    (no Python frame per token: a third faster on a million cells)."""
    if not tokens:
        return np.empty(0, dtype=">u4")
    full = np.frombuffer(b"".join(map(_DIGEST, map(hashlib.sha256, tokens))), dtype=np.uint8)
    return full.reshape(-1, 32)[:, :DIGEST_HEX // 2].copy().view(">u4").ravel()


def column_digests(cv: ColumnValues) -> np.ndarray:
    """The digest of every cell of one column (step 2 of the recipe), as big-endian uint32s.

    The same tokens as ``cell_token`` (tests/test_check.py compares them cell by cell),
    built in bulk and hashed once per distinct token: numbers through ``repr`` of each
    distinct float (told apart by their bits, so 0.0 and -0.0 stay two tokens), text
    cells through their distinct texts, one digest shared by every blank.
    """
    n = len(cv)
    out = np.empty(n, dtype=">u4")
    for kind, token in _FIXED.items():
        mask = cv.of_kind(kind)
        if mask.any():
            out[mask] = _hash_all([token.encode()])[0]
    isnum = cv.of_kind(NUMBER)
    for a in range(0, n, _CELLS):  # distinct numbers per stretch: memory stays bounded
        nums = np.flatnonzero(isnum[a:a + _CELLS]) + a
        if not len(nums):
            continue
        bits, where = np.unique(cv.number[nums].view(np.uint64), return_inverse=True)
        digests = np.empty(len(bits), dtype=">u4")
        for k in range(0, len(bits), _CHUNK):
            floats = bits[k:k + _CHUNK].view(np.float64).tolist()
            reprs = repr(floats)[1:-1].split(", ")  # each float's repr, in one C loop
            digests[k:k + _CHUNK] = _hash_all(
                ("n:" + "\x00n:".join(reprs)).encode().split(b"\x00"))
        out[nums] = digests[where.ravel()]
    seen: dict[str, int] = {}
    cells = [i for i in cv.text if KINDS[cv.kind[i]] in _PREFIX]
    tokens = [_PREFIX[KINDS[cv.kind[i]]] + cv.text[i] for i in cells]
    distinct = [seen.setdefault(t, len(seen)) for t in tokens]
    if cells:
        texts = list(seen)
        digests = np.concatenate([
            _hash_all([t.encode("utf-8", "surrogatepass") for t in texts[k:k + _CHUNK]])
            for k in range(0, len(texts), _CHUNK)])
        out[cells] = digests[distinct]
    return out


def area_digests(area: Area, values: BookValues, memo: DigestMemo | None = None) -> bytes:
    """The cell digests of one area in recipe order (row by row, left to right), run
    together, packed (``DIGEST_HEX // 2`` bytes each)."""
    memo = {} if memo is None else memo
    cols = []
    for c in range(area.col1, area.col2 + 1):
        key = (area.sheet.casefold(), c, area.row1, area.row2)
        if key not in memo:
            memo[key] = column_digests(values.column(area.sheet, c, area.row1, area.row2,
                                                     keep=False))
        cols.append(memo[key])
    if len(cols) == 1:
        return cols[0].astype(">u4", copy=False).tobytes()
    out = np.empty((len(cols[0]), len(cols)), dtype=">u4")
    for j, col in enumerate(cols):
        out[:, j] = col
    return out.tobytes()


def record_inputs(tag: str, ranges: Mapping[str, tuple[str, Sequence[Area]]],
                  values: BookValues, settings: str, role_order: Sequence[str],
                  memo: DigestMemo | None = None) -> InputRecord:
    """The record of a model's declared ranges (role -> (defined name, areas)) as read now.

    ``memo`` keeps each column's digests for the other models of the same book read.
    """
    out = []
    for role in role_order:
        if role not in ranges:
            continue
        name, areas = ranges[role]
        digests = b"".join(area_digests(a, values, memo) for a in areas)
        out.append(RangeRecord(role, name, range_text(areas), digests))
    return InputRecord(tag, tuple(out), settings)
