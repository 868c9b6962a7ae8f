"""Result sheets show amounts in the number format of the user's own data cells."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import openpyxl
import pytest
import xlsxwriter

from sheetfit.owned import sheet_title
from sheetfit.reader.formats import amount_format
from sheetfit.refresh import refresh


@pytest.mark.parametrize(("code", "kept"), [
    ("General", False), ("@", False), ("mm-dd-yy", False), ("d-mmm-yy", False),
    ("[h]:mm:ss", False), ("yyyy-mm-dd", False),
    ("#,##0.00", True), ("0.0%", True), ('"$"#,##0.00', True), ('#,##0 "km"', True),
    ("#,##0.00;[Red](#,##0.00)", True), ("0.00E+00", True),
])
def test_which_formats_count_as_amounts(code: str, kept: bool) -> None:
    """Dates, times, text and General keep sheetfit's own formats (a date format on a
    fitted cost would show a date); plain-number formats are the user's to keep."""
    assert (amount_format(code) == code) is kept


def _book(path: Path) -> Path:
    wb = xlsxwriter.Workbook(str(path))
    wb.set_properties({"created": dt.datetime(2026, 1, 1)})
    ws = wb.add_worksheet("Data")
    money = wb.add_format({"num_format": '"$"#,##0.00'})
    km = wb.add_format({"num_format": '#,##0 "km"'})
    ws.write_row(0, 0, ["cost", "distance"])
    for i in range(12):
        ws.write_number(1 + i, 0, 1000.0 + 37.5 * i + (i % 3) * 11.25, money)
        ws.write_number(1 + i, 1, 120.0 + 15 * i, km)
    wb.define_name("sf_f_y", "=Data!$A$1:$A$13")
    wb.define_name("sf_f_x", "=Data!$B$1:$B$13")
    wb.close()
    return path


def test_result_sheets_use_the_data_cells_formats(tmp_path: Path) -> None:
    path = _book(tmp_path / "f.xlsx")
    refresh(path)
    wb = openpyxl.load_workbook(path)
    fitted = wb[sheet_title("f", "fitted")]
    head = [c.value for c in fitted[4]]
    obs = fitted.cell(5, head.index("cost (observed)") + 1)
    fit = fitted.cell(5, head.index("fitted cost") + 1)
    dist = fitted.cell(5, head.index("distance") + 1)
    assert obs.number_format == '"$"#,##0.00' and fit.number_format == '"$"#,##0.00'
    assert dist.number_format == '#,##0 "km"'
    resid = wb[sheet_title("f", "resid")]
    rhead = [c.value for c in resid[4]]
    assert resid.cell(5, rhead.index("residual") + 1).number_format == '"$"#,##0.00'


def test_date_identifiers_show_as_dates(tmp_path: Path) -> None:
    """A month kept as a date cell shows as a date beside its row, not as a serial."""
    wb = xlsxwriter.Workbook(str(tmp_path / "d.xlsx"))
    ws = wb.add_worksheet("Data")
    month = wb.add_format({"num_format": "mmm yyyy"})
    ws.write_row(0, 0, ["month", "cost", "units"])
    for i in range(10):
        ws.write_datetime(1 + i, 0, dt.datetime(2026, 1 + i, 1), month)
        ws.write_number(1 + i, 1, 500.0 + 12 * i + (i % 4))
        ws.write_number(1 + i, 2, 10.0 + i)
    for name, ref in {"sf_d_y": "=Data!$B$1:$B$11", "sf_d_x": "=Data!$C$1:$C$11",
                      "sf_d_key": "=Data!$A$1:$A$11"}.items():
        wb.define_name(name, ref)
    wb.close()
    refresh(tmp_path / "d.xlsx")
    fitted = openpyxl.load_workbook(tmp_path / "d.xlsx")[sheet_title("d", "fitted")]
    head = [c.value for c in fitted[4]]
    cell = fitted.cell(5, head.index("month") + 1)
    assert cell.number_format == "mmm yyyy" and cell.value.startswith("=IF(ISBLANK(")


def test_one_scan_reads_the_formats_of_a_whole_row(tmp_path: Path) -> None:
    """``BookValues.number_format`` of every cell of a row far down a sheet (where new rows
    sit under thousands of data rows) equals openpyxl's reading of the same cells; a cell
    the row does not hold has no format (None); the row is scanned once for all of them."""
    from sheetfit.reader import values as values_mod
    from sheetfit.reader.package import open_package
    from sheetfit.refresh import _values

    path = tmp_path / "rows.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    codes = {0: "0.00", 1: "#,##0", 2: None, 4: "0.0%", 27: '"$"#,##0.00'}  # D, Z.. left empty
    for r in range(3000):
        ws.write_row(r, 0, [float(r), r * 2.5, r % 7])
    for c, code in codes.items():
        ws.write_number(3000, c, 1.25 + c, wb.add_format({"num_format": code}) if code else None)
    wb.close()
    scans = []
    real = values_mod.row_style_indices
    pkg = open_package(path)
    with _values(pkg, path) as values:
        values_mod.row_style_indices = lambda fh, row: scans.append(row) or real(fh, row)
        try:
            got = {c: values.number_format("Data", 3001, c + 1) for c in range(30)}
        finally:
            values_mod.row_style_indices = real
    sheet = openpyxl.load_workbook(path)["Data"]
    for c in range(30):
        want = sheet.cell(3001, c + 1).number_format if c in codes else None
        assert got[c] == want, c
    assert scans == [3001]
