"""Render sheet plans into a standalone xlsx package (owned sheets only) with xlsxwriter.

The grafter then moves these sheet parts into the user's package; the package
written here is a temporary file and never the user's workbook.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Any

import xlsxwriter
from xlsxwriter.worksheet import Worksheet

from ..sheets.plan import FIT_WIDTH, PORTRAIT_WIDTH, STYLES, BookPlan, SheetPlan

__all__ = ["render"]


#: Functions with dotted names need the _xlfn. prefix in the file, or engines show #NAME?
#: (docs/engine-facts.md, F1). Only functions sheet plans may use are listed.
_DOTTED = re.compile(
    r"(?<![\w.])((?:STDEV|VAR)\.[PS]|T\.(?:DIST(?:\.2T|\.RT)?|INV(?:\.2T)?)|F\.(?:DIST|INV)(?:\.RT)?"
    r"|NORM\.S?\.?(?:DIST|INV)|CHISQ\.(?:DIST|INV)(?:\.RT)?|PERCENTILE\.(?:INC|EXC)"
    r"|QUARTILE\.(?:INC|EXC)|MODE\.SNGL|RANK\.EQ|CONFIDENCE\.T)\("
)


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
        formula = formula.removeprefix("{").removeprefix("=").removesuffix("}")
        if "_xlfn." in formula or "." not in formula:
            return formula
        return _DOTTED.sub(r"_xlfn.\1(", formula)

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


def render(plan: BookPlan, path: str | Path, date1904: bool = False) -> Path:
    """Write every planned sheet, in order, to a new xlsx at ``path``; return the path."""
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
    for sheet in plan.sheets:
        ws = wb.add_worksheet(sheet.title, worksheet_class=_ExactWorksheet)
        _print_setup(ws, sheet)
        for col, width in sheet.widths.items():
            ws.set_column(col, col, width)
        for row, height in sheet.heights.items():
            ws.set_row(row, height)
        if sheet.freeze:
            ws.freeze_panes(*sheet.freeze)
        for c in sheet.cells:
            fmt = formats[c.style]
            if c.link is not None:
                # an internal link: a location in this workbook, no relationship part
                ws.write_url(c.row, c.col, f"internal:{c.link}", fmt, str(c.value))
            elif c.formula is not None:
                value = c.value
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
    wb.close()
    return Path(path)
