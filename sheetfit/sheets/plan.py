"""A sheet plan: the cells of one owned sheet as plain data (address, formula, cached value, style).

Plans are what tests inspect without writing a file; the renderer turns them into
sheet parts. Rows and columns are 0-based here, as in the renderer.
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass, field

from ..a1 import absolute, area, cell_ref, quote_sheet
from .chartplan import ChartPlan

__all__ = ["STYLES", "BookPlan", "Cell", "Planned", "SheetPlan"]

Scalar = float | int | str | bool | None

#: Cell styles by key, as xlsxwriter format properties. Layout is data.
STYLES: dict[str, dict[str, object]] = {
    "text": {},
    "title": {"bold": True, "font_size": 13},
    "note": {"italic": True, "font_color": "#555555"},
    "head": {"bold": True, "bottom": 1, "text_wrap": True, "valign": "top"},
    "label": {"bold": True},
    "num": {"num_format": "General"},
    "coef": {"num_format": "General"},
    "check": {"num_format": "0.0E+00", "font_color": "#2E6B30"},
    "int": {"num_format": "0"},
    "ratio": {"num_format": "0.000000"},
    "dist": {"num_format": "0.000000"},
    "caution": {"font_color": "#8A4B00", "text_wrap": False},
}


@dataclass(frozen=True)
class Cell:
    """One planned cell; a formula cell carries its cached value too."""

    row: int
    col: int
    value: Scalar
    formula: str | None = None
    style: str = "text"

    @property
    def address(self) -> str:
        return cell_ref(self.row + 1, self.col + 1)


@dataclass
class SheetPlan:
    """Every cell of one owned sheet, plus column widths, frozen panes and charts."""

    title: str
    cells: list[Cell] = field(default_factory=list)
    widths: dict[int, float] = field(default_factory=dict)
    heights: dict[int, float] = field(default_factory=dict)
    freeze: tuple[int, int] | None = None
    #: Where named columns of a row-by-row sheet are ("resid" → 3), for planners that
    #: add columns to a sheet another function laid out.
    columns: dict[str, int] = field(default_factory=dict)
    _taken: set[tuple[int, int]] = field(default_factory=set, repr=False)
    charts: list[ChartPlan] = field(default_factory=list)  # native charts on this sheet

    def put(self, row: int, col: int, value: Scalar, formula: str | None = None,
            style: str = "text") -> Cell:
        """Add a cell (a formula must start with '=') and return it."""
        if formula is not None and not formula.startswith("="):
            raise ValueError(f"formula without '=': {formula}")
        if style not in STYLES:
            raise KeyError(style)
        if (row, col) in self._taken:
            raise ValueError(f"{self.title}: cell {cell_ref(row + 1, col + 1)} planned twice")
        self._taken.add((row, col))
        cell = Cell(row, col, value, formula, style)
        if style == "head":  # column headers wrap onto two lines
            self.heights.setdefault(row, 30.0)
        self.cells.append(cell)
        return cell

    def note(self, row: int, col: int, text: str, width: int = 100) -> int:
        """Put a note as lines of at most ``width`` characters; return the next free row."""
        lines = textwrap.wrap(text, width)
        for k, line in enumerate(lines):
            self.put(row + k, col, line, style="note")
        return row + len(lines)

    def ref(self, row: int, col: int, fixed: bool = True) -> str:
        """Formula reference to a cell of this sheet from another sheet."""
        addr = absolute(row, col) if fixed else cell_ref(row + 1, col + 1)
        return f"{quote_sheet(self.title)}!{addr}"

    def col_range(self, col: int, row1: int, row2: int) -> str:
        """Formula reference to rows row1..row2 of a column of this sheet, from anywhere."""
        return area(self.title, row1, col, row2, col)

    def formula_cells(self) -> list[Cell]:
        return [c for c in self.cells if c.formula is not None]


@dataclass
class Planned:
    """The planned sheets of one model and the output names they carry."""

    sheets: list[SheetPlan]
    names: list[tuple[str, str]]


@dataclass
class BookPlan:
    """All owned sheets of one refresh, in order, and the output names to define."""

    sheets: list[SheetPlan]
    names: list[tuple[str, str]]
