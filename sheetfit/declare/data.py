"""What a declared model is once read: its columns, rows left out, arrays, new rows, identifiers.

The data types ``find_models`` (``declare/model.py``) returns, and the words of a
left-out reason for a cell value.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..a1 import cell_ref, quote_sheet
from ..reader.values import BLANK, ERROR, TEXT, UNSAVED, Value
from ..settings import Settings
from ..words import clip
from .fingerprint import InputRecord

__all__ = [
    "Column",
    "KeyValue",
    "Keys",
    "LeftOut",
    "ModelData",
    "NewRows",
    "RuleCells",
    "describe_value",
]


@dataclass(frozen=True)
class Column:
    """One declared column: where its first data cell is and what it is called."""

    name: str
    sheet: str
    col: int
    first_row: int
    #: For an indicator of a text attribute (``declare/levels.py``): the level it marks;
    #: the cells are the text attribute's own, and the value is 1 where the cell is that level.
    level: str | None = None
    #: The number format of the column's first data cell when it shows a plain number
    #: (``reader.formats.amount_format``), for the result sheets to show amounts alike.
    fmt: str | None = None

    def value_ref(self, i: int) -> str:
        """Formula expression of this column's value in the model's i-th row.

        The cell reference itself, or for an indicator ``IF(EXACT(cell,"level"),1,0)``
        (quotes in the level doubled, as a formula's text constant needs).
        """
        if self.level is None:
            return self.cell(i)
        text = self.level.replace('"', '""')
        return f'IF(EXACT({self.cell(i)},"{text}"),1,0)'

    def row_of(self, i: int) -> int:
        """Sheet row of the model's i-th row (0-based)."""
        return self.first_row + i

    def cell(self, i: int) -> str:
        """Formula reference to this column's cell in the model's i-th row, e.g. Data!C5."""
        return f"{quote_sheet(self.sheet)}!{cell_ref(self.row_of(i), self.col)}"

    def span(self, i0: int, i1: int) -> str:
        """Plain address of rows i0..i1 of this column (for messages)."""
        return f"{cell_ref(self.row_of(i0), self.col)}:{cell_ref(self.row_of(i1), self.col)}"


@dataclass(frozen=True)
class LeftOut:
    """A data row left out of the fit, with the reason in plain words."""

    index: int
    sheet_row: int
    reason: str


#: What an identifier cell holds, as shown beside a row: a number (dates as serials),
#: text, or None for a blank.
KeyValue = float | str | None


@dataclass
class Keys:
    """Identifier columns (a month, a job or invoice number ...) beside the model's rows.

    ``values[j][i]`` is what column j holds in the i-th row of the declared range
    (all rows, used or not; index as ``Column.cell(i)``).
    """

    columns: list[Column]
    values: list[list[KeyValue]]

    def row(self, i: int) -> list[KeyValue]:
        return [v[i] for v in self.values]


@dataclass(frozen=True)
class RuleCells:
    """The coefficients of the rule in use today: their cells (as formula references), values."""

    name: str
    cells: list[str]
    values: np.ndarray


@dataclass
class NewRows:
    """Rows of attribute values to predict (the ``new`` declaration)."""

    columns: list[Column]
    X: np.ndarray
    keys: Keys | None = None

    @property
    def n(self) -> int:
        return int(self.X.shape[0])


@dataclass
class ModelData:
    """A declared model with its cells read: what the fit and the sheet plan need."""

    tag: str
    file: str
    settings: Settings
    y: Column
    xs: list[Column]
    n_rows: int
    used: np.ndarray
    left_out: list[LeftOut]
    Y: np.ndarray
    X: np.ndarray
    new: NewRows | None = None
    names: dict[str, str] = field(default_factory=dict)
    keys: Keys | None = None
    rule: RuleCells | None = None
    #: What people typed on this model's owned sheets at the last refresh, to be written
    #: back (by sheet kind, then row identity): filled by the refresh, not a declaration.
    kept: dict[str, dict[str, list[str | float]]] = field(default_factory=dict)
    #: Text attribute (its header name) → its baseline level, for methods that code
    #: text attributes as indicators (``Method.text_attributes``); empty otherwise.
    baselines: dict[str, str] = field(default_factory=dict)
    #: Text attribute → level → rows used with that level (baseline included).
    level_counts: dict[str, dict[str, int]] = field(default_factory=dict)
    #: What each declared range held when read (``declare/fingerprint.py``).
    record: InputRecord | None = None

    @property
    def attribute_names(self) -> list[str]:
        return [c.name for c in self.xs]


def describe_value(v: Value) -> str:
    """A cell value in the words of a left-out reason."""
    if v.kind == BLANK:
        return "blank"
    if v.kind == ERROR:
        return f"error {clip(v.text, 20)}"
    if v.kind == TEXT:
        return f"text '{clip(v.text, 20)}'"
    if v.kind == UNSAVED:
        return "a formula with no saved result"
    return f"{clip(v.text, 20)} (not a number)"

