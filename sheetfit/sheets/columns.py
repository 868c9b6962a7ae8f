"""Column plans: a long, regular run of cells as a formula template plus the vectors
that fill it, instead of one object per cell.

Row-by-row sheets (fitted values, residuals, neighbours, standard units) repeat one
formula down thousands of rows. A :class:`Run` holds such a column: its first row,
its cached values (a numpy array or a list), one style, and an optional
:class:`Template` whose placeholders are filled from integer or float vectors, one per
placeholder. The writer renders runs in bulk, chunk by chunk; :meth:`Run.cells` gives
the same cells one by one (tests, the general renderer, small books).
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..vectors import Lazy

__all__ = ["Part", "Pieces", "Run", "Span", "Template", "template", "this_row"]

Scalar = float | int | str | bool | None
#: A column's values or a placeholder's vector: an array, a list, or a :class:`Lazy`
#: made a block at a time as the sheet is written.
Vector = Sequence[Any] | np.ndarray | Lazy


@dataclass(frozen=True)
class _ThisRow:
    """Placeholder for the 1-based sheet row of the cell the formula is in."""


#: Use in :func:`template` where the formula names its own row (``=B5-C5`` in row 5).
this_row = _ThisRow()

#: A piece of a template: literal text, a vector filling a placeholder, or ``this_row``.
Part = str | Vector | _ThisRow


@dataclass(frozen=True)
class Template:
    """A formula with positional placeholders (``str.format`` syntax, literal braces
    doubled) and one vector per placeholder; ``None`` marks the cell's own row."""

    text: str
    args: tuple[Vector | None, ...]

    def render(self, first_row: int, a: int, b: int) -> list[str]:
        """Formula texts of items a..b-1 (``first_row`` is the 1-based row of item 0)."""
        cols: list[Any] = []
        for v in self.args:
            if v is None:
                cols.append(range(first_row + a, first_row + b))
            else:
                x = v[a:b]
                cols.append(x.tolist() if isinstance(x, np.ndarray) else x)
        fmt = self.text.format
        if len(cols) == 1:
            return [fmt(x) for x in cols[0]]
        return [fmt(*t) for t in zip(*cols, strict=True)]


def template(*parts: Part) -> Template:
    """A template from literal text pieces and vectors, e.g.
    ``template("=", ref_prefix, data_rows, "-", this_row)``: text is taken literally
    (braces escaped), each vector fills one placeholder, ``this_row`` the cell's row."""
    text: list[str] = []
    args: list[Vector | None] = []
    for part in parts:
        if isinstance(part, str):
            text.append(part.replace("{", "{{").replace("}", "}}"))
        else:
            text.append(f"{{{len(args)}}}")
            args.append(None if isinstance(part, _ThisRow) else part)
    return Template("".join(text), tuple(args))


@dataclass(frozen=True)
class Run:
    """Cells row0 … row0+n-1 of one column (0-based), all in one style.

    ``values`` are the cached values (floats in a numpy array, or any scalars in a list;
    ``None`` is a blank; either may be a :class:`~sheetfit.vectors.Lazy` made a block at
    a time); ``formula`` the template of their formulas, if any.
    """

    col: int
    row0: int
    values: Vector
    style: str = "text"
    formula: Template | None = None

    @property
    def n(self) -> int:
        return len(self.values)

    @property
    def last(self) -> int:
        return self.row0 + self.n - 1

    def formulas(self, a: int, b: int) -> list[str] | None:
        """Formula texts (with '=') of items a..b-1, or None for a column of values."""
        return None if self.formula is None else self.formula.render(self.row0 + 1, a, b)

    def scalars(self, a: int, b: int) -> list[Scalar]:
        x = self.values[a:b]
        return x.tolist() if isinstance(x, np.ndarray) else list(x)

    def cells(self) -> Iterator[tuple[int, int, Scalar, str | None]]:
        """(row, col, value, formula) of every cell, in row order."""
        forms = self.formulas(0, self.n)
        for i, v in enumerate(self.scalars(0, self.n)):
            yield self.row0 + i, self.col, v, None if forms is None else forms[i]


@dataclass(frozen=True)
class Span:
    """Cells col0 … col0+n-1 of one row, each holding a text, all in one style.

    For a few very long rows (the cell digests of ``sf inputs``: 8 characters a data
    cell, tens of megabytes on a million-row book). ``values`` is any sequence of texts
    and is read one cell at a time as the sheet is written, so a :class:`Pieces` of a
    long text never exists a second time as cells.
    """

    row: int
    col0: int
    values: Sequence[str]
    style: str = "text"

    @property
    def n(self) -> int:
        return len(self.values)

    def cells(self) -> Iterator[tuple[int, int, Scalar, None]]:
        """(row, col, value, None) of every cell, left to right."""
        for k in range(self.n):
            yield self.row, self.col0 + k, self.values[k], None


class Pieces(Sequence[str]):
    """A text cut into consecutive pieces of ``size`` characters (the last may be
    shorter), each made only when asked for; given bytes, pieces of ``size`` bytes written
    as hex text (the packed cell digests of ``sf inputs``)."""

    def __init__(self, text: str | bytes, size: int) -> None:
        if size < 1:
            raise ValueError("pieces of at least one character")
        self.text, self.size = text, size

    def __len__(self) -> int:
        return (len(self.text) + self.size - 1) // self.size

    def __getitem__(self, k: Any) -> Any:
        if isinstance(k, slice):
            return [self[i] for i in range(*k.indices(len(self)))]
        n = len(self)
        if not -n <= k < n:
            raise IndexError(k)
        k %= n
        piece = self.text[k * self.size:(k + 1) * self.size]
        return piece.hex() if isinstance(piece, bytes) else piece
