"""What a recalculation returns: every formula cell of a book with its fresh value.

Plain data, filled in by :meth:`process.Engine.recalculate` and read by ``compare.py``.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

__all__ = ["RecalcBook", "RecalcCell", "RecalcSheet"]


@dataclass(frozen=True)
class RecalcCell:
    """One formula cell after recalculation: its value, or the error it shows."""

    sheet: str
    address: str
    value: float | str | None
    error: str | None  # e.g. "#DIV/0!" or "Err:502"; None when the cell is not an error
    error_code: int  # the engine's numeric error code, 0 when not an error
    formula: str  # in the engine's notation, e.g. "=SUM(A1:A3)" or "{=LINEST(...)}"

    @property
    def is_error(self) -> bool:
        return self.error is not None


@dataclass(frozen=True)
class RecalcSheet:
    """The recalculated formula cells of one sheet, by address."""

    name: str
    cells: dict[str, RecalcCell]


@dataclass(frozen=True)
class RecalcBook:
    """Every formula cell of a workbook after a full recalculation."""

    path: Path
    sheets: tuple[RecalcSheet, ...]
    seconds: dict[str, float]  # load / calculate / read inside the worker, total round trip

    @property
    def cells(self) -> dict[tuple[str, str], RecalcCell]:
        return {(s.name, a): c for s in self.sheets for a, c in s.cells.items()}

    def sheet(self, name: str) -> RecalcSheet:
        for s in self.sheets:
            if s.name == name:
                return s
        raise KeyError(f"no sheet {name!r}; sheets: {[s.name for s in self.sheets]}")
