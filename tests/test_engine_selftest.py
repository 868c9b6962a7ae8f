"""Self-test of the recalculation helper: the engine really recalculates, and says so clearly."""

from __future__ import annotations

import math
import zipfile
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest
import xlsxwriter
from engine.cached import CachedCell, cached_formula_values
from engine.compare import assert_cached_values_hold, compare_books, compare_to_cached
from engine.process import Engine, EngineCrashed, EngineTimeout
from engine.recalculated import RecalcCell

COEF_SHEET = "sf demo coef"

# Seeded data for the demo book: y = 1.5 + 0.75 x + noise.
_RNG = np.random.default_rng(20240601)
X = np.arange(1.0, 13.0)
Y = 1.5 + 0.75 * X + _RNG.normal(0.0, 0.3, X.size)


def _demo_formulas() -> dict[tuple[str, str], tuple[str, float | str | bool]]:
    """(sheet, cell) -> (formula, correct cached value) for the demo book."""
    slope, intercept = np.polyfit(X, Y, 1)
    n = X.size
    return {
        ("data", "D1"): (f"=SUM(A1:A{n})", float(X.sum())),
        ("data", "D2"): (f"=SLOPE(B1:B{n},A1:A{n})", float(slope)),
        ("data", "D3"): (f"=INDEX(LINEST(B1:B{n},A1:A{n}),1,1)", float(slope)),
        ("data", "D4"): (f"=STDEV.P(B1:B{n})", float(np.std(Y))),
        ("data", "D5"): (f"=SUMPRODUCT(A1:A{n},B1:B{n})", float(X @ Y)),
        ("data", "D6"): (f"='{COEF_SHEET}'!B2*2", float(2 * intercept)),
        ("data", "D7"): ('="n = "&COUNT(A:A)', f"n = {n}"),
        ("data", "D8"): ("=1/3", 1 / 3),
        ("data", "D9"): ("=A1*0.1+0.2", 0.1 * 1.0 + 0.2),  # 0.30000000000000004
        ("data", "D10"): ("=D1>0", True),
        (COEF_SHEET, "B2"): (f"=INTERCEPT(data!B1:B{n},data!A1:A{n})", float(intercept)),
    }


def _write_demo(path: Path, *, wrong: bool = False) -> dict[tuple[str, str], str]:
    """Write the demo book (cached values correct, or all deliberately wrong)."""
    formulas = _demo_formulas()
    with xlsxwriter.Workbook(str(path), {"use_future_functions": True}) as wb:
        data = wb.add_worksheet("data")
        coef = wb.add_worksheet(COEF_SHEET)
        sheets = {"data": data, COEF_SHEET: coef}
        for i, (x, y) in enumerate(zip(X, Y, strict=True)):
            data.write_number(i, 0, float(x))
            data.write_number(i, 1, float(y))
        coef.write_string("A2", "intercept")
        for (sheet, cell), (formula, value) in formulas.items():
            if wrong:
                if isinstance(value, bool):
                    value = not value
                elif isinstance(value, str):
                    value = value + " (stale)"
                else:
                    value = value + 1.0 + abs(value)
            sheets[sheet].write_formula(cell, formula, None, value)
    return {key: formula for key, (formula, _) in formulas.items()}


def _write_errors(path: Path) -> None:
    """A book whose formulas evaluate to errors: one cached as the error, one as a number."""
    with xlsxwriter.Workbook(str(path)) as wb:
        ws = wb.add_worksheet("errors")
        ws.write_formula("A1", "=1/0", None, "#DIV/0!")
        ws.write_formula("A2", "=1/0", None, 0)
        ws.write_formula("A3", "=NA()", None, "#N/A")


@pytest.fixture
def fresh_engine(engine: Engine) -> Iterator[Engine]:
    """A private engine for tests that break it on purpose (the session one stays intact)."""
    with Engine(engine.info) as own:
        yield own


def _listing(folder: Path) -> dict[str, tuple[int, int]]:
    return {p.name: (p.stat().st_size, p.stat().st_mtime_ns) for p in folder.iterdir()}


def test_correct_cached_values_hold(engine: Engine, tmp_path: Path) -> None:
    """Every formula of a correctly cached book reproduces its value in the engine."""
    book = tmp_path / "good.xlsx"
    formulas = _write_demo(book)
    checked = assert_cached_values_hold(book, engine)
    assert checked == len(formulas)


def test_wrong_cached_values_are_all_reported(engine: Engine, tmp_path: Path) -> None:
    """Deliberately stale cached values are all caught: the engine recalculated everything."""
    book = tmp_path / "stale.xlsx"
    formulas = _write_demo(book, wrong=True)
    mismatches = compare_to_cached(book, engine)
    assert mismatches.checked == len(formulas)
    assert {(m.sheet, m.address) for m in mismatches} == set(formulas)
    with pytest.raises(AssertionError, match=r"'sf demo coef'!B2: numbers differ"):
        assert_cached_values_hold(book, engine)


def test_values_come_back_in_full_double_precision(engine: Engine, tmp_path: Path) -> None:
    """Recalculated numbers are exact doubles, not 15-digit decimal renderings."""
    book = tmp_path / "good.xlsx"
    _write_demo(book)
    cells = engine.recalculate(book).cells
    assert cells[("data", "D8")].value == 1 / 3
    assert cells[("data", "D9")].value == 0.1 * 1.0 + 0.2 != 0.3
    slope = float(np.polyfit(X, Y, 1)[0])
    assert math.isclose(cells[("data", "D2")].value, slope, rel_tol=1e-13)  # type: ignore[arg-type]
    assert cells[("data", "D7")].value == f"n = {X.size}"
    assert cells[("data", "D10")].value == 1.0


def test_error_cells_are_reported_as_errors(engine: Engine, tmp_path: Path) -> None:
    """An error result is a mismatch unless the file caches that same error."""
    book = tmp_path / "errors.xlsx"
    _write_errors(book)
    recalculated = engine.recalculate(book).sheet("errors").cells
    assert recalculated["A1"].error == "#DIV/0!"
    assert recalculated["A1"].formula == "=1/0"
    assert recalculated["A3"].error == "#N/A"
    mismatches = compare_to_cached(book, engine)
    assert mismatches.checked == 3
    assert [(m.address, m.reason) for m in mismatches] == [("A2", "the engine shows an error")]
    assert mismatches[0].recalculated == "#DIV/0!"
    assert "errors'!A2" in mismatches.report()


def test_source_directory_gets_no_new_files(engine: Engine, tmp_path: Path) -> None:
    """Recalculating leaves the book's folder as it was: no lock file, no copy, same bytes."""
    book = tmp_path / "good.xlsx"
    _write_demo(book)
    before = _listing(tmp_path)
    content = book.read_bytes()
    engine.recalculate(book)
    assert _listing(tmp_path) == before
    assert book.read_bytes() == content


def test_two_recalculations_on_one_engine(engine: Engine, tmp_path: Path) -> None:
    """One running engine serves several books in a row without restarting."""
    first, second = tmp_path / "a.xlsx", tmp_path / "b.xlsx"
    _write_demo(first)
    _write_errors(second)
    pid = engine.ping()["pid"]
    assert len(engine.recalculate(first).cells) == len(_demo_formulas())
    assert len(engine.recalculate(second).cells) == 3
    assert len(engine.recalculate(first).cells) == len(_demo_formulas())
    assert engine.ping()["pid"] == pid


def test_large_book_recalculates(engine: Engine, tmp_path: Path) -> None:
    """A 20,000-row book with three formulas a row is recalculated and read in bulk."""
    rows = 20_000
    book = tmp_path / "large.xlsx"
    with xlsxwriter.Workbook(str(book), {"constant_memory": True}) as wb:
        ws = wb.add_worksheet("big")
        for r in range(rows):
            a, b = r * 0.5, 1.0 / (r + 1)
            ws.write_number(r, 0, a)
            ws.write_number(r, 1, b)
            ws.write_formula(r, 2, f"=A{r + 1}*B{r + 1}", None, a * b)
            ws.write_formula(r, 3, f"=A{r + 1}+B{r + 1}", None, a + b)
            ws.write_formula(r, 4, f"=C{r + 1}-D{r + 1}", None, a * b - (a + b))
    assert assert_cached_values_hold(book, engine) == 3 * rows


def _package(path: Path, sheet_xml: str) -> None:
    """A minimal hand-written package: shared and array formulas as other writers emit them."""
    ns = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
    rel = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
    parts = {
        "[Content_Types].xml": (
            '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
            '<Default Extension="rels" '
            'ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
            '<Default Extension="xml" ContentType="application/xml"/>'
            '<Override PartName="/xl/workbook.xml" ContentType='
            '"application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>'
            '<Override PartName="/xl/worksheets/sheet1.xml" ContentType='
            '"application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
            "</Types>"
        ),
        "_rels/.rels": (
            '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
            f'<Relationship Id="rId1" Type="{rel}/officeDocument" Target="xl/workbook.xml"/>'
            "</Relationships>"
        ),
        "xl/workbook.xml": (
            f'<workbook xmlns="{ns}" xmlns:r="{rel}"><sheets>'
            '<sheet name="hand made" sheetId="1" r:id="rId7"/></sheets></workbook>'
        ),
        "xl/_rels/workbook.xml.rels": (
            '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
            f'<Relationship Id="rId7" Type="{rel}/worksheet" '
            'Target="/xl/worksheets/sheet1.xml"/></Relationships>'
        ),
        "xl/worksheets/sheet1.xml": f'<worksheet xmlns="{ns}"><sheetData>{sheet_xml}'
        "</sheetData></worksheet>",
    }
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zf:
        for name, text in parts.items():
            zf.writestr(name, text)


_HAND_SHEET = (
    '<row r="1"><c r="A1"><v>1</v></c><c r="B1"><v>2</v></c>'
    '<c r="C1"><f t="shared" ref="C1:C3" si="0">A1+$B$1*B1</f><v>5</v></c>'
    '<c r="D1"><f t="array" ref="D1:E1">TRANSPOSE(A1:A2)</f><v>1</v></c><c r="E1"><v>3</v></c>'
    "</row>"
    '<row r="2"><c r="A2"><v>3</v></c><c r="B2"><v>4</v></c>'
    '<c r="C2"><f t="shared" si="0"/><v>11</v></c>'
    '<c r="F2" t="str"><f>"B"&amp;"1"</f><v>B1</v></c>'
    '<c r="G2" t="b"><f>A2&gt;A1</f><v>1</v></c>'
    '<c r="H2" t="e"><f>1/0</f><v>#DIV/0!</v></c></row>'
    '<row r="3"><c r="A3"><v>5</v></c><c r="B3"><v>6</v></c>'
    '<c r="C3"><f t="shared" si="0"/><v>17</v></c></row>'
)


def test_cached_values_are_read_from_the_package(tmp_path: Path) -> None:
    """Shared, array, text, boolean and error formula cells are read with their cached values."""
    book = tmp_path / "hand.xlsx"
    _package(book, _HAND_SHEET)
    cached = cached_formula_values(book)
    sheet = "hand made"
    assert cached[(sheet, "C2")] == CachedCell(
        sheet, "C2", "A2+$B$1*B2", "n", 11.0, "shared si=0 from C1"
    )
    assert cached[(sheet, "C3")].formula == "A3+$B$1*B3"
    assert cached[(sheet, "E1")] == CachedCell(
        sheet, "E1", "TRANSPOSE(A1:A2)", "n", 3.0, "array D1:E1"
    )
    assert cached[(sheet, "F2")].value == "B1"
    assert cached[(sheet, "G2")].value is True
    assert (cached[(sheet, "H2")].kind, cached[(sheet, "H2")].value) == ("e", "#DIV/0!")
    assert len(cached) == 8


def test_shared_and_array_formulas_hold_in_the_engine(engine: Engine, tmp_path: Path) -> None:
    """The hand-made package's cached values hold; a stale shared member is caught."""
    book = tmp_path / "hand.xlsx"
    _package(book, _HAND_SHEET)
    assert assert_cached_values_hold(book, engine) == 8
    stale = tmp_path / "stale.xlsx"
    _package(stale, _HAND_SHEET.replace("<v>11</v>", "<v>12</v>"))
    mismatches = compare_to_cached(stale, engine)
    assert [(m.address, m.cached, m.recalculated) for m in mismatches] == [("C2", 12.0, 11.0)]
    assert "shared si=0 from C1" in mismatches[0].formula


def test_timeout_gives_clear_message(fresh_engine: Engine, tmp_path: Path) -> None:
    """A request that hangs is cut off with a message naming the request and the limit."""
    book = tmp_path / "good.xlsx"
    _write_demo(book)
    own = fresh_engine
    with pytest.raises(EngineTimeout, match=r"sleep: no reply within 0\.5 s") as caught:
        own._request({"op": "sleep", "seconds": 60}, timeout=0.5)
    assert "--- soffice" in str(caught.value)
    assert not own.running
    # The next request starts a fresh engine.
    assert len(own.recalculate(book).cells) == len(_demo_formulas())


def test_worker_crash_gives_clear_message(fresh_engine: Engine, tmp_path: Path) -> None:
    """A worker that dies mid-request is reported with its exit code and stderr tail."""
    book = tmp_path / "good.xlsx"
    _write_demo(book)
    own = fresh_engine
    with pytest.raises(EngineCrashed, match=r"UNO worker exited with code 3") as caught:
        own._request({"op": "crash", "code": 3}, timeout=30)
    assert "worker: crashing on request" in str(caught.value)
    assert len(own.recalculate(book).cells) == len(_demo_formulas())


def test_missing_book_is_refused(engine: Engine, tmp_path: Path) -> None:
    """Asking for a book that does not exist fails before the engine is bothered."""
    with pytest.raises(FileNotFoundError, match="no such workbook"):
        engine.recalculate(tmp_path / "absent.xlsx")


def test_cells_missing_on_either_side_are_mismatches() -> None:
    """A formula the engine does not report, or one absent from the file, is a mismatch."""
    cached = {("s", "A1"): CachedCell("s", "A1", "1+1", "n", 2.0)}
    fresh = {("s", "B1"): RecalcCell("s", "B1", 3.0, None, 0, "=1+2")}
    mismatches = compare_books(cached, fresh)
    assert mismatches.checked == 2
    assert [(m.address, m.reason) for m in mismatches] == [
        ("A1", "the engine reports no formula here"),
        ("B1", "formula cell missing from the file"),
    ]
    close = {("s", "A1"): RecalcCell("s", "A1", 2.0 + 1e-12, None, 0, "=1+1")}
    assert compare_books(cached, close) == []
    assert len(compare_books(cached, close, rel=1e-14, abs_=0.0)) == 1
