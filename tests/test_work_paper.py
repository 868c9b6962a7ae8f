"""Sheets that read like a finished work paper: identifiers beside every row, the answer
first, pass/fail checks, per-method cautions, print setup and links.

The identifier tests recalculate in LibreOffice and compare each identifier cell with the
user's own cell (read from the original book with python-calamine), so "shows the
user's value" is checked against the engine, not against what sheetfit cached.
"""

from __future__ import annotations

import re
import shutil
import zipfile
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import python_calamine
from books import make_book

from sheetfit.methods import REGISTRY
from sheetfit.methods.least_squares import STANDING as LS_STANDING
from sheetfit.owned import INDEX_SHEET, sheet_title
from sheetfit.refresh import refresh
from sheetfit.sheets.common import GENERAL_CAUTIONS, check_cell
from sheetfit.sheets.plan import decimals_shown

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "example_books"


def _rows(path: Path, title: str) -> list[list[Any]]:
    book = python_calamine.load_workbook(str(path))
    return book.get_sheet_by_name(title).to_python(skip_empty_area=False)


def _texts(path: Path, title: str) -> list[str]:
    return [str(v) for row in _rows(path, title) for v in row if isinstance(v, str) and v]


def _a1(row0: int, col0: int) -> str:
    letters, n = "", col0 + 1
    while n:
        n, r = divmod(n - 1, 26)
        letters = chr(65 + r) + letters
    return f"{letters}{row0 + 1}"


def _recalc(engine, path: Path) -> dict[tuple[str, str], Any]:
    from engine.compare import assert_cached_values_hold

    # 1e-9 relative / 1e-12 absolute: two engines summing in different orders
    assert_cached_values_hold(path, engine, rel=1e-9, abs_=1e-12)
    return {k: c.value for k, c in engine.recalculate(path).cells.items()}


def _key_cells(out: Path, title: str, head_row: int, key: str, row_col: int = 0
               ) -> list[tuple[str, int]]:
    """(address of the identifier cell, sheet row it stands beside) for every data row."""
    rows = _rows(out, title)
    col = rows[head_row].index(key, row_col)
    found = []
    for r in range(head_row + 1, len(rows)):
        row = rows[r]
        if len(row) <= col or not isinstance(row[row_col], (int, float)) or row[row_col] == "":
            break
        found.append((_a1(r, col), int(row[row_col])))
    return found


# --- identifiers ------------------------------------------------------------------------

#: (book, user's data sheet, identifier header, per-row sheets as (kind, header row))
_PER_ROW = {
    "field_jobs": ("Jobs", "job", [("similar", "std", 5), ("similar", "nbrs", 3),
                                   ("similar", "fitted", 3), ("similar", "resid", 3),
                                   ("byhours", "fitted", 3), ("byhours", "resid", 3)]),
    "open_invoices": ("Paid", "invoice", [("late", "std", 5), ("late", "nbrs", 3),
                                          ("late", "fitted", 3)]),
}


@pytest.mark.parametrize("book", list(_PER_ROW))
def test_identifiers_on_every_per_row_sheet_equal_the_users_cells(engine, tmp_path: Path,
                                                                   book: str) -> None:
    """Every per-row sheet shows the row's identifier; recalculated, it is the user's cell."""
    src = EXAMPLES / f"{book}.xlsx"
    out = tmp_path / f"{book}.xlsx"
    refresh(src, out)
    fresh = _recalc(engine, out)
    data_sheet, key, sheets = _PER_ROW[book]
    user = _rows(src, data_sheet)
    kcol = user[0].index(key)
    for tag, kind, head in sheets:
        title = sheet_title(tag, kind)
        cells = _key_cells(out, title, head, key)
        assert len(cells) >= 60, (title, len(cells))
        for address, sheet_row in cells:
            assert fresh[(title, address)] == user[sheet_row - 1][kcol], (title, address)


def test_work_list_shows_invoice_number_and_amount(engine, tmp_path: Path) -> None:
    """The work list of open invoices: each ranked row carries its invoice number and amount."""
    src = EXAMPLES / "open_invoices.xlsx"
    out = tmp_path / "oi.xlsx"
    refresh(src, out)
    fresh = _recalc(engine, out)
    title = sheet_title("late", "summary")
    rows = _rows(out, title)
    head = next(i for i, r in enumerate(rows) if r and r[0] == "rank")
    assert rows[head][1:4] == ["new row", "invoice", "amount"]
    user = _rows(src, "Open")
    shares = []
    for r in range(head + 1, head + 9):
        sheet_row = int(rows[r][1])
        assert fresh[(title, _a1(r, 2))] == user[sheet_row - 1][0]  # invoice number
        assert fresh[(title, _a1(r, 3))] == user[sheet_row - 1][1]  # amount
        shares.append(rows[r][4])
    assert shares == sorted(shares, reverse=True)  # ranked by share late


def test_blank_and_numeric_identifiers_recalculate(engine, tmp_path: Path) -> None:
    """A blank identifier shows blank (not 0) after recalculation; numbers stay numbers."""
    rng = np.random.default_rng(5)
    data: list[list[Any]] = [["id", "ref", "cost", "hours"]]
    for i in range(14):
        h = float(i + 1)
        data.append([None if i == 3 else f"J-{i}", 1000.0 + i * 0.25,
                     float(np.round(50 + 9 * h + rng.normal(0, 4), 2)), h])
    data[6][2] = None  # a left-out row, listed with its identifiers
    p = make_book(tmp_path / "k.xlsx", {"Data": data, "Opts": [["method", "strip_mean"],
                                                              ["width", 2]]},
                  {"sf_m_y": "Data!$C$1:$C$15", "sf_m_x": "Data!$D$1:$D$15",
                   "sf_m_key": "Data!$A$1:$B$15", "sf_m_opts": "Opts!$A$1:$B$2"})
    refresh(p)
    fresh = _recalc(engine, p)
    title = sheet_title("m", "fitted")
    rows = _rows(p, title)
    assert rows[3][:3] == ["data row", "id", "ref"]
    by_row = {int(r[0]): r for r in rows[4:] if isinstance(r[0], float) and r[0] != ""}
    # Data row 5 (the blank id) is the fourth row listed: sheet row 8
    assert by_row[5][1] == "" and fresh[(title, "B8")] == ""
    assert fresh[(title, "C8")] == 1000.75 and fresh[(title, "B5")] == "J-0"
    head = rows[3].index("left-out data row")
    assert rows[4][head:head + 3] == [7.0, "J-5", 1001.25]


# --- the answer first, flags ------------------------------------------------------------

def test_strip_new_row_far_from_the_data_is_counted_and_flagged(engine, tmp_path: Path) -> None:
    """A new row with no data within ± width: count 0 beside its estimate, a flag, a caution."""
    x = [float(v) for v in range(0, 40, 2)]
    data = [["cost", "crew"]] + [[10.0 + 3 * v, v] for v in x]
    p = make_book(tmp_path / "s.xlsx",
                  {"Data": data, "Opts": [["method", "strip_mean"], ["width", 1.5]],
                   "New": [["quote", "crew"], ["Q-1", 10.0], ["Q-2", 45.0]]},
                  {"sf_s_y": "Data!$A$1:$A$21", "sf_s_x": "Data!$B$1:$B$21",
                   "sf_s_opts": "Opts!$A$1:$B$2", "sf_s_new": "New!$B$1:$B$3",
                   "sf_s_newkey": "New!$A$1:$A$3"})
    report = refresh(p)
    _recalc(engine, p)
    rows = _rows(p, sheet_title("s", "strip"))
    head = rows[3]
    assert head[:5] == ["new row", "quote", "crew", "predicted cost", "rows within ± width"]
    q1, q2 = rows[4], rows[5]
    assert q1[1] == "Q-1" and q1[4] == 1.0 and "only 1 data row " in q1[5]  # x = 10 alone
    assert q2[1] == "Q-2" and q2[4] == 0.0 and "no data within ± width" in q2[5]
    assert "extrapolated" in q2[5]
    (m,) = report.models
    assert any("fewer than 5 data rows within ± width" in c for c in m.cautions)
    assert any("fewer than 5 data rows" in t for t in _texts(p, INDEX_SHEET))


def test_neighbour_answer_block_comes_first(tmp_path: Path) -> None:
    """The first sheet opens with the quotes' estimates, spread and identifiers."""
    out = tmp_path / "fj.xlsx"
    refresh(EXAMPLES / "field_jobs.xlsx", out)
    rows = _rows(out, sheet_title("similar", "summary"))
    assert rows[3][:4] == ["new row", "quote", "predicted cost", "smallest of the k"]
    assert [r[1] for r in rows[4:7]] == ["Q-501", "Q-502", "Q-503"]
    preds = _rows(out, sheet_title("similar", "nbrs"))
    pcol = preds[3].index("prediction (mean)")
    start = next(i for i, r in enumerate(preds) if r and r[0] == "new row") + 1
    assert [r[2] for r in rows[4:7]] == [preds[start + i][pcol] for i in range(3)]
    status = next(r[0] for r in rows if isinstance(r[0], str) and r[0].startswith("Status:"))
    assert status.startswith("Status: fitted")


# --- checks -----------------------------------------------------------------------------

def test_check_cell_says_holds_or_fails() -> None:
    """The verdict formula and its cached value agree on both sides of the tolerance."""
    assert check_cell("C8", -1.3e-15, 1e-9) == ('=IF(ABS(C8)<=1E-09,"holds","FAILS")', "holds")
    assert check_cell("C8", 2e-9, 1e-9)[1] == "FAILS"
    f, v = check_cell("B9", 5e-7, 1e-9, "B5", 400.0)  # 5e-7 > 1e-9 × 400
    assert f == '=IF(ABS(B9)<=1E-09*MAX(1,ABS(B5)),"holds","FAILS")' and v == "FAILS"
    assert check_cell("B9", 5e-7, 1e-9, "B5", 1000.0)[1] == "holds"


def test_check_verdicts_recalculate(engine, tmp_path: Path) -> None:
    """The k-table check and the index check read 'holds' in LibreOffice too."""
    out = tmp_path / "oi.xlsx"
    refresh(EXAMPLES / "open_invoices.xlsx", out)
    fresh = _recalc(engine, out)
    verdicts = {k: v for k, v in fresh.items() if v in ("holds", "FAILS")}
    sheets = {k[0] for k in verdicts}
    assert {INDEX_SHEET, sheet_title("late", "summary")} <= sheets
    assert set(verdicts.values()) == {"holds"}


# --- cautions ---------------------------------------------------------------------------

def test_cautions_follow_the_method(tmp_path: Path) -> None:
    """A neighbour/strip-only book says nothing of least squares; each method's cautions
    stand on its own first sheet; the general ones everywhere."""
    out = tmp_path / "fj.xlsx"
    refresh(EXAMPLES / "field_jobs.xlsx", out)
    index = " ".join(_texts(out, INDEX_SHEET))
    for text in LS_STANDING:
        assert text not in index
    assert "in-sample" not in index and "fitted line" not in index
    for text in GENERAL_CAUTIONS:
        assert text[:60] in index
    for tag, method, first in (("similar", "neighbour_mean", "summary"),
                               ("byhours", "strip_mean", "strip")):
        sheet = " ".join(_texts(out, sheet_title(tag, first)))
        assert REGISTRY[method].standing
        for text in REGISTRY[method].standing:
            assert text[:60] in sheet, (tag, text)
        assert "in-sample" not in sheet
    ls = tmp_path / "dc.xlsx"
    refresh(EXAMPLES / "delivery_costs.xlsx", ls)
    coef = " ".join(_texts(ls, sheet_title("route", "coef")))
    assert all(t[:60] in coef for t in LS_STANDING)
    for method in ("neighbour_mean", "neighbour_vote", "strip_mean"):
        assert not any(t[:60] in coef for t in REGISTRY[method].standing)


# --- print setup, links -----------------------------------------------------------------

def _owned_parts(path: Path) -> dict[str, str]:
    """Sheet title → its worksheet XML, for the owned sheets."""
    with zipfile.ZipFile(path) as z:
        wb = z.read("xl/workbook.xml").decode()
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
        targets = dict(re.findall(r'Id="(rId\d+)"[^>]*Target="([^"]+)"', rels))
        targets.update({a: b for b, a in re.findall(r'Target="([^"]+)"[^>]*Id="(rId\d+)"', rels)})
        out = {}
        for name, rid in re.findall(r'<sheet name="([^"]+)" sheetId="\d+" r:id="(rId\d+)"', wb):
            if name.startswith("sf "):
                out[name] = z.read("xl/" + targets[rid].lstrip("/").removeprefix("xl/")).decode()
        return out


def test_print_setup_and_links(tmp_path: Path) -> None:
    """Every owned sheet prints fitted to page width with its header rows repeated; the
    index links to every sheet of every model and each links back, with no relationship."""
    book = tmp_path / "fj.xlsx"
    shutil.copy(EXAMPLES / "field_jobs.xlsx", book)
    refresh(book)
    refresh(book)  # a second refresh leaves one set of print titles, not two
    every = _owned_parts(book)
    # the charts sheets print at a fixed scale, one chart a page (tests/test_charts.py)
    parts = {t: x for t, x in every.items() if not t.endswith(" charts")}
    with zipfile.ZipFile(book) as z:
        wb = z.read("xl/workbook.xml").decode()
        names = z.namelist()
    titles = set(re.findall(r'<sheet name="([^"]+)"', wb))
    assert len(parts) == 9 and len(every) == 11
    for title, xml in parts.items():
        assert re.search(r'<pageSetup[^>]*fitToHeight="0"', xml), title
        assert '<pageSetUpPr fitToPage="1"/>' in xml, title
        targets = re.findall(r'<hyperlink ref="[A-Z]+\d+" location="([^"]+)"', xml)
        assert "r:id" not in "".join(re.findall(r"<hyperlink [^>]*>", xml))
        for t in targets:
            sheet = t.rsplit("!", 1)[0].strip("'").replace("''", "'")
            assert sheet in titles, (title, t)
        if title == INDEX_SHEET:
            linked = {t.rsplit("!", 1)[0].strip("'") for t in targets}
            assert linked == set(every) - {INDEX_SHEET}
        else:
            assert f"'{INDEX_SHEET}'!A1" in targets, title
    with zipfile.ZipFile(book) as z:  # internal links need no relationship (charts' do)
        rels = [z.read(n).decode() for n in names if "worksheets/_rels" in n]
    assert not [r for r in rels if "relationships/hyperlink" in r]
    print_titles = re.findall(r'<definedName name="_xlnm.Print_Titles" localSheetId="(\d+)">', wb)
    assert len(print_titles) == len(set(print_titles)) >= 6
    landscape = [t for t, x in parts.items() if 'orientation="landscape"' in x]
    assert sheet_title("similar", "nbrs") in landscape


# --- number formats ---------------------------------------------------------------------

def test_number_formats_follow_the_quantity(tmp_path: Path) -> None:
    """Amounts show the data's decimals with separators, rates as percentages."""
    assert decimals_shown([642.48, 1000.5, 7.0]) == 2
    assert decimals_shown([3.0, 40.0]) == 0
    assert decimals_shown([0.1234567]) == 4
    out = tmp_path / "oi.xlsx"
    refresh(EXAMPLES / "open_invoices.xlsx", out)
    with zipfile.ZipFile(out) as z:
        styles = z.read("xl/styles.xml").decode()
    codes = set(re.findall(r'formatCode="([^"]+)"', styles))
    assert {"0.0%_)", "#,##0_)", "#,##0.00_)"} <= codes
