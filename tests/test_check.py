"""``sheetfit check``: current, stale (range and cells named), edited, never refreshed; exit
statuses; never writes; books edited by openpyxl and by LibreOffice."""

from __future__ import annotations

import hashlib
import json
import re
import zipfile
from pathlib import Path

import pytest
from books import READERS, line_rows, make_book, only_reader, soffice_convert
from lo_edit import edit_in_libreoffice

from sheetfit.check import CURRENT, EDITED, MISSING, STALE, check
from sheetfit.cli import main
from sheetfit.owned import sheet_title
from sheetfit.refresh import refresh

NAMES = {"sf_a_y": "Data!$A$1:$A$11", "sf_a_x": "Data!$B$1:$B$11",
         "sf_b_y": "Data!$A$1:$A$11", "sf_b_x": "Data!$C$1:$C$11"}


def _rows() -> list[list[object]]:
    rows = line_rows(10)
    rows[0].append("hours")
    for i, r in enumerate(rows[1:]):
        r.append(float(3 + (i * 7) % 11))
    return rows


def _book(tmp_path: Path, name: str = "b.xlsx") -> Path:
    p = make_book(tmp_path / name, {"Data": _rows()}, NAMES)
    refresh(p)
    return p


def _set_xml(path: Path, part: str, cell: str, value: str, formula_too: bool = False) -> None:
    """Replace one cell's stored value in the XML (as a program that does not recalculate)."""
    tmp = path.with_suffix(".edit")
    with zipfile.ZipFile(path) as zin, zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == part:
                if formula_too:  # the whole cell becomes a typed number
                    pat = re.compile(rb'<c r="' + cell.encode() + rb'"([^>]*?)(?: t="\w+")?>'
                                     rb".*?</c>", re.DOTALL)
                    data, n = pat.subn(b'<c r="' + cell.encode() + rb'"\1><v>' + value.encode()
                                       + b"</v></c>", data, count=1)
                else:
                    pat = re.compile(rb'(<c r="' + cell.encode() + rb'"[^>]*><v>)[^<]*(</v>)')
                    data, n = pat.subn(rb"\g<1>" + value.encode() + rb"\g<2>", data)
                assert n == 1, (part, cell)
            zout.writestr(info, data)
    tmp.replace(path)


def _part_of(path: Path, title: str) -> str:
    from sheetfit.reader.package import open_package

    return open_package(path).sheet(title).part


def _status(found, tag: str):
    return next(m for m in found.models if m.model == tag)


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_current_after_refresh_exit_0_and_nothing_written(tmp_path: Path, capsys) -> None:
    p = _book(tmp_path)
    before, files = _digest(p), sorted(tmp_path.iterdir())
    assert main(["check", str(p)]) == 0
    out = capsys.readouterr().out
    assert "a: current" in out and "b: current" in out
    assert main(["check", str(p), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["exit_status"] == 0
    assert {m["model"]: m["status"] for m in doc["models"]} == {"a": CURRENT, "b": CURRENT}
    assert _digest(p) == before and sorted(tmp_path.iterdir()) == files


def test_never_refreshed_exit_3(tmp_path: Path, capsys) -> None:
    p = make_book(tmp_path / "b.xlsx", {"Data": _rows()}, NAMES)
    assert main(["check", str(p)]) == 3
    assert "a: never refreshed" in capsys.readouterr().out
    assert [m.status for m in check(p).models] == [MISSING, MISSING]
    # a model declared after the last refresh
    p2 = make_book(tmp_path / "c.xlsx", {"Data": _rows()},
                   {k: v for k, v in NAMES.items() if k.startswith("sf_a")})
    refresh(p2)
    assert check(p2).models[0].status == CURRENT


def test_refused_input_exit_2_one_line(tmp_path: Path, capsys) -> None:
    p = make_book(tmp_path / "b.xlsx", {"Data": _rows()},
                  {"sf_a_y": "Data!$A$1:$A$11", "sf_a_x": "Data!$B$1:$B$9"})
    before = _digest(p)
    assert main(["check", str(p)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "refused" in err[0] and "sf_a_x" in err[0]
    assert _digest(p) == before
    q = tmp_path / "not.xlsx"
    q.write_bytes(b"not a zip")
    assert main(["check", str(q)]) == 2


def test_stale_after_one_data_cell_changes_names_range_and_cell(tmp_path: Path) -> None:
    p = _book(tmp_path)
    _set_xml(p, "xl/worksheets/sheet1.xml", "A4", "500")
    before = _digest(p)
    found = check(p)
    assert _digest(p) == before
    a, b = _status(found, "a"), _status(found, "b")
    # y is shared by both models: both stale, the y range named with its one cell
    for m in (a, b):
        assert m.status == STALE
        assert [(c.role, c.name, c.changed, c.added, c.removed) for c in m.changes] == [
            ("y", m.changes[0].name, 1, 0, 0)]
        assert m.changes[0].cells == ["Data!A4"]
    assert a.changes[0].name == "sf_a_y" and b.changes[0].name == "sf_b_y"
    # the fitted sheet's =Data!A4 still caches the old value: the data changed unrecalculated
    assert any("Data!A4" in e.what for e in a.edits)
    assert found.exit_status == 3
    refresh(p)
    again = check(p)
    assert [m.status for m in again.models] == [CURRENT, CURRENT]


def test_stale_names_x_range_only_for_the_model_that_uses_it(tmp_path: Path) -> None:
    p = _book(tmp_path)
    _set_xml(p, "xl/worksheets/sheet1.xml", "C7", "9.5")
    found = check(p)
    assert _status(found, "a").status == CURRENT
    b = _status(found, "b")
    assert b.status == STALE and [(c.name, c.changed) for c in b.changes] == [("sf_b_x", 1)]
    assert b.changes[0].cells == ["Data!C7"]


def test_appended_rows_are_counted_as_added(tmp_path: Path) -> None:
    openpyxl = pytest.importorskip("openpyxl")
    p = make_book(tmp_path / "w.xlsx", {"Data": _rows()},
                  {"sf_w_y": "Data!$A:$A", "sf_w_x": "Data!$B:$B"})
    refresh(p)
    assert check(p).models[0].status == CURRENT
    wb = openpyxl.load_workbook(p)
    wb["Data"].append([180.0, 33.0])
    wb["Data"].append([190.0, 36.0])
    wb.save(p)
    w = check(p).models[0]
    assert w.status == STALE
    assert [(c.name, c.range, c.changed, c.added, c.removed, c.cells) for c in w.changes] == [
        ("sf_w_y", "Data!$A$1:$A$11 → Data!$A$1:$A$13", 0, 2, 0, ["Data!A12", "Data!A13"]),
        ("sf_w_x", "Data!$B$1:$B$11 → Data!$B$1:$B$13", 0, 2, 0, ["Data!B12", "Data!B13"]),
    ]


def test_edited_when_a_result_formula_is_overwritten(tmp_path: Path, capsys) -> None:
    p = _book(tmp_path)
    part = _part_of(p, sheet_title("a", "fitted"))
    text = zipfile.ZipFile(p).read(part).decode()
    # the first fitted-value formula cell of the sheet
    cell = re.search(r'<c r="([A-Z]+5)"[^>]*><f[^>]*>[^<]*\$', text).group(1)  # a shared formula's first cell too
    _set_xml(p, part, cell, "123.5", formula_too=True)
    found = check(p)
    a = _status(found, "a")
    assert a.status == EDITED and _status(found, "b").status == CURRENT
    assert any(e.cell == cell and "replaced by 123.5" in e.what for e in a.edits)
    assert main(["check", str(p)]) == 3
    assert f"{cell}: its formula" in capsys.readouterr().out


def test_edited_when_a_value_cell_or_a_cached_result_changes(tmp_path: Path) -> None:
    p = _book(tmp_path)
    coef = _part_of(p, sheet_title("a", "coef"))
    text = zipfile.ZipFile(p).read(coef).decode()
    # a coefficient is a computed value (no formula) in column B
    cell = re.search(r'<c r="(B\d+)"[^>]*><v>[^<]*</v></c>', text).group(1)
    _set_xml(p, coef, cell, "1.5")
    a = _status(check(p), "a")
    assert a.status == EDITED and any(e.cell == cell for e in a.edits)


def test_data_changed_without_recalculation_names_each_stale_reference(tmp_path: Path) -> None:
    """A data cell changed by a program that does not recalculate (the XML edited, every
    owned formula's cached value kept): the model is stale, and each owned plain reference
    to that cell (the fitted sheet's copy of the attribute, the charts sheet's helper
    column) is named with its cached value and the cell's new one. Formula results then
    stripped from three owned cells are counted."""
    p = _book(tmp_path)
    _set_xml(p, _part_of(p, "Data"), "B6", "999")
    a = _status(check(p), "a")
    assert a.status == STALE
    stale = [e for e in a.edits if "saved without recalculating" in e.what]
    assert stale and all("but Data!B6 holds 999" in e.what for e in stale)
    assert {e.sheet for e in stale} == {sheet_title("a", "fitted"), sheet_title("a", "charts")}
    fitted = _part_of(p, sheet_title("a", "fitted"))
    text = zipfile.ZipFile(p).read(fitted).decode()
    cells = re.findall(r'<c r="([A-Z]+\d+)"[^>]*><f>[^<]*</f><v>[^<]*</v></c>', text)[:3]
    assert len(cells) == 3
    tmp = p.with_suffix(".strip")
    with zipfile.ZipFile(p) as zin, zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == fitted:
                for c in cells:
                    data = re.sub(rb'(<c r="' + c.encode() + rb'"[^>]*>(?:<f>[^<]*</f>))<v>[^<]*</v>',
                                  rb"\1", data)
            zout.writestr(info, data)
    tmp.replace(p)
    a = _status(check(p), "a")
    counts = [e.what for e in a.edits if "no saved result" in e.what]
    assert counts == [("3 formula cells have no saved result (the book was saved by a program "
                      "that does not calculate)")]


def test_openpyxl_edit_is_stale_with_the_range_named(tmp_path: Path) -> None:
    openpyxl = pytest.importorskip("openpyxl")
    p = _book(tmp_path)
    wb = openpyxl.load_workbook(p)
    wb["Data"]["B6"] = 999.0
    wb.save(p)
    found = check(p)
    a = _status(found, "a")
    assert a.status == STALE
    assert [(c.name, c.changed, c.cells) for c in a.changes] == [("sf_a_x", 1, ["Data!B6"])]
    assert _status(found, "b").status == CURRENT or _status(found, "b").status == EDITED
    # openpyxl keeps formulas but not their results: said so
    assert any("no saved result" in e.what for e in a.edits)
    refresh(p)
    assert [m.status for m in check(p).models] == [CURRENT, CURRENT]


def test_libreoffice_resave_stays_current(tmp_path: Path) -> None:
    p = _book(tmp_path)
    saved = soffice_convert(p, tmp_path / "lo")
    assert [m.status for m in check(saved).models] == [CURRENT, CURRENT]


def test_libreoffice_edit_and_save_is_stale_with_the_range_named(tmp_path: Path) -> None:
    p = _book(tmp_path)
    out = edit_in_libreoffice(p, tmp_path / "edited.xlsx", [("Data", "B6", 77.0)])
    found = check(out)
    a, b = _status(found, "a"), _status(found, "b")
    assert a.status == STALE
    assert [(c.name, c.changed, c.cells) for c in a.changes] == [("sf_a_x", 1, ["Data!B6"])]
    assert b.status == CURRENT
    # LibreOffice recalculated on the edit: the owned references follow the data
    assert not any("saved without recalculating" in e.what for e in a.edits)
    refresh(out)
    assert [m.status for m in check(out).models] == [CURRENT, CURRENT]


def test_fingerprint_rederived_from_the_recipe_by_hand(tmp_path: Path) -> None:
    """The README's recipe, followed here with hashlib alone, gives the index's fingerprint."""
    import python_calamine

    rows = _rows()
    p = make_book(tmp_path / "f.xlsx", {"Data": rows},
                  {"sf_a_y": "Data!$A$1:$A$11", "sf_a_x": "Data!$B$1:$B$11"})
    refresh(p)

    def h(text: str) -> str:
        return hashlib.sha256(text.encode()).hexdigest()

    def token(v: object) -> str:
        return "n:" + repr(float(v)) if isinstance(v, (int, float)) else "t:" + str(v)

    def range_digest(ref: str, col: int) -> str:
        cells = "".join(h(token(r[col]))[:8] for r in rows)
        return h(f"{ref}\n{cells}")[:16]

    text = ("sheetfit inputs 1\nmodel a\n"
            f"y {range_digest('Data!$A$1:$A$11', 0)}\n"
            f"x {range_digest('Data!$B$1:$B$11', 1)}\n"
            "settings method=least_squares;intercept=yes;degree=1;level=0.95;resamples=;seed=1;"
            "threshold=;baseline=\n")
    index = python_calamine.load_workbook(str(p)).get_sheet_by_name("sf index").to_python()
    head = next(r for r in index if r and r[0] == "model")
    row = next(r for r in index if r and r[0] == "a")
    assert row[head.index("input fingerprint")] == h(text)[:16]


@pytest.mark.parametrize("reader", READERS)
def test_cell_digests_in_bulk_follow_the_recipe_cell_by_cell(reader: str, tmp_path: Path,
                                                             monkeypatch) -> None:
    """The bulk digests of a two-column area holding every kind of cell (0 and -0, repeated
    numbers and texts) equal SHA-256 of the README's tokens, written out here by hand, in
    recipe order (row by row, left to right), and the one-cell path (``digest_cell``) of
    each cell; in each reader, and with the column's numbers taken in stretches of two."""
    import datetime as dt

    import xlsxwriter

    from sheetfit.declare.fingerprint import area_digests, digest_cell
    from sheetfit.declare.refs import parse_areas
    from sheetfit.reader.package import open_package
    from sheetfit.refresh import _values

    path = tmp_path / "kinds.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    date = wb.add_format({"num_format": "yyyy-mm-dd"})
    cells = [  # (column A, column B) as written, then the tokens the recipe makes of them
        ((1.5, "n:1.5"), ("plain", "t:plain")),
        ((True, "l:TRUE"), (None, "b:")),
        (("=1/0", "e:#DIV/0!"), (0.1, "n:0.1")),
        ((1e-05, "n:1e-05"), ("ünïcode ✓", "t:ünïcode ✓")),
        ((dt.datetime(2024, 2, 29), "n:45351.0"), (1.5e16, "n:1.5e+16")),
        ((12.0, "n:12.0"), ("  ", "t:  ")),
        ((0.0, "n:0.0"), (-0.0, "n:-0.0")),  # equal numbers, two tokens
        ((1.5, "n:1.5"), ("plain", "t:plain")),  # repeated: hashed once, placed twice
        (("plain", "t:plain"), (1.5, "n:1.5")),
    ]
    for r, row in enumerate(cells):
        for c, (v, _) in enumerate(row):
            if isinstance(v, bool):
                ws.write_boolean(r, c, v)
            elif isinstance(v, dt.datetime):
                ws.write_datetime(r, c, v, date)
            elif isinstance(v, str) and v.startswith("="):
                ws.write_formula(r, c, v, None, "#DIV/0!")
            elif isinstance(v, str):
                ws.write_string(r, c, v)
            elif v is not None:
                ws.write_number(r, c, v)
    wb.close()
    want = "".join(hashlib.sha256(tok.encode()).hexdigest()[:8] for row in cells for _, tok in row)
    only_reader(monkeypatch, reader)
    pkg = open_package(path)
    with _values(pkg, path) as values:
        area = parse_areas("Data!$A$1:$B$9")[0]
        memo: dict = {}
        assert area_digests(area, values, memo).hex() == want
        assert area_digests(area, values, memo).hex() == want  # again, from the memo
        from sheetfit.declare import fingerprint
        monkeypatch.setattr(fingerprint, "_CELLS", 2)  # numbers found in stretches of 2
        assert area_digests(area, values, {}).hex() == want
        one_by_one = "".join(digest_cell(values.sheet("Data").get(r, c))
                             for r in range(1, 10) for c in (1, 2))
        assert one_by_one == want
        assert values.readers["Data"] == reader


def test_identifier_change_names_the_key_range(tmp_path: Path) -> None:
    rows = [["month"] + r for r in _rows()]
    for i, r in enumerate(rows[1:]):
        r[0] = f"2025-{i + 1:02d}"
    p = make_book(tmp_path / "k.xlsx", {"Data": rows},
                  {"sf_a_y": "Data!$B$1:$B$11", "sf_a_x": "Data!$C$1:$C$11",
                   "sf_a_key": "Data!$A$1:$A$11"})
    refresh(p)
    assert check(p).models[0].status == CURRENT
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.load_workbook(p)
    wb["Data"]["A3"] = "2025-02 (revised)"
    wb.save(p)
    a = check(p).models[0]
    assert a.status == STALE
    assert [(c.role, c.name, c.changed, c.cells) for c in a.changes] == [
        ("key", "sf_a_key", 1, ["Data!A3"])]


@pytest.mark.parametrize("book", ["delivery_costs", "field_jobs", "open_invoices"])
def test_formula_scan_and_parse_agree(book: str, tmp_path: Path, monkeypatch) -> None:
    """The chunked byte scan of result sheets finds the same cells, formula cells, stored
    results and plain references as the hardened parse, on every sheet of each refreshed
    example book, with chunks small enough to cut every sheet many times."""
    import io

    from sheetfit.reader import _columnar
    from sheetfit.reader.formulas import _parse, _scan

    monkeypatch.setattr(_columnar, "CHUNK", 512)
    out = tmp_path / "out.xlsx"
    refresh(Path(__file__).resolve().parents[1] / "example_books" / f"{book}.xlsx", out)
    refs = 0
    with zipfile.ZipFile(out) as z:
        parts = [n for n in z.namelist() if n.startswith("xl/worksheets/sheet")]
        assert len(parts) > 5
        for n in parts:
            data = z.read(n)
            scanned = _scan(io.BytesIO(data))
            assert scanned == _parse(io.BytesIO(data)), n
            assert len(scanned) == len(scanned.cells())
            refs += len(scanned.refs.listed())
    assert refs > 0  # the data references of the fitted sheets were found


def test_notes_typed_on_the_audit_sheet_are_not_edits(tmp_path: Path) -> None:
    """A note typed in the audit sheet's columns for people keeps the model current."""
    rows = _rows()
    rows[4][0] = 400.0  # one row far off the line, so the audit sheet lists it
    p = make_book(tmp_path / "au.xlsx", {"Data": rows, "Opts": [["threshold", "2 sd"]]},
                  {"sf_a_y": "Data!$A$1:$A$11", "sf_a_x": "Data!$B$1:$B$11",
                   "sf_a_opts": "Opts!$A$1:$B$1"})
    refresh(p)
    audit = sheet_title("a", "audit")
    grid = python_calamine_rows(p, audit)
    heads = grid[3]
    listed = next(i for i, r in enumerate(grid[4:], start=5) if r[0] != "")
    col = "ABCDEFGHIJKLMNOPQRSTUVWXYZ"[heads.index("explanation")]
    out = edit_in_libreoffice(p, tmp_path / "noted.xlsx",
                              [(audit, f"{col}{listed}", "invoice posted twice; reversed in May")])
    assert [m.status for m in check(out).models] == [CURRENT]
    refresh(out)
    assert [m.status for m in check(out).models] == [CURRENT]


def python_calamine_rows(path: Path, title: str) -> list[list[object]]:
    import python_calamine

    return python_calamine.load_workbook(str(path)).get_sheet_by_name(title).to_python(
        skip_empty_area=False)


def test_a_book_refreshed_without_input_records_is_stale_with_a_note(tmp_path: Path,
                                                                     monkeypatch) -> None:
    """A refresh that kept no input record (as earlier versions did) cannot be traced."""
    from sheetfit import history

    real = history.plan_inputs
    monkeypatch.setattr(history, "plan_inputs", lambda records: real([]))
    p = _book(tmp_path)
    monkeypatch.undo()
    found = check(p)
    assert [m.status for m in found.models] == [STALE, STALE]
    assert all("without an input record" in m.notes[0] for m in found.models)
    refresh(p)
    assert [m.status for m in check(p).models] == [CURRENT, CURRENT]


@pytest.mark.parametrize("book", ["delivery_costs", "field_jobs", "open_invoices"])
def test_example_books_stay_current_after_a_libreoffice_resave(book: str, tmp_path: Path) -> None:
    """Every method's result sheets, saved again by LibreOffice, still check as current."""
    p = tmp_path / f"{book}.xlsx"
    refresh(Path(__file__).resolve().parents[1] / "example_books" / f"{book}.xlsx", p)
    assert check(p).exit_status == 0
    saved = soffice_convert(p, tmp_path / "lo")
    found = check(saved)
    assert found.exit_status == 0, found.text()


@pytest.mark.parametrize("text", ["0a1b2c3d" * 3 + "ffffffff", "0A1B2C3D", "0a1b2c3", "zz not hex"])
def test_range_record_digest_is_the_hash_of_the_text_on_the_sheet(text: str) -> None:
    """Digest text read back from ``sf inputs``: whole cells of lower-case hex are held
    packed (4 bytes a cell), anything else as the text itself; either way the range digest
    is SHA-256 of the range text, a newline and the digest text (the README's recipe,
    written out here with hashlib), and each cell reads back as its 8 characters."""
    from sheetfit.declare.fingerprint import RangeRecord

    rr = RangeRecord.from_text("x", "sf_m_x", "Data!$B$2:$B$5", text)
    want = hashlib.sha256(f"Data!$B$2:$B$5\n{text}".encode()).hexdigest()[:16]
    assert rr.digest == want
    assert (rr.text is None) == (text in ("0a1b2c3d" * 3 + "ffffffff",))
    assert rr.n_cells == len(text) // 8
    assert [rr.cell(i) for i in range(rr.n_cells)] == [text[8 * i:8 * i + 8]
                                                       for i in range(len(text) // 8)]


def test_formula_scan_reads_every_formula_shape_as_the_parse_does(monkeypatch) -> None:
    """A crafted sheet with plain references (quoted sheet names with an entity and a
    doubled quote, absolute, with spaces), a shared formula and its followers, an array
    formula, a formula without a result, a typed empty text result and plain values: the
    chunked scan (cut every 64 bytes) equals the hardened parse, cell kinds and references."""
    import io

    from sheetfit.reader import _columnar
    from sheetfit.reader.formulas import CellKind, _parse, _scan

    cells = [
        '<c r="A1"><f>Data!B5</f><v>1</v></c>',
        '<c r="B1"><f>\'My &amp; data\'!$C$7</f><v>2</v></c>',
        '<c r="C1"><f>\'O\'\'Brien\'!D2</f><v>3</v></c>',
        '<c r="D1"><f> Data!E9 </f><v>4</v></c>',
        '<c r="E1"><f t="shared" ref="E1:E3" si="0">Data!F1*2</f><v>5</v></c>',
        '<c r="F1"><f t="array" ref="F1">Data!G1</f><v>6</v></c>',
        '<c r="G1"><f>SUM(Data!A1:A3)</f><v>7</v></c>',
        '<c r="H1"><f>Data!B6</f></c>',
        '<c r="I1" t="str"><f>""</f><v></v></c>',
        '<c r="J1"><v>8</v></c>', '<c r="K1" s="2"/>',
    ]
    rows = [cells, ['<c r="E2"><f t="shared" si="0"/><v>7</v></c>',
                    '<c r="E3"><f t="shared" si="0"/><v>9</v></c>']]
    part = ('<?xml version="1.0" encoding="UTF-8"?><worksheet xmlns="http://schemas.'
            'openxmlformats.org/spreadsheetml/2006/main"><sheetData>'
            + "".join(f'<row r="{r}">{"".join(c)}</row>' for r, c in enumerate(rows, 1))
            + "</sheetData></worksheet>").encode()
    monkeypatch.setattr(_columnar, "CHUNK", 64)
    scanned, parsed = _scan(io.BytesIO(part)), _parse(io.BytesIO(part))
    assert scanned == parsed
    assert scanned.refs.listed() == [
        (1, 1, "Data", 5, 2), (1, 2, "My & data", 7, 3), (1, 3, "O'Brien", 2, 4),
        (1, 4, "Data", 9, 5), (1, 6, "Data", 1, 7), (1, 8, "Data", 6, 2)]
    assert scanned.get((1, 8)) == CellKind(True, False)  # no result stored
    assert scanned.get((1, 9)) == CellKind(True, True)  # an empty text is a result
    assert scanned.get((2, 5)) == CellKind(True, True) and scanned.get((1, 11)) is None
    assert scanned.unsaved() == 1
