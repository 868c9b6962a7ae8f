"""A sheet plan: the cells of one owned sheet as plain data (address, formula, cached value, style).

Plans are what tests inspect without writing a file; the renderer turns them into
sheet parts. Rows and columns are 0-based here, as in the renderer.
"""

from __future__ import annotations

import bisect
import math
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..a1 import absolute, area, cell_ref, quote_sheet
from ..vectors import Lazy, blocks, is_numeric, whole
from .chartplan import ChartPlan
from .columns import Run, Span, Template

__all__ = [
    "FIT_WIDTH",
    "PORTRAIT_WIDTH",
    "STYLES",
    "BookPlan",
    "Cell",
    "Planned",
    "Run",
    "SheetPlan",
    "Span",
    "coef_style",
    "decimal_style",
    "decimals_shown",
    "style_format",
]

Scalar = float | int | str | bool | None

#: Cell styles by key, as xlsxwriter format properties. Layout is data. Number formats
#: only change what is shown: every cell keeps its full-precision value.
STYLES: dict[str, dict[str, object]] = {
    "text": {},
    "title": {"bold": True, "font_size": 13},
    "note": {"italic": True, "font_color": "#555555", "indent": 1},
    # one line under a header saying what the column computes, wrapped in the column
    "colnote": {"italic": True, "font_color": "#555555", "font_size": 8, "text_wrap": True,
                "valign": "top"},
    "head": {"bold": True, "bottom": 1, "text_wrap": True, "valign": "top"},
    "label": {"bold": True},
    "key": {"num_format": "General", "align": "left"},  # identifiers, shown as they are
    # number formats end in "_)": a space's width after every number, so a number never
    # runs into the text of the next column
    "num": {"num_format": "#,##0.00##_)"},  # any number: separators, 2 to 4 decimals
    "coef": {"num_format": "#,##0.000000_)"},  # fallback; coef_style() gives 6 significant digits
    "check": {"num_format": "0.0E+00_)", "font_color": "#2E6B30"},
    "verdict": {"bold": True, "font_color": "#2E6B30", "align": "center"},  # holds / FAILS
    "int": {"num_format": "#,##0_)"},  # counts
    "row": {"num_format": "0", "align": "left"},  # sheet row numbers, ranks: left, under their header
    "ratio": {"num_format": "0.0000_)"},  # R², correlation: a number between -1 and 1
    "pct": {"num_format": "0.0%_)"},  # rates and shares
    "pvalue": {"num_format": "0.0000_)"},  # p-values: four decimals (0.0000 reads "below 0.00005")
    "dist": {"num_format": "0.0000_)"},  # distances in standard units
    "z": {"num_format": "0.000_)"},  # standard units
    "class": {"align": "center"},  # class labels of a vote
    "caution": {"font_color": "#8A4B00", "text_wrap": False},
    "flag": {"bold": True, "font_color": "#8A4B00"},  # beside the number it qualifies
    "link": {"font_color": "#1F4E9E", "underline": 1},
    "answer": {"bold": True, "num_format": "#,##0.00"},
}
#: Thousands-separated formats with a fixed number of decimals, "dec0" … "dec9".
for _d in range(10):
    STYLES[f"dec{_d}"] = {"num_format": "#,##0" + ("." + "0" * _d if _d else "") + "_)"}
    STYLES[f"answer{_d}"] = {"bold": True, "num_format": STYLES[f"dec{_d}"]["num_format"]}


def decimals_shown(values: Sequence[object] | np.ndarray, most: int = 4) -> int:
    """How many decimals the data show: the fewest (≤ ``most``) that write every value exactly.

    Stands in for the user's own number format, which the reader does not expose: cost
    data kept to the cent give 2, whole counts give 0.
    """
    if isinstance(values, np.ndarray) and values.dtype.kind in "fiu":
        x = values
    elif isinstance(values, np.ndarray):
        return decimals_shown(values.tolist(), most)
    elif all(type(v) is float for v in values):
        x = np.array(values, dtype=float)
        x = x[np.isfinite(x)]
    else:
        x = np.array([float(v) for v in values if isinstance(v, (int, float))
                      and not isinstance(v, bool) and math.isfinite(float(v))], dtype=float)
    for d in range(most + 1):
        if all(_shows(x[a:a + _BLOCK], d) for a in range(0, len(x), _BLOCK)):
            return d
    return most


#: Values checked at a time by ``decimals_shown`` (no temporaries the length of a column).
_BLOCK = 1 << 16


def _shows(x: np.ndarray, d: int) -> bool:
    """Whether ``d`` decimals write every finite value of ``x`` exactly."""
    x = x.astype(float)
    x = x[np.isfinite(x)]
    scaled = x * float(10 ** d)  # as v * 10 ** d, element by element
    return bool(np.all(np.abs(scaled - np.round(scaled))
                       <= 1e-6 * np.maximum(1.0, np.abs(x) * float(10 ** d))))


def decimal_style(values: Sequence[object] | np.ndarray, most: int = 4, answer: bool = False,
                  least: int = 0, fmt: str | None = None) -> str:
    """The style for amounts like ``values``: the user's own number format ``fmt`` when
    their data cells have one (a plain-number format, see ``reader.formats``), else
    thousands separators and the decimals the values show (at least ``least``: a fitted
    value or a mean of whole numbers is not whole)."""
    if fmt:
        return ("userb:" if answer else "user:") + fmt
    return f"{'answer' if answer else 'dec'}{max(least, decimals_shown(values, most))}"


def style_format(style: str) -> dict[str, object]:
    """The xlsxwriter format properties of a style key (the table, or a user's format)."""
    if style.startswith("user:"):
        return {"num_format": style[5:]}
    if style.startswith("userb:"):
        return {"bold": True, "num_format": style[6:]}
    return STYLES[style]


def coef_style(value: float, digits: int = 6) -> str:
    """A style showing ``value`` to about ``digits`` significant digits (at most 9 decimals)."""
    v = abs(float(value))
    if not math.isfinite(v) or v == 0:
        return "dec2"
    d = digits - 1 - math.floor(math.log10(v))
    return f"dec{min(9, max(0, d))}"


@dataclass(frozen=True)
class Cell:
    """One planned cell; a formula cell carries its cached value too."""

    row: int
    col: int
    value: Scalar
    formula: str | None = None
    style: str = "text"
    link: str | None = None  # an internal target ('sf x fitted'!A1): the cell is a hyperlink

    @property
    def address(self) -> str:
        return cell_ref(self.row + 1, self.col + 1)


@dataclass
class SheetPlan:
    """Every cell of one owned sheet, plus column widths, frozen panes, print setup and
    charts.

    Print setup: ``landscape`` None decides by width (wider than :data:`PORTRAIT_WIDTH`
    characters of columns), ``fit_width`` fits the columns to ``pages_wide`` page widths
    (by default as many as :data:`FIT_WIDTH` characters a page need), and
    ``repeat_rows`` (first, last; 0-based) repeat on every printed page (default: the
    rows above the frozen pane).
    """

    title: str
    #: Cells placed one by one (titles, headers, notes, figures); long regular columns
    #: are :class:`Run` s in ``runs``. ``cells`` gives both, cell by cell.
    loose: list[Cell] = field(default_factory=list)
    widths: dict[int, float] = field(default_factory=dict)
    heights: dict[int, float] = field(default_factory=dict)
    freeze: tuple[int, int] | None = None
    status_cell: tuple[int, int] | None = None  # where the refresh writes the status line
    landscape: bool | None = None
    fit_width: bool = True
    pages_wide: int | None = None  # None: as many as FIT_WIDTH characters a page take
    repeat_rows: tuple[int, int] | None = None
    #: Where named columns of a row-by-row sheet are ("resid" → 3), for planners that
    #: add columns to a sheet another function laid out.
    columns: dict[str, int] = field(default_factory=dict)
    _taken: set[tuple[int, int]] = field(default_factory=set, repr=False)
    _by_cell: dict[tuple[int, int], Cell] | None = field(default=None, repr=False)
    charts: list[ChartPlan] = field(default_factory=list)  # native charts on this sheet
    runs: list[Run] = field(default_factory=list)
    #: Rows of long texts written a cell at a time (see :class:`Span`).
    spans: list[Span] = field(default_factory=list)
    #: Per column: the runs' first rows and the runs, sorted (see ``_column_runs``).
    _index: dict[int, tuple[list[int], list[Run]]] = field(default_factory=dict, repr=False)
    _indexed: int = field(default=0, repr=False)

    @property
    def cells(self) -> list[Cell]:
        """Every cell: the loose ones, then each run's and span's cells (built on each call)."""
        out = list(self.loose)
        for run in self.runs:
            out += [Cell(r, c, v, f, run.style) for r, c, v, f in run.cells()]
        for sp in self.spans:
            out += [Cell(r, c, v, None, sp.style) for r, c, v, _ in sp.cells()]
        return out

    def _column_runs(self, col: int) -> tuple[list[int], list[Run]]:
        """The runs of one column sorted by first row, with their first rows (for bisect);
        rebuilt when ``runs`` changed other than through :meth:`run`."""
        if self._indexed != len(self.runs):
            index: dict[int, tuple[list[int], list[Run]]] = {}
            for u in sorted((u for u in self.runs if u.n), key=lambda u: (u.col, u.row0)):
                starts, runs = index.setdefault(u.col, ([], []))
                starts.append(u.row0)
                runs.append(u)
            self._index, self._indexed = index, len(self.runs)
        return self._index.get(col, ([], []))

    def _run_at(self, row: int, col: int) -> Run | None:
        starts, runs = self._column_runs(col)
        k = bisect.bisect_right(starts, row) - 1
        return runs[k] if k >= 0 and row <= runs[k].last else None

    def run(self, col: int, row0: int, values: Sequence[Scalar] | np.ndarray | Lazy,
            formula: Template | None = None, style: str = "text") -> Run:
        """Add a column run: rows row0 … row0+len(values)-1 of ``col`` (0-based), with
        cached ``values`` and, if given, the formula ``template`` (text starting '=').
        Lazy values are checked for NaN and infinity as the writer makes them."""
        if formula is not None and not formula.text.startswith("="):
            raise ValueError(f"formula without '=': {formula.text}")
        if formula is not None and any(a is not None and len(a) != len(values)
                                       for a in formula.args):
            raise ValueError(f"{self.title}: a formula vector's length differs from the values'")
        if style not in STYLES and not style.startswith(("user:", "userb:")):
            raise KeyError(style)
        if isinstance(values, np.ndarray) and values.dtype.kind == "f" \
                and not np.isfinite(values).all():
            raise ValueError(f"{self.title}: a run of column {col + 1} holds NaN or infinity")
        run = Run(col, row0, values, style, formula)
        if run.n == 0:
            return run
        starts, runs = self._column_runs(col)
        k = bisect.bisect_right(starts, run.last)  # runs[:k] start at or above run's last row
        if k and runs[k - 1].last >= row0:
            raise ValueError(f"{self.title}: runs overlap in column {cell_ref(1, col + 1)}")
        clash = next(((r, c) for r, c in self._taken if c == col and row0 <= r <= run.last), None)
        if clash is not None:
            raise ValueError(f"{self.title}: cell {cell_ref(clash[0] + 1, col + 1)} planned twice")
        self.runs.append(run)
        starts.insert(k, row0)
        runs.insert(k, run)
        if not self._index.get(col):
            self._index[col] = (starts, runs)
        self._indexed += 1
        return run

    def span(self, row: int, col0: int, values: Sequence[str], style: str = "text") -> Span:
        """Add a row of texts: columns col0 … col0+len(values)-1 of ``row`` (0-based)."""
        if style not in STYLES:
            raise KeyError(style)
        sp = Span(row, col0, values, style)
        cols = range(col0, col0 + sp.n)
        if any((row, c) in self._taken or self._run_at(row, c) is not None for c in cols):
            raise ValueError(f"{self.title}: a cell of row {row + 1} planned twice")
        self._taken.update((row, c) for c in cols)
        self.spans.append(sp)
        return sp

    def put(self, row: int, col: int, value: Scalar, formula: str | None = None,
            style: str = "text", link: str | None = None) -> Cell:
        """Add a cell (a formula must start with '=') and return it."""
        if formula is not None and not formula.startswith("="):
            raise ValueError(f"formula without '=': {formula}")
        if style not in STYLES and not style.startswith(("user:", "userb:")):
            raise KeyError(style)
        if link is not None and formula is not None:
            raise ValueError("a hyperlink cell holds text, not a formula")
        if (row, col) in self._taken or self._run_at(row, col) is not None:
            raise ValueError(f"{self.title}: cell {cell_ref(row + 1, col + 1)} planned twice")
        self._taken.add((row, col))
        cell = Cell(row, col, value, formula, style, link)
        if style == "head":  # column headers wrap onto two lines
            self.heights.setdefault(row, 30.0)
        self.loose.append(cell)
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

    def last_row(self) -> int:
        """The last row holding a cell (-1 for an empty sheet)."""
        return max([c.row for c in self.loose] + [u.last for u in self.runs if u.n]
                   + [sp.row for sp in self.spans if sp.n], default=-1)

    def last_col(self) -> int:
        """The last column holding a cell (-1 for an empty sheet)."""
        return max([c.col for c in self.loose] + [u.col for u in self.runs if u.n]
                   + [sp.col0 + sp.n - 1 for sp in self.spans if sp.n], default=-1)

    def is_free(self, row: int, col: int) -> bool:
        return (row, col) not in self._taken and self._run_at(row, col) is None

    def values_in(self, col: int, row1: int, row2: int) -> list[Scalar] | np.ndarray | Lazy:
        """Cached values planned in rows row1..row2 of a column (None where nothing is);
        inside one run of numbers, a read-only view of its float64 values, or of a lazy
        run a lazy vector of them (a chart reads a whole 1,000,000-row column; a list of
        floats would cost 32 bytes a row)."""
        run = self._run_at(row1, col)
        if run is not None and row2 <= run.last:
            held = run.values
            a, b = row1 - run.row0, row2 - run.row0 + 1
            if isinstance(held, Lazy) and held.dtype == np.float64:  # still made on use
                return Lazy(b - a, lambda i, j: held[a + i:a + j])
            if isinstance(held, np.ndarray) and held.dtype == np.float64:
                view = held[a:b].view()
                view.flags.writeable = False
                return view
            return run.scalars(row1 - run.row0, row2 - run.row0 + 1)
        return [self.value_at(r, col) for r in range(row1, row2 + 1)]

    def value_at(self, row: int, col: int) -> Scalar:
        """The cached value planned at a cell (None when nothing is planned there)."""
        run = self._run_at(row, col)
        if run is not None:
            return run.scalars(row - run.row0, row - run.row0 + 1)[0]
        if self._by_cell is None or len(self._by_cell) != len(self.loose):
            self._by_cell = {(c.row, c.col): c for c in self.loose}
        cell = self._by_cell.get((row, col))
        if cell is None:
            sp = next((sp for sp in self.spans
                       if sp.row == row and sp.col0 <= col < sp.col0 + sp.n), None)
            return None if sp is None else sp.values[col - sp.col0]
        return cell.value

    def fit_columns(self) -> None:
        """Widen columns so header words never break mid-word and values fit.

        A header may wrap onto two lines at spaces: its column gets the longer of its
        longest word and half its length (plus a margin). Numbers take about 12 characters;
        identifiers, labels and class texts their length, up to 40. Notes, titles and
        cautions overflow to the right and do not widen a column. Explicit widths stay as
        a lower bound.
        """
        need: dict[int, float] = {}
        for u in self.runs:
            vals = u.values
            if u.style in ("note", "title", "caution", "colnote", "flag") or not u.n:
                continue
            arr = is_numeric(vals)
            if u.style in ("int", "row"):
                top = (max((float(np.abs(b).max(initial=0)) for b in blocks(vals)), default=0)
                       if arr else max((abs(float(v)) for v in whole(vals)
                                        if isinstance(v, (int, float))
                                        and not isinstance(v, bool)), default=0))
                w = max(6, len(f"{int(top):,}") + 3)
            elif arr:
                w = 12
            else:
                vals = whole(vals)
                texts = [v for v in vals if type(v) is str]
                w = max(12 if len(texts) < len(vals) and any(
                            isinstance(v, (int, float)) and not isinstance(v, bool)
                            for v in vals) else 0,
                        min(40, max(map(len, texts), default=-2) + 2))
            need[u.col] = max(need.get(u.col, 0), w)
        taken = {(c.row, c.col) for c in self.loose if c.value not in (None, "")}
        for c in self.loose:
            if c.style in ("note", "title", "caution", "colnote", "flag") or c.value is None:
                continue
            if c.style == "head":
                text = str(c.value)
                words = max((len(w) for w in text.split()), default=0)
                w = max(words + 2, math.ceil(len(text) / 2) + 3)
            elif isinstance(c.value, (int, float)) and not isinstance(c.value, bool):
                w = 12 if c.style not in ("int", "row") else max(6, len(f"{c.value:,}") + 3)
            elif (c.row, c.col + 1) not in taken:
                continue  # text with room to its right overflows into it
            else:
                w = min(40, len(str(c.value)) + 2)
            need[c.col] = max(need.get(c.col, 0), w)
        for col, width in need.items():
            self.widths[col] = max(self.widths.get(col, 0), float(width))

    def total_width(self) -> float:
        """Characters of width of the used columns (default width 8.43)."""
        last = max([c.col for c in self.loose] + [u.col for u in self.runs]
                   + [sp.col0 + sp.n - 1 for sp in self.spans], default=-1)
        return sum(self.widths.get(c, 8.43) for c in range(last + 1))


#: A sheet wider than this many characters of columns prints landscape.
PORTRAIT_WIDTH = 100
#: Characters of columns printed on one page width; a wider sheet is printed as many
#: pages wide as it takes (shrunk any further it would be too small to read).
FIT_WIDTH = 200


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
