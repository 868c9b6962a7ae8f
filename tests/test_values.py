"""The value reader: fast and streaming readers agree; books the fast reader cannot open
still refresh; formula cells without a saved result are refused; user text is capped
when read and clipped in messages."""

from __future__ import annotations

import datetime as dt
import hashlib
import re
import zipfile
from collections.abc import Callable
from pathlib import Path

import pytest
import xlsxwriter
from books import READERS, every_kind_book, line_rows, make_book, only_reader, same_value

from sheetfit.cli import main
from sheetfit.errors import DataError
from sheetfit.reader import values as values_mod
from sheetfit.reader.package import open_package
from sheetfit.reader.values import TEXT_CAP
from sheetfit.refresh import _values, refresh

EXAMPLES = sorted((Path(__file__).parents[1] / "example_books").glob("*.xlsx"))
NOW = dt.datetime(2026, 3, 1, 9, 0, tzinfo=dt.UTC)
LINE_NAMES = {"sf_m_y": "Data!$A$1:$A$13", "sf_m_x": "Data!$B$1:$B$13"}


def rewrite(src: Path, dst: Path, edit: Callable[[str, bytes], bytes | None],
            extra: dict[str, bytes] | None = None) -> Path:
    """Copy a package part by part through ``edit(name, data)`` (None drops the part)."""
    with zipfile.ZipFile(src) as zi, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zo:
        for info in zi.infolist():
            data = edit(info.filename, zi.read(info.filename))
            if data is not None:
                zo.writestr(info, data)
        for name, data in (extra or {}).items():
            zo.writestr(name, data)
    return dst


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _all_values(path: Path, reader: str, monkeypatch: pytest.MonkeyPatch) -> dict:
    """Every cell of every worksheet (one row and column beyond the used area), one reader."""
    pkg = open_package(path)
    with monkeypatch.context() as m:
        only_reader(m, reader)
        out = {}
        with _values(pkg, path) as values:
            for name in values.sheet_parts:
                sv = values.sheet(name)
                assert values.readers[name] == reader
                rows = max(sv.last_used_row(1, 60), 1)
                for r in range(1, rows + 2):
                    for c in range(1, 40):
                        out[(name, r, c)] = sv.get(r, c)
    return out


@pytest.mark.parametrize("book", EXAMPLES + ["every_kind"], ids=lambda b: getattr(b, "stem", b))
def test_the_three_readers_agree(book, tmp_path: Path, monkeypatch) -> None:
    """The column, fast and streaming readers give the same Value for every cell; the
    column and streaming readers (both read the stored number) exactly; date-formatted
    cells, which the fast reader turns into datetimes to the microsecond, within 1e-10 days
    (9 µs) of them, every other cell exactly."""
    path = every_kind_book(tmp_path / "kinds.xlsx") if book == "every_kind" else book
    columnar, fast, stream = (_all_values(path, r, monkeypatch) for r in READERS)
    assert columnar.keys() == fast.keys() == stream.keys()
    kinds = set()
    for key, a in fast.items():
        b, c = stream[key], columnar[key]
        kinds.add(a.kind)
        assert (a.kind, a.text) == (b.kind, b.text) == (c.kind, c.text), key
        assert same_value(c, b), key
        if a.kind == "number":
            assert a.number == pytest.approx(b.number, rel=0, abs=1e-10), key
    if book == "every_kind":
        assert kinds == {"blank", "number", "text", "error", "other"}
        assert fast[("Data", 3, 2)].text == "rich text end"
        assert fast[("Data", 5, 7)].text == "=1+1"


@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("book", EXAMPLES + ["every_kind", "unsaved"],
                         ids=lambda b: getattr(b, "stem", b))
def test_columns_read_in_bulk_equal_cells_read_one_by_one(book, reader: str, tmp_path: Path,
                                                          monkeypatch) -> None:
    """``BookValues.column`` (arrays, the declarations' path) gives for every cell exactly
    the Value ``SheetValues.get`` gives, in both readers: every kind, errors, formula cells
    without a result, rows and columns beyond the used area, a run starting mid-sheet."""
    path = (every_kind_book(tmp_path / "kinds.xlsx") if book == "every_kind"
            else _formula_book(tmp_path, 5) if book == "unsaved" else book)
    pkg = open_package(path)
    seen = set()
    with monkeypatch.context() as m:
        only_reader(m, reader)
        with _values(pkg, path) as values:
            for name in values.sheet_parts:
                sv = values.sheet(name)
                assert values.readers[name] == reader
                rows = max(sv.last_used_row(1, 60), 1) + 2
                for c in range(1, 40):
                    for row1 in (1, 2):
                        col = values.column(name, c, row1, rows)
                        assert values.column(name, c, row1, rows) is col  # read once
                        assert len(col) == rows - row1 + 1
                        for i in range(len(col)):
                            want = sv.get(row1 + i, c)
                            seen.add(want.kind)
                            assert same_value(col.value(i), want), (name, row1 + i, c)
    if book == "every_kind":
        assert seen == {"blank", "number", "text", "error", "other"}
    if book == "unsaved":
        assert "unsaved" in seen


def test_only_the_declared_sheets_are_parsed(tmp_path: Path) -> None:
    """A sheet no declaration points at is never parsed: not even broken XML there stops a
    refresh."""
    src = make_book(tmp_path / "b.xlsx", {"Data": line_rows(12), "Notes": [["x"]]}, LINE_NAMES)
    bad = rewrite(src, tmp_path / "broken_notes.xlsx",
                  lambda n, d: b"<worksheet><sheetData><row" if n.endswith("sheet2.xml") else d)
    report = refresh(bad, tmp_path / "out.xlsx", now=NOW)
    assert report.models[0].n_used == 12
    assert report.models[0].fingerprint == refresh(src, tmp_path / "o2.xlsx", now=NOW) \
        .models[0].fingerprint


def _utf16(name: str, data: bytes) -> bytes:
    if not name.endswith((".xml", ".rels")):
        return data
    text = data.decode("utf-8")
    text = re.sub(r"^<\?xml[^>]*\?>", '<?xml version="1.0" encoding="UTF-16" standalone="yes"?>',
                  text)
    if not text.startswith("<?xml"):
        text = '<?xml version="1.0" encoding="UTF-16" standalone="yes"?>' + text
    return text.encode("utf-16")  # with its byte-order mark


def test_utf16_book_refreshes_with_the_same_numbers(tmp_path: Path, capsys) -> None:
    """Every XML part re-encoded as UTF-16 (BOM and declaration): the refresh exits 0 and
    reads exactly the values of the UTF-8 book (same fingerprint, same figures)."""
    src = make_book(tmp_path / "b.xlsx", {"Data": line_rows(12)}, LINE_NAMES)
    u16 = rewrite(src, tmp_path / "u16.xlsx", _utf16)
    assert zipfile.ZipFile(u16).read("xl/worksheets/sheet1.xml")[:2] == b"\xff\xfe"
    assert main(["refresh", str(u16), "--out", str(tmp_path / "u16_out.xlsx")]) == 0
    a = refresh(src, tmp_path / "a.xlsx", now=NOW).models[0]
    b = refresh(u16, tmp_path / "b_out.xlsx", now=NOW).models[0]
    assert (b.n_used, b.fingerprint, b.figures) == (a.n_used, a.fingerprint, a.figures)
    pkg = open_package(u16)
    with _values(pkg, u16) as values:
        values.sheet("Data")
        assert values.readers == {"Data": "stream"}


_MACRO_SHEET = (
    b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    b'<xm:macrosheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
    b'xmlns:xm="http://schemas.microsoft.com/office/excel/2006/main"><sheetData>'
    b'<row r="1"><c r="A1" t="inlineStr"><is><t>macro</t></is></c></row>'
    b"</sheetData></xm:macrosheet>"
)


def _add_macro_sheet(name: str, data: bytes) -> bytes:
    if name == "xl/workbook.xml":
        return data.replace(b"</sheets>", b'<sheet name="Macro1" sheetId="90" r:id="rIdM90"/>'
                                          b"</sheets>")
    if name == "xl/_rels/workbook.xml.rels":
        return data.replace(b"</Relationships>", (
            b'<Relationship Id="rIdM90" Type="http://schemas.microsoft.com/office/2006/'
            b'relationships/xlMacrosheet" Target="macrosheets/sheet2.xml"/></Relationships>'))
    if name == "[Content_Types].xml":
        return data.replace(b"</Types>", (
            b'<Override PartName="/xl/macrosheets/sheet2.xml" '
            b'ContentType="application/vnd.ms-excel.macrosheet+xml"/></Types>'))
    return data


def test_book_with_a_macro_sheet_refreshes_with_the_same_numbers(tmp_path: Path) -> None:
    """A workbook listing an xl/macrosheets/ part among its sheets refreshes (exit 0) and reads
    exactly the values of the same book without it."""
    src = make_book(tmp_path / "b.xlsx", {"Data": line_rows(12)}, LINE_NAMES)
    mac = rewrite(src, tmp_path / "macro.xlsx", _add_macro_sheet,
                  {"xl/macrosheets/sheet2.xml": _MACRO_SHEET})
    assert [s.name for s in open_package(mac).sheets] == ["Data", "Macro1"]
    assert main(["refresh", str(mac), "--out", str(tmp_path / "mac_out.xlsx")]) == 0
    a = refresh(src, tmp_path / "a.xlsx", now=NOW).models[0]
    b = refresh(mac, tmp_path / "b_out.xlsx", now=NOW).models[0]
    assert (b.n_used, b.fingerprint, b.figures) == (a.n_used, a.fingerprint, a.figures)


def _strip_results(cells: set[str]) -> Callable[[str, bytes], bytes]:
    """Remove the saved result of the formula cells at ``cells`` on the first sheet."""
    def edit(name: str, data: bytes) -> bytes:
        if name != "xl/worksheets/sheet1.xml":
            return data
        return re.sub(rb'(<c r="([A-Z]+[0-9]+)"[^>]*>)(<f>[^<]*</f>)<v>[^<]*</v>',
                      lambda m: m.group(1) + m.group(3) if m.group(2).decode() in cells
                      else m.group(0), data)
    return edit


def _formula_book(tmp_path: Path, n_unsaved: int, where: str = "A") -> Path:
    """A line book whose column ``where`` rows 2.. are formulas; the first n lose their results."""
    wb = xlsxwriter.Workbook(str(tmp_path / "f.xlsx"))
    ws = wb.add_worksheet("Data")
    rows = line_rows(14)
    for r, (cost, units) in enumerate(rows):
        if r == 0:
            ws.write_row(0, 0, [cost, units, "spare"])
            continue
        ws.write_formula(r, 0, f"={cost}+0", None, cost) if where == "A" \
            else ws.write_number(r, 0, cost)
        ws.write_number(r, 1, units)
        ws.write_formula(r, 2, f"={units}*2", None, units * 2)
    for k, v in {"sf_m_y": "=Data!$A:$A", "sf_m_x": "=Data!$B:$B"}.items():
        wb.define_name(k, v)
    wb.close()
    col = "A" if where == "A" else "C"
    cells = {f"{col}{r}" for r in range(2, 2 + n_unsaved)}
    return rewrite(tmp_path / "f.xlsx", tmp_path / "unsaved.xlsx", _strip_results(cells))


def test_formula_cells_without_result_in_y_are_refused(tmp_path: Path, capsys) -> None:
    """12 formula cells of y stored without a result: one line naming the first five and the
    count, exit 2, the book untouched; the same through the streaming reader (UTF-16)."""
    book = _formula_book(tmp_path, 12)
    assert b"<f>" in zipfile.ZipFile(book).read("xl/worksheets/sheet1.xml")
    before = _digest(book)
    assert main(["refresh", str(book)]) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and "Traceback" not in err
    assert "12 formula cells in y have no saved result (A2, A3, A4, A5, A6, …)" in err
    assert "recalculate and save the book" in err and "sheet 'Data' cell A2" in err
    assert _digest(book) == before
    u16 = rewrite(book, tmp_path / "unsaved16.xlsx", _utf16)
    with pytest.raises(DataError, match=r"12 formula cells in y have no saved result \(A2, "):
        refresh(u16)


def test_formula_cells_without_result_outside_the_ranges_do_not_count(tmp_path: Path) -> None:
    """Unsaved formulas in a column no declaration covers are no reason to refuse."""
    book = _formula_book(tmp_path, 14, where="C")
    report = refresh(book, tmp_path / "out.xlsx", now=NOW)
    assert report.models[0].n_used == 14 and report.models[0].n_left_out == 0


def _replace_text(book: Path, dst: Path, old: str, new: str) -> Path:
    """Swap a shared string for a text longer than a cell may hold (1 MB)."""
    def edit(name: str, data: bytes) -> bytes:
        return data.replace(f">{old}<".encode(), f">{new}<".encode()) \
            if name == "xl/sharedStrings.xml" else data
    return rewrite(book, dst, edit)


def test_megabyte_header_and_setting_give_a_short_one_line_refusal(tmp_path: Path, capsys) \
        -> None:
    """A 1 MB header (repeated, so refused) and a 1 MB setting value are read capped at the
    format's 32,767 characters and quoted clipped: one line under 500 characters."""
    huge = "h" * 500_000 + "\n" + "H" * 500_000
    rows = [["cost", "HEADER", "HEADER"]] + [[float(i), float(i % 5), float(i % 3)]
                                            for i in range(12)]
    src = make_book(tmp_path / "h.xlsx", {"Data": rows},
                    {"sf_m_y": "Data!$A$1:$A$13", "sf_m_x": "Data!$B$1:$C$13"})
    book = _replace_text(src, tmp_path / "huge_header.xlsx", "HEADER", huge)
    pkg = open_package(book)
    with _values(pkg, book) as values:
        assert len(values.sheet("Data").get(1, 2).text) == TEXT_CAP
    before = _digest(book)
    assert main(["refresh", str(book)]) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and len(err) < 500 and "both called 'hhhh" in err and "…" in err
    assert _digest(book) == before

    src = make_book(tmp_path / "s.xlsx", {"Data": line_rows(12), "Opts": [["method", "VALUE"]]},
                    {**LINE_NAMES, "sf_m_opts": "Opts!$A$1:$B$1"})
    book = _replace_text(src, tmp_path / "huge_setting.xlsx", "VALUE", huge)
    assert main(["refresh", str(book)]) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and len(err) < 500 and "setting 'method' must be" in err


def test_readers_cap_text_and_read_inline_strings(tmp_path: Path, monkeypatch) -> None:
    """Inline strings (with runs) and a 40,000-character inline text through each reader:
    runs joined, text capped at TEXT_CAP."""
    src = make_book(tmp_path / "b.xlsx", {"Data": line_rows(12)}, LINE_NAMES)
    long = "x" * 40_000
    def edit(name: str, data: bytes) -> bytes:
        if name != "xl/worksheets/sheet1.xml":
            return data
        cells = (f'<row r="20"><c r="A20" t="inlineStr"><is><r><t>in</t></r><r><t>line</t></r>'
                 f'</is></c><c r="B20" t="inlineStr"><is><t>{long}</t></is></c></row>')
        return data.replace(b"</sheetData>", cells.encode() + b"</sheetData>")
    book = rewrite(src, tmp_path / "inline.xlsx", edit)
    for reader in READERS:
        with monkeypatch.context() as m:
            only_reader(m, reader)
            pkg = open_package(book)
            with _values(pkg, book) as values:
                sv = values.sheet("Data")
                assert values.readers["Data"] == reader
                assert sv.get(20, 1).text == "inline"
                assert len(sv.get(20, 2).text) == TEXT_CAP
    assert values_mod.TEXT_CAP == 32_767


HOSTILE = ("=SUM(9,9)", "+qty", "-km", "@home")  # headers that read like formulas
CLASSES = ("=9-9", "@late")  # class labels that read like formulas


def _owned_cells(book: Path) -> dict[str, list[tuple[str, str | None, str | None]]]:
    """Each owned sheet's cells as (address, text or None, formula text or None)."""
    from xml.etree import ElementTree as ET

    ns = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
    pkg = open_package(book)
    out = {}
    with zipfile.ZipFile(book) as zf:
        for s in pkg.owned_sheets():
            cells = []
            for c in ET.fromstring(zf.read(s.part)).iter(f"{ns}c"):
                text = None
                if c.get("t") == "inlineStr":
                    text = "".join(t.text or "" for t in c.iter(f"{ns}t"))
                elif c.get("t") == "str":
                    text = c.findtext(f"{ns}v")
                f = c.find(f"{ns}f")
                cells.append((c.get("r", ""), text, None if f is None else f.text or ""))
            out[s.name] = cells
    return out


def _hostile_book(tmp_path: Path, method: str) -> Path:
    import numpy as np

    rng = np.random.default_rng(5)
    n = 24
    if method == "neighbour_vote":
        head = [HOSTILE[2], HOSTILE[1], HOSTILE[3]]
        rows = [[CLASSES[i % 2], float(rng.integers(1, 30)), float(rng.integers(1, 30))]
                for i in range(n)]
        opts = [["method", method], ["k", 3], ["focus", CLASSES[1]]]
    elif method == "strip_mean":
        head = [HOSTILE[0], HOSTILE[3]]
        rows = [[float(rng.normal(10, 2)), float(i % 8)] for i in range(n)]
        opts = [["method", method], ["width", 1.5]]
    else:
        head = [HOSTILE[0], HOSTILE[1], HOSTILE[2]]
        rows = [[float(rng.normal(50, 5)) + i, float(rng.integers(1, 40)),
                 float(rng.integers(1, 90))] for i in range(n)]
        opts = [["method", method]] + ([["k", 3]] if method != "least_squares" else [])
    last = n + 1
    xcols = "B" if len(head) == 2 else "C"
    new_row = [float(v) for v in rows[0][1:]]
    return make_book(
        tmp_path / f"{method}.xlsx",
        {"Data": [head] + rows, "Opts": opts, "New": [head[1:], new_row]},
        {"sf_m_y": f"Data!$A$1:$A${last}", "sf_m_x": f"Data!$B$1:${xcols}${last}",
         "sf_m_opts": f"Opts!$A$1:$B${len(opts)}",
         "sf_m_new": f"New!$A$1:${'A' if len(head) == 2 else 'B'}$2"},
    )


@pytest.mark.parametrize("method, kinds", [
    ("least_squares", {"coef", "fitted", "resid", "charts"}),
    ("neighbour_mean", {"summary", "std", "nbrs", "fitted", "resid", "charts"}),
    ("neighbour_vote", {"summary", "std", "nbrs", "fitted", "charts"}),
    ("strip_mean", {"strip", "fitted", "resid", "charts"}),
])
def test_user_text_that_reads_like_a_formula_is_written_as_text(method, kinds, tmp_path: Path) \
        -> None:
    """Headers and class labels beginning with =, +, - or @ appear on every owned sheet of the
    model as text cells, never as formulas, and no formula is one of them."""
    book = _hostile_book(tmp_path, method)
    out = tmp_path / "out.xlsx"
    refresh(book, out, now=NOW)
    sheets = _owned_cells(out)
    history = {"sf index", "sf inputs", "sf log", "sf m about"}  # the book's own records
    sheets = {t: c for t, c in sheets.items() if t not in history}
    assert {t.split(" ")[-1] for t in sheets} == kinds
    hostile = HOSTILE + CLASSES
    bare = tuple(h.lstrip("=") for h in hostile)
    for title, cells in sheets.items():
        as_text = [(ref, text) for ref, text, f in cells
                   if f is None and text and any(h in text for h in hostile)]
        assert as_text, f"{title} shows none of the user's headers or labels as text"
        for ref, _, f in cells:  # a formula may show a label it looks up, never be one
            assert f is None or not f.lstrip("=").startswith(hostile + bare), (title, ref, f)
