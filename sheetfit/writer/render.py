"""Render sheet plans into a standalone xlsx package (owned sheets only) with xlsxwriter.

The grafter then moves these sheet parts into the user's package; the package
written here is a temporary file and never the user's workbook.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, ClassVar

import xlsxwriter
from xlsxwriter.worksheet import Worksheet

from ..sheets.chartplan import ChartPlan
from ..sheets.columns import Run, Span
from ..sheets.plan import FIT_WIDTH, PORTRAIT_WIDTH, STYLES, BookPlan, SheetPlan, style_format
from .dotted import with_prefixes

__all__ = ["Rendition", "render"]


@dataclass(frozen=True)
class Rendition:
    """The rendered package and what the graft streams into it: each sheet's column runs
    and rows of long texts (by title) and each of their styles' cell-format index in the
    rendered styles part (None: the default format)."""

    path: Path
    runs: dict[str, list[Run]] = field(default_factory=dict)
    styles: dict[str, int | None] = field(default_factory=dict)
    spans: dict[str, list[Span]] = field(default_factory=dict)


class _RowsAsWritten(dict[int, dict[int, Any]]):
    """A cell table that reads a row never written as empty instead of adding it."""

    _NONE: ClassVar[dict[int, Any]] = {}

    def __missing__(self, row: int) -> dict[int, Any]:
        return self._NONE


class _ExactWorksheet(Worksheet):  # type: ignore[misc]
    """A worksheet that stores numbers with every digit and prefixes dotted functions once.

    xlsxwriter writes plain numbers with 16 significant digits, which does not
    round-trip every double: on an ill-conditioned fit (a degree-10 polynomial) the
    lost 17th digit of the coefficients moves fitted-value formulas by ~1e-9. Its
    formula preparation runs ~30 (or, with future functions on, ~150) regular
    expressions per formula: 54 of 67 s when profiling a 20,000-row refresh. One
    pass over the functions sheet plans use does the same job.
    """

    def _xml_formula_element(self, formula: str, result: Any, attributes: Any = ()) -> None:
        # xlsxwriter leaves an empty-text result untyped (an empty number); say it is text,
        # so viewers that do not recalculate show a blank, as the formula would.
        attributes = list(attributes)
        if result == "" and all(k != "t" for k, _ in attributes):
            attributes.append(("t", "str"))
        super()._xml_formula_element(formula, result, attributes)

    def _prepare_formula(self, formula: str, expand_future_functions: bool = False) -> str:
        return with_prefixes(formula.removeprefix("{").removeprefix("=").removesuffix("}"))

    def _get_range_data(self, row_start: int, col_start: int, row_end: int,
                        col_end: int) -> list[Any]:
        # A chart's cached points: an #N/A formula result is a gap (no point), as the
        # engines plot it, not the 0 xlsxwriter would cache for text.
        data = super()._get_range_data(row_start, col_start, row_end, col_end)
        return [None if d == "#N/A" else d for d in data]

    def _write_rows(self) -> None:
        # xlsxwriter's cell table is a defaultdict, and its row loop reads table[row] for
        # every row from the first to the last: on a sheet whose runs are streamed later
        # (a loose note below a million-row run) that made an empty dict per row, about
        # 100 bytes each. Missing rows now read as empty without being stored.
        table: Any = self.__dict__["table"]
        self.table = _RowsAsWritten(table)
        try:
            super()._write_rows()
        finally:
            self.table = table

    def _xml_number_element(self, number: float, attributes: Any = ()) -> None:
        attr = "".join(f' {k}="{self._escape_attributes(v)}"' for k, v in attributes)
        self.fh.write(f"<c{attr}><v>{float(number)!r}</v></c>")


def _print_setup(ws: Worksheet, sheet: SheetPlan) -> None:
    """Printed for review: one page wide, landscape when wide, header rows on every page."""
    total = sheet.total_width()
    wide = total > PORTRAIT_WIDTH if sheet.landscape is None else sheet.landscape
    if wide:
        ws.set_landscape()
    else:
        ws.set_portrait()
    if sheet.fit_width:
        # as many pages wide as it takes to stay legible (FIT_WIDTH characters a page);
        # on a sheet of several pages the frozen columns (row, identifiers) repeat
        pages = sheet.pages_wide or max(1, math.ceil(total / FIT_WIDTH))
        ws.fit_to_pages(pages, 0)
        if pages > 1 and sheet.freeze and sheet.freeze[1] > 0:
            ws.repeat_columns(0, sheet.freeze[1] - 1)
    rows = sheet.repeat_rows
    if rows is None and sheet.freeze and sheet.freeze[0] > 0:
        rows = (0, sheet.freeze[0] - 1)
    if rows is not None:
        ws.repeat_rows(*rows)


def render(plan: BookPlan, path: str | Path, date1904: bool = False,
           bulk: bool = True) -> Rendition:
    """Write every planned sheet, in order, to a new xlsx at ``path``.

    With ``bulk`` (the default) the column runs of sheets without charts are left out of
    the package and handed to the graft (``writer._bulk``), which streams them into the
    user's package; otherwise (and on sheets with charts, whose cached points xlsxwriter
    reads from its own cells) every cell goes through xlsxwriter.
    """
    wb = xlsxwriter.Workbook(
        str(path),
        {
            # dotted functions get their _xlfn. prefix in _ExactWorksheet
            "use_future_functions": False,
            "strings_to_numbers": False,
            "strings_to_formulas": False,
            "strings_to_urls": False,
            "date_1904": date1904,
        },
    )
    formats: dict[str, Any] = {k: (wb.add_format(v) if v else None) for k, v in STYLES.items()}

    def fmt_of(style: str) -> Any:
        if style not in formats:  # a user's own number format (plan.style_format)
            formats[style] = wb.add_format(style_format(style))
        return formats[style]

    runs: dict[str, list[Run]] = {}
    spans: dict[str, list[Span]] = {}
    for sheet in plan.sheets:
        ws = wb.add_worksheet(sheet.title, worksheet_class=_ExactWorksheet)
        _print_setup(ws, sheet)
        for col, width in sheet.widths.items():
            ws.set_column(col, col, width)
        for row, height in sheet.heights.items():
            ws.set_row(row, height)
        if sheet.freeze:
            ws.freeze_panes(*sheet.freeze)
        streamed = bulk and not sheet.charts and bool(sheet.runs or sheet.spans)
        if streamed:
            runs[sheet.title] = sheet.runs
            spans[sheet.title] = sheet.spans
            for style in [u.style for u in sheet.runs] + [sp.style for sp in sheet.spans]:
                fmt = fmt_of(style)
                if fmt is not None:
                    fmt._get_xf_index()  # into the styles part although no cell here uses it
        for c in (sheet.loose if streamed else sheet.cells):
            fmt = fmt_of(c.style)
            if c.link is not None:
                # an internal link: a location in this workbook, no relationship part
                ws.write_url(c.row, c.col, f"internal:{c.link}", fmt, str(c.value))
            elif c.formula is not None:
                value = 0 if c.value is None else c.value  # xlsxwriter's default result
                if isinstance(value, bool):
                    value = "TRUE" if value else "FALSE"
                ws.write_formula(c.row, c.col, c.formula, fmt, value)
            elif c.value is None:
                if fmt is not None:
                    ws.write_blank(c.row, c.col, None, fmt)
            elif isinstance(c.value, bool):
                ws.write_boolean(c.row, c.col, c.value, fmt)
            elif isinstance(c.value, (int, float)):
                ws.write_number(c.row, c.col, c.value, fmt)
            else:
                ws.write_string(c.row, c.col, str(c.value), fmt)
        if sheet.charts:
            _charts(wb, ws, sheet)
    wb.close()
    used = {u.style for rs in runs.values() for u in rs} | {
        sp.style for ss in spans.values() for sp in ss}
    # _get_xf_index, not xf_index: a style whose properties equal another's (int and dec0)
    # shares that one's index, and xlsxwriter leaves its own xf_index unset
    return Rendition(Path(path), runs,
                     {k: None if formats[k] is None else formats[k]._get_xf_index()
                      for k in used}, spans)


#: Series colours: a blue and an orange that read apart in colour and in grey, then more.
_COLOURS = ("#1F5C99", "#D9661F", "#2E8B57", "#8E44AD", "#B8860B", "#C0392B", "#16A085",
            "#7F8C8D")
_SHAPES = ("circle", "square", "triangle", "diamond", "x", "star", "plus", "dash")
_CHART_PRINT_SCALE = 70
_GRID = {"visible": True, "line": {"color": "#E3E3E3", "width": 0.75}}
_AXIS_FONT = {"size": 9, "color": "#404040"}


def _charts(wb: xlsxwriter.Workbook, ws: Worksheet, sheet: SheetPlan) -> None:
    """Insert each planned chart at its anchor; each prints on its own page, and the
    cells below the last chart (the helper columns) start a new page."""
    bottom = 0
    for plan in sheet.charts:
        row, col = plan.anchor
        ws.insert_chart(row, col, _chart(wb, plan), {"object_position": 1})
        bottom = max(bottom, row + -(-plan.size[1] // 20) + 1)  # rows are 20 px high
    below = [r for r in [c.row for c in sheet.loose] + [u.row0 for u in sheet.runs if u.n]
             if r >= bottom] + [bottom for u in sheet.runs if u.row0 < bottom <= u.last]
    # a break one row above each later chart: an object touching a page's edge is
    # drawn (clipped) on that page too
    breaks = {p.anchor[0] - 1 for p in sheet.charts[1:]} | ({min(below)} if below else set())
    ws.set_h_pagebreaks(sorted(breaks))
    # A fit-to-width sheet ignores manual page breaks (docs/engine-facts.md, C1); a fixed
    # scale keeps one chart per page and a 960-px chart inside a landscape A4 or letter page.
    ws.set_print_scale(_CHART_PRINT_SCALE)


def _plain(text: str) -> str:
    """Chart text as text: xlsxwriter reads a name starting with '=' as a cell reference,
    so a header such as '=cost' gets a leading space."""
    return " " + text if text.startswith("=") else text


def _chart(wb: xlsxwriter.Workbook, plan: ChartPlan) -> Any:
    """One native chart from its plan: no 3-D, no fills, a legend only for several series."""
    chart = wb.add_chart({"type": plan.kind})
    hidden = []
    colour = 0
    for i, s in enumerate(plan.series):
        opts: dict[str, Any] = {"name": _plain(s.name), "values": "=" + s.y.ref()}
        if s.x is not None:
            opts["categories"] = "=" + s.x.ref()
        c = _COLOURS[colour % len(_COLOURS)]
        if s.look == "markers":
            # a shape per series too, so classes read apart when printed in grey
            opts["marker"] = {"type": _SHAPES[colour % len(_SHAPES)], "size": 5,
                              "fill": {"color": c}, "border": {"color": c}}
            colour += 1
        elif s.look == "line":
            opts["line"] = {"color": c, "width": 2}
            opts["marker"] = {"type": "none"}
            colour += 1
        elif s.look == "reference":
            opts["line"] = {"color": "#808080", "width": 1, "dash_type": "dash"}
            opts["marker"] = {"type": "none"}
        else:
            opts["fill"] = {"color": c}
            opts["border"] = {"none": True}
            colour += 1
        if not s.in_legend:
            hidden.append(i)
        chart.add_series(opts)
    chart.set_title({"name": _plain(plan.title), "name_font": {"size": 12, "bold": True}})
    x0, x1, y0, y1 = plan.bounds
    scatter = plan.kind == "scatter"
    chart.set_x_axis({"name": _plain(plan.x_title), "name_font": {"size": 10, "bold": False},
                      "num_font": _AXIS_FONT, "line": {"color": "#808080"},
                      "crossing": "min" if scatter else None,
                      "major_gridlines": _GRID if scatter else None,
                      "min": x0, "max": x1})
    chart.set_y_axis({"name": _plain(plan.y_title), "name_font": {"size": 10, "bold": False},
                      "num_font": _AXIS_FONT, "line": {"color": "#808080"},
                      "crossing": "min" if scatter else None,
                      "major_gridlines": _GRID, "min": y0, "max": y1})
    if plan.legend:
        chart.set_legend({"position": "bottom", "delete_series": hidden})
    else:
        chart.set_legend({"none": True})
    chart.set_chartarea({"border": {"none": True}})
    chart.set_size({"width": plan.size[0], "height": plan.size[1]})
    return chart
