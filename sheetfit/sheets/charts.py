"""The charts sheet of a model: helper columns of formulas and the charts that read them.

Each model's charts sit on its own owned sheet ``sf <model> charts``. A chart never
reads a planner's columns by position: the cells come from the model's output names
(``Planned.names``: ``sf_<model>_fitted``, ``_resid``, ``_coef`` …) and from the user's
own data cells (``ModelData`` columns), copied into helper columns to the right of the
charts by formulas, so the charts follow a refresh and a reviewer can read every plotted
number. A cell that holds no number (a blank fitted value) becomes ``NA()``, which charts
leave out. Above ``MAX_POINTS`` rows, every k-th row is plotted (k = ⌈n / MAX_POINTS⌉,
starting at the first row) and the chart titles say so.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any, overload

import numpy as np

from ..a1 import absolute, col_index, col_letter, quote_sheet
from ..declare.model import ModelData
from ..fit.results import Fitted
from ..owned import sheet_title
from ..vectors import Lazy, blocks, is_numeric, whole
from .chartplan import ChartPlan, Series, Span
from .plan import Planned, Scalar, SheetPlan

__all__ = [
    "HELPER_HEAD",
    "MAX_POINTS",
    "ChartEntry",
    "ChartSheet",
    "Located",
    "plan_chart_sheets",
    "sample_rows",
]

#: Most data rows a chart plots; above it, a reproducible sample (every k-th row).
MAX_POINTS = 5000
#: Charts stand in column A from row CHART_TOP, one under the other, CHART_ROWS rows
#: apart, each on its own printed page; CHART_SLOTS places are kept for them (a method's
#: own charts and a comparison). The helper columns follow below, from row HELPER_HEAD.
CHART_TOP = 3
CHART_ROWS = 35
CHART_SLOTS = 4
HELPER_COL = 0
HELPER_HEAD = CHART_TOP + CHART_ROWS * CHART_SLOTS + 1
NA = "#N/A"

_REF = re.compile(r"^(?:'((?:[^']|'')+)'|([^'!]+))!\$?([A-Z]{1,3})\$?(\d+)(?::\$?([A-Z]{1,3})\$?(\d+))?$")

ChartPlanner = Callable[[ModelData, Fitted[Any], Planned], list[SheetPlan]]


def sample_rows(n: int, limit: int = MAX_POINTS) -> tuple[list[int], int]:
    """The 0-based data rows a chart plots, and the step k (1: every row)."""
    step = max(1, math.ceil(n / limit))
    return list(range(0, n, step)), step


def _ordinal(k: int) -> str:
    suffix = "th" if 10 <= k % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(k % 10, "th")
    return f"{k}{suffix}"


def _number(v: object) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


class CellColumn(Sequence[tuple[str, Scalar]]):
    """(absolute reference, cached value) of each cell of a column range, the reference
    made when asked for; ``values`` are the cached values in order."""

    def __init__(self, head: str, first_row: int,
                 values: list[Scalar] | np.ndarray | Lazy) -> None:
        self._head, self._first, self.values = head, first_row, values

    def __len__(self) -> int:
        return len(self.values)

    @overload
    def __getitem__(self, i: int) -> tuple[str, Scalar]: ...

    @overload
    def __getitem__(self, i: slice) -> list[tuple[str, Scalar]]: ...

    def __getitem__(self, i: int | slice) -> tuple[str, Scalar] | list[tuple[str, Scalar]]:
        if isinstance(i, slice):
            return [self[k] for k in range(*i.indices(len(self)))]
        if i < 0:
            i += len(self)
        v = self.values[i]
        return f"{self._head}{self._first + i}", v.item() if isinstance(v, np.generic) else v


class Located:
    """The cells behind a model's output names, with the cached values the plans give them."""

    def __init__(self, planned: Planned) -> None:
        self.names = {n.lower(): t for n, t in planned.names}
        self._sheets = {s.title: s for s in planned.sheets}

    def has(self, name: str) -> bool:
        return name.lower() in self.names

    def _area(self, name: str) -> tuple[str, int, int, int, int]:
        """(sheet title, first column, first row, last column, last row; 0-based) of the
        range an output name holds."""
        text = self.names.get(name.lower())
        if text is None:
            raise KeyError(f"no output name {name}")
        m = _REF.match(text)
        if m is None:
            raise ValueError(f"output name {name} holds {text!r}, not one range")
        title = (m.group(1) or "").replace("''", "'") or m.group(2)
        c1, r1 = col_index(m.group(3)) - 1, int(m.group(4)) - 1
        c2 = col_index(m.group(5)) - 1 if m.group(5) else c1
        r2 = int(m.group(6)) - 1 if m.group(6) else r1
        return title, c1, r1, c2, r2

    def column(self, name: str, j: int = 0) -> CellColumn:
        """Column ``j`` of the range an output name holds, as (reference, value) pairs made
        on demand (a chart reads a sample of a 200,000-row column, and all its values)."""
        title, c1, r1, _, r2 = self._area(name)
        sheet = self._sheets.get(title)
        c = c1 + j
        values: list[Scalar] | np.ndarray | Lazy = (sheet.values_in(c, r1, r2) if sheet
                                                    else [None] * (r2 - r1 + 1))
        return CellColumn(f"{quote_sheet(title)}!${col_letter(c + 1)}$", r1 + 1, values)

    def block(self, name: str) -> list[list[tuple[str, Scalar]]]:
        """Rows of (absolute reference, cached value) of the range an output name holds."""
        _, c1, _, c2, _ = self._area(name)
        cols = [self.column(name, j) for j in range(c2 - c1 + 1)]
        return [list(row) for row in zip(*cols, strict=True)]

    def range_text(self, name: str) -> str:
        return self.names[name.lower()]


class ChartSheet:
    """Builds one charts sheet: helper columns (formulas) and charts placed one per page."""

    def __init__(self, sheet: SheetPlan) -> None:
        self.sheet = sheet
        used = [c.col for c in sheet.cells if c.row >= HELPER_HEAD]
        self.col = max(used) + 2 if used else HELPER_COL

    @classmethod
    def new(cls, model: ModelData, n_rows: int) -> ChartSheet:
        s = SheetPlan(sheet_title(model.tag, "charts"))
        s.put(0, 0, f"Charts — model {model.tag}", style="title")
        _, step = sample_rows(n_rows)
        sample = ("" if step == 1 else
                  f" Of the {n_rows:,} data rows, every {_ordinal(step)} row is plotted "
                  f"(rows 1, {1 + step}, {1 + 2 * step} … of the fitted-value sheet), so the "
                  "charts stay responsive; the titles say so.")
        s.note(1, 0, f"Each chart reads the helper columns from row {HELPER_HEAD + 1} on: "
               "formulas pointing at your data cells and at this model's result sheets, so "
               "the charts follow a refresh (a least-squares line's range for one new value "
               "is written as values, computed at the refresh as on the fitted-value sheet)."
               + sample, width=120)
        return cls(s)

    @property
    def title(self) -> str:
        return self.sheet.title

    def column(self, head: Scalar, cells: Sequence[tuple[str | None, Scalar]],
               style: str = "num") -> Span:
        """A helper column: its header, then one cell per (formula or None, value)."""
        c = self.col
        self.col += 1
        self.sheet.put(HELPER_HEAD, c, head, style="head")
        self.sheet.widths[c] = 10.0
        first = HELPER_HEAD + 1
        for k, (formula, value) in enumerate(cells):
            self.sheet.put(first + k, c, value, formula, style)
        return Span(self.title, c, first, first + max(len(cells), 1) - 1)

    def gap(self) -> None:
        """Leave one empty column between groups of helper columns."""
        self.col += 1

    def cell(self, span: Span, k: int) -> str:
        """Absolute reference (on this sheet) to the k-th cell of a helper span."""
        return absolute(span.first + k, span.col)

    def chart(self, kind: str, title: str, x_title: str, y_title: str,
              series: Sequence[Series], of_model: bool = True,
              bounds: tuple[float | None, float | None, float | None, float | None] = (
                  None, None, None, None)) -> ChartPlan:
        """Place a chart in the next slot; its title names the model unless ``of_model``
        is False (a chart across models)."""
        if of_model:
            title = f"Model {self.title.split(' ')[1]} — {title}"
        if len(self.sheet.charts) >= CHART_SLOTS:
            raise ValueError(f"more than {CHART_SLOTS} charts planned on {self.title!r}")
        row = CHART_TOP + CHART_ROWS * len(self.sheet.charts)
        plan = ChartPlan(kind, title, x_title, y_title, tuple(series), (row, 0),
                         bounds=bounds)
        self.sheet.charts.append(plan)
        return plan


def copy_cells(refs: Sequence[tuple[str, Scalar]]) -> list[tuple[str | None, Scalar]]:
    """Helper cells reading result cells: the number, or NA() where there is none."""
    return [(f"=IF(ISNUMBER({r}),{r},NA())", v if _number(v) else NA) for r, v in refs]


def data_cells(cells: Sequence[str], values: Sequence[float]) -> list[tuple[str | None, Scalar]]:
    """Helper cells reading the user's data cells of used rows (numbers by construction)."""
    return [(f"={c}", float(v)) for c, v in zip(cells, values, strict=True)]


def numbers(values: Sequence[Scalar] | np.ndarray | Lazy) -> np.ndarray:
    """The finite numbers among ``values`` (not logicals), as an array."""
    values = whole(values)
    if isinstance(values, np.ndarray) and values.dtype == np.float64:
        return values[np.isfinite(values)]
    if all(type(v) is float for v in values):
        x = np.array(values, dtype=float)
        return x[np.isfinite(x)]
    return np.array([float(v) for v in values if _number(v)], dtype=float)  # type: ignore[arg-type]


def extremes(values: Sequence[Scalar] | np.ndarray | Lazy) -> np.ndarray:
    """The smallest and the largest of the finite numbers among ``values`` (an empty array
    when there is none): what :func:`extreme` and ``nice_bounds`` read of a column, found
    a block at a time in a column of numbers (a million fitted values are never copied)."""
    if is_numeric(values):
        lo, hi = math.inf, -math.inf
        for b in blocks(values):
            x = np.asarray(b, dtype=np.float64)
            x = x[np.isfinite(x)]
            if x.size:
                lo, hi = min(lo, float(x.min())), max(hi, float(x.max()))
        return np.array([lo, hi]) if lo <= hi else np.zeros(0)
    nums = numbers(values)
    return np.array([nums.min(), nums.max()]) if nums.size else nums


def extreme(fn: str, spans: Sequence[str], values: Sequence[Scalar] | np.ndarray
            ) -> tuple[str, Scalar]:
    """A MIN or MAX formula over ranges (text and blanks ignored, as the engine does)."""
    nums = numbers(values)
    if not nums.size:
        return f"={fn}({','.join(spans)})", 0.0
    return f"={fn}({','.join(spans)})", float(nums.min() if fn == "MIN" else nums.max())


def suffix(n_rows: int) -> str:
    """What a chart title adds when it plots a sample."""
    _, step = sample_rows(n_rows)
    return "" if step == 1 else f" (every {_ordinal(step)} of {n_rows:,} rows)"


# --- the book step: every model's charts sheet, and comparisons across models -------------

@dataclass(frozen=True)
class ChartEntry:
    """One model as the book step sees it: declared, fitted, planned, and its method's
    charts planner (None: no charts) and whether its response holds class labels."""

    model: ModelData
    fitted: Fitted[Any]
    planned: Planned
    planner: ChartPlanner | None
    labels: bool


def plan_chart_sheets(entries: Sequence[ChartEntry]) -> dict[str, list[SheetPlan]]:
    """Charts sheets by model tag (each method's planner), plus one comparison chart per
    response that several models with a leave-one-out error (``sf_<model>_loo``) share;
    an error rate (class labels) is compared only with error rates."""
    out: dict[str, list[SheetPlan]] = {}
    for e in entries:
        if e.planner is not None:
            out[e.model.tag] = e.planner(e.model, e.fitted, e.planned)
    groups: dict[tuple[str, int, int, bool], list[ChartEntry]] = {}
    for e in entries:
        if Located(e.planned).has(f"sf_{e.model.tag}_loo"):
            y = e.model.y
            groups.setdefault((y.sheet.lower(), y.col, y.first_row, e.labels), []).append(e)
    for members in groups.values():
        home = out.get(members[0].model.tag)
        if len(members) >= 2 and home:
            _compare(ChartSheet(home[0]), members)
    return out


def _compare(board: ChartSheet, members: list[ChartEntry]) -> None:
    first = members[0].model
    what = "error rate" if members[0].labels else "RMSE"
    tags = board.column("model", [(None, e.model.tag) for e in members], "text")
    loo = board.column(f"leave-one-out {what}", copy_cells(
        [Located(e.planned).column(f"sf_{e.model.tag}_loo")[0] for e in members]))
    board.gap()
    board.chart("column", f"{first.y.name}: leave-one-out {what} of the models on it",
                "model", f"leave-one-out {what}",
                [Series(f"leave-one-out {what}", loo, tags, "bars")], of_model=False)
