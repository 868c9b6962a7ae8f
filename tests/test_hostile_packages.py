"""Packages that are damaged, hostile or merely odd: refused before any work, or refreshed.

Every book here is built by the test itself from an xlsxwriter book of invented numbers.
A refusal is exit status 2 with one line on stderr naming the file and the member, no
traceback, found before the declarations are read, and the book keeps its bytes. The
bomb-like cases run the command line in a child process under an address-space limit
(RLIMIT_AS 1.5 GiB) and a 120 s timeout, and report the child's peak memory.
"""

from __future__ import annotations

import random
import re
import struct
import subprocess
import sys
import zipfile
from collections.abc import Callable, Mapping
from pathlib import Path

import pytest
from books import entries, line_rows, make_book

from sheetfit.cli import main
from sheetfit.reader import integrity
from sheetfit.reader.package import open_package

LIMIT_AS = 1536 << 20  # bytes of address space for a child run
TIMEOUT = 120  # seconds for a child run
SHEET = "xl/worksheets/sheet1.xml"
NAMES = {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"}


def _base(tmp_path: Path, name: str = "base.xlsx") -> Path:
    return make_book(tmp_path / name, {"Data": line_rows(8)}, NAMES)


def _repack(
    src: Path,
    dst: Path,
    change: Mapping[str, bytes | None] | None = None,
    add: Mapping[str, bytes] | None = None,
    stored: tuple[str, ...] = (),
) -> Path:
    """Copy a package, replacing (bytes) or dropping (None) members and adding new ones."""
    change = change or {}
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = change.get(info.filename, zin.read(info))
            if data is None:
                continue
            how = zipfile.ZIP_STORED if info.filename in stored else zipfile.ZIP_DEFLATED
            zout.writestr(info.filename, data, compress_type=how)
        for name, data in (add or {}).items():
            zout.writestr(name, data)
    return dst


def _text(path: Path, member: str) -> str:
    with zipfile.ZipFile(path) as z:
        return z.read(member).decode("utf-8")


def _refused_in_process(
    path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> str:
    """Run the CLI in this process: exit 2, one stderr line, no traceback, book unchanged,
    refused before the declarations were read (find_models never runs)."""

    def no_work(*args: object, **kwargs: object) -> None:
        raise AssertionError("declarations were read before the package was refused")

    monkeypatch.setattr("sheetfit.refresh.find_models", no_work)
    before = path.read_bytes()
    status = main(["refresh", str(path)])
    err = capsys.readouterr().err
    assert status == 2, err
    assert err.count("\n") == 1 and "Traceback" not in err, err
    assert err.startswith(f"sheetfit: refused: {path}: "), err
    assert path.read_bytes() == before
    return err


_CHILD = """
import resource, sys
from sheetfit.cli import main
status = main(sys.argv[1:])
# VmHWM is this program's own peak (reset by exec); ru_maxrss would also count the
# pytest process it was forked from.
hwm = [int(l.split()[1]) for l in open("/proc/self/status") if l.startswith("VmHWM:")]
print("peak-rss-kib", hwm[0] if hwm else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
sys.exit(status)
"""


def _limit() -> None:
    import resource

    resource.setrlimit(resource.RLIMIT_AS, (LIMIT_AS, LIMIT_AS))


def _run_child(path: Path, out: Path | None = None) -> tuple[int, str, str, int]:
    """The CLI in a child process under LIMIT_AS and TIMEOUT: (status, stdout, stderr, KiB)."""
    argv = [sys.executable, "-c", _CHILD, "refresh", str(path)]
    if out is not None:
        argv += ["--out", str(out)]
    run = subprocess.run(argv, capture_output=True, text=True, timeout=TIMEOUT,
                         preexec_fn=_limit, check=False)
    peak = [int(line.split()[1]) for line in run.stdout.splitlines()
            if line.startswith("peak-rss-kib")]
    return run.returncode, run.stdout, run.stderr, peak[0] if peak else -1


def _refused_in_child(path: Path) -> tuple[str, int]:
    before = path.read_bytes()
    status, _, err, peak = _run_child(path)
    assert status == 2, err
    assert err.count("\n") == 1 and "Traceback" not in err, err
    assert path.read_bytes() == before
    assert 0 < peak < LIMIT_AS >> 10
    return err, peak


# --- 1. damaged members ----------------------------------------------------------------


def test_member_with_bad_crc_is_refused_when_opened(tmp_path: Path, monkeypatch, capsys) -> None:
    """One flipped byte in a stored worksheet: refused naming the member, before any work."""
    p = _repack(_base(tmp_path), tmp_path / "crc.xlsx", stored=(SHEET,))
    raw = bytearray(p.read_bytes())
    at = raw.index(b"<sheetData>")
    raw[at + 1] = ord("S")  # still XML-ish, but not the bytes the CRC was taken of
    p.write_bytes(bytes(raw))
    err = _refused_in_process(p, monkeypatch, capsys)
    assert (
        f"member {SHEET} is damaged (CRC mismatch) — open and re-save the book in a "
        "spreadsheet application"
    ) in err


def test_member_with_corrupt_deflate_data_is_refused(tmp_path: Path, monkeypatch, capsys) -> None:
    """Garbage inside a compressed member's data stream: refused naming the member."""
    p = _repack(_base(tmp_path), tmp_path / "zlib.xlsx")
    with zipfile.ZipFile(p) as z:
        info = z.getinfo("xl/styles.xml")
    raw = bytearray(p.read_bytes())
    name_len, extra_len = struct.unpack("<HH", raw[info.header_offset + 26:info.header_offset + 30])
    data_at = info.header_offset + 30 + name_len + extra_len
    raw[data_at:data_at + 8] = b"\xff" * 8
    p.write_bytes(bytes(raw))
    err = _refused_in_process(p, monkeypatch, capsys)
    assert "member xl/styles.xml is damaged" in err and "re-save" in err


# --- 2. part names that differ only in case --------------------------------------------


def test_case_duplicate_part_names_are_refused(tmp_path: Path, monkeypatch, capsys) -> None:
    """xl/worksheets/sheet1.xml and xl/worksheets/Sheet1.xml in one package: ambiguous."""
    base = _base(tmp_path)
    p = _repack(base, tmp_path / "case.xlsx", add={"xl/worksheets/Sheet1.xml": entries(base)[SHEET]})
    err = _refused_in_process(p, monkeypatch, capsys)
    assert "xl/worksheets/sheet1.xml and xl/worksheets/Sheet1.xml" in err
    assert "part names ignore case" in err


# --- 3. zip bombs and size caps ---------------------------------------------------------


def _deflated_zeros(z: zipfile.ZipFile, name: str, size: int) -> None:
    info = zipfile.ZipInfo(name)
    info.compress_type = zipfile.ZIP_DEFLATED
    with z.open(info, "w", force_zip64=True) as fh:
        block = b"\0" * (1 << 20)
        for _ in range(size >> 20):
            fh.write(block)


def test_highly_compressed_member_is_refused_from_the_directory(tmp_path: Path) -> None:
    """A 512 MiB run of zeros deflated ~1000:1 into a worksheet: refused, nothing inflated."""
    p = _repack(_base(tmp_path), tmp_path / "bomb.xlsx", change={SHEET: None})
    with zipfile.ZipFile(p, "a", zipfile.ZIP_DEFLATED) as z:
        _deflated_zeros(z, SHEET, 512 << 20)
    assert p.stat().st_size < 2 << 20
    err, peak = _refused_in_child(p)
    assert f"member {SHEET} would inflate" in err and "zip bomb" in err
    assert peak < 200 << 10  # KiB: the member was never inflated


def _forge_sizes(path: Path, sizes: Mapping[str, int]) -> None:
    """Overwrite the uncompressed sizes the central directory states for some members."""
    raw = bytearray(path.read_bytes())
    at = raw.find(b"PK\x01\x02")
    while at >= 0:
        n, m, k = struct.unpack("<HHH", raw[at + 28:at + 34])
        name = raw[at + 46:at + 46 + n].decode()
        if name in sizes:
            raw[at + 24:at + 28] = struct.pack("<I", sizes[name])
        at = raw.find(b"PK\x01\x02", at + 46 + n + m + k)
    path.write_bytes(bytes(raw))


def test_total_uncompressed_size_is_capped(tmp_path: Path, monkeypatch, capsys) -> None:
    """Twelve 1 MiB members each stating 200 MiB (200:1, within the ratio cap): 2.3 GiB in
    all is refused from the central directory alone."""
    rng = random.Random(3)
    blobs = {f"xl/media/blob{i}.bin": rng.randbytes(1 << 20) for i in range(12)}
    p = _repack(_base(tmp_path), tmp_path / "total.xlsx")
    with zipfile.ZipFile(p, "a", zipfile.ZIP_STORED) as z:
        for name, data in blobs.items():
            z.writestr(name, data)
    _forge_sizes(p, {name: 200 << 20 for name in blobs})
    err = _refused_in_process(p, monkeypatch, capsys)
    assert "would inflate to 2,400 MiB, more than sheetfit reads (2,048 MiB)" in err


def _with_shared_string(tmp_path: Path, text: str, cells: int) -> Path:
    """The base book plus a shared string ``text`` shown by ``cells`` cells of column D."""
    base = _base(tmp_path)
    sst = _text(base, "xl/sharedStrings.xml")
    index = sst.count("<si>")
    sst = sst.replace("</sst>", f"<si><t>{text}</t></si></sst>")
    rows = "".join(f'<row r="{r}"><c r="D{r}" t="s"><v>{index}</v></c></row>'
                   for r in range(20, 20 + cells))
    sheet = _text(base, SHEET).replace("</sheetData>", rows + "</sheetData>")
    return _repack(base, tmp_path / "strings.xlsx",
                   {SHEET: sheet.encode(), "xl/sharedStrings.xml": sst.encode()})


def test_one_long_shared_string_in_thousands_of_cells_is_refused(tmp_path: Path) -> None:
    """A 1 MB string shown by 3,000 cells (a 0.7 MB file) would take 3 GB in the value
    reader (it keeps a copy per cell; unchecked, the child dies of an allocation failure
    under the limit): refused by the package scan, in bounded memory."""
    rng = random.Random(5)
    text = "".join(rng.choice("abcdefghijklmnopqrstuvwxyz0123456789") for _ in range(1 << 20))
    p = _with_shared_string(tmp_path, text, 3000)
    assert p.stat().st_size < 1 << 20
    err, peak = _refused_in_child(p)
    assert "show more than 256 MiB of text from the shared strings" in err
    assert peak < 300 << 10  # KiB


def test_long_shared_strings_within_the_cap_refresh(tmp_path: Path) -> None:
    """The same 1 MB string in 40 cells (40 MB of cell text) is read and the book refreshes."""
    rng = random.Random(5)
    text = "".join(rng.choice("abcdefghijklmnopqrstuvwxyz0123456789") for _ in range(1 << 20))
    p = _with_shared_string(tmp_path, text, 40)
    status, out, err, peak = _run_child(p, tmp_path / "out.xlsx")
    assert status == 0, err
    assert "model a: least squares" in out and 0 < peak < LIMIT_AS >> 10


@pytest.mark.parametrize("book", sorted((Path(__file__).parents[1] / "example_books").glob("*.xlsx"))
                         + [Path(__file__).parents[1] / "templates" / "cost_model_template.xlsx"],
                         ids=lambda p: p.stem)
def test_example_books_are_far_within_the_caps(book: Path) -> None:
    """The shipped books: under 1% of the total cap, no member over 10:1, and they open."""
    with zipfile.ZipFile(book) as z:
        infos = z.infolist()
    assert sum(i.file_size for i in infos) < integrity.MAX_TOTAL // 100
    assert max(i.file_size / max(i.compress_size, 1) for i in infos) < 10
    assert open_package(book).sheets


def test_a_large_book_is_far_within_the_caps(tmp_path: Path) -> None:
    """20,000 rows × 5 columns of seeded numbers (xlsxwriter): its sheet compresses about
    5:1, whatever the row count, and ten times the book (200,000 rows, about 40 MB
    uncompressed; measured 38.5 MB) stays under 1/40 of the total cap. It opens (every
    member read and checked). Kept at 20,000 rows: writing 200,000 takes 17 s."""
    import numpy as np
    import xlsxwriter

    rng = np.random.default_rng(9)
    p = tmp_path / "big.xlsx"
    wb = xlsxwriter.Workbook(str(p), {"constant_memory": True})
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["y", "a", "b", "c", "d"])
    for r, row in enumerate(rng.normal(size=(20_000, 5)).round(6).tolist(), start=1):
        ws.write_row(r, 0, row)
    wb.close()
    with zipfile.ZipFile(p) as z:
        infos = z.infolist()
    total = sum(i.file_size for i in infos)
    worst = max(i.file_size / max(i.compress_size, 1) for i in infos)
    assert 2 << 20 < total and 10 * total < integrity.MAX_TOTAL // 40
    assert worst < integrity.MAX_RATIO / 20
    assert [s.name for s in open_package(p).sheets] == ["Data"]


# --- 4. DTDs and entity declarations ----------------------------------------------------

_DTD = '<!DOCTYPE x [<!ENTITY big "bigbigbigbig">]>'
_EXTERNAL = '<!DOCTYPE x [<!ENTITY ext SYSTEM "file:///etc/hostname">]>'


def _with_prolog(text: str, prolog: str) -> str:
    head, sep, rest = text.partition("?>")
    return head + sep + prolog + rest if sep else prolog + text


@pytest.mark.parametrize(
    ("member", "prolog"),
    [
        ("xl/workbook.xml", _DTD),
        ("_rels/.rels", _EXTERNAL),
        ("xl/_rels/workbook.xml.rels", _DTD),
        (SHEET, _DTD),
        ("xl/styles.xml", _EXTERNAL),
        ("xl/sharedStrings.xml", _EXTERNAL),
        ("[Content_Types].xml", _DTD),
        ("docProps/app.xml", "<!DOCTYPE x>"),
    ],
)
def test_dtd_in_a_parsed_part_is_refused_naming_it(
    tmp_path: Path, monkeypatch, capsys, member: str, prolog: str
) -> None:
    """A DTD (internal entity, external entity, or bare) in any part sheetfit parses."""
    base = _base(tmp_path)
    p = _repack(base, tmp_path / "dtd.xlsx",
                {member: _with_prolog(_text(base, member), prolog).encode()})
    err = _refused_in_process(p, monkeypatch, capsys)
    assert f"part {member} carries a DTD or entity declaration" in err


def test_dtd_in_a_utf16_part_is_refused(tmp_path: Path, monkeypatch, capsys) -> None:
    """The DTD check reads UTF-16 parts too."""
    base = _base(tmp_path)
    text = _with_prolog(_text(base, "xl/styles.xml").replace('"UTF-8"', '"UTF-16"'), _DTD)
    p = _repack(base, tmp_path / "dtd16.xlsx", {"xl/styles.xml": text.encode("utf-16")})
    err = _refused_in_process(p, monkeypatch, capsys)
    assert "part xl/styles.xml carries a DTD" in err


def test_dtd_in_a_part_sheetfit_does_not_parse_is_kept(tmp_path: Path) -> None:
    """A part sheetfit only copies (here a custom XML item) may carry a DTD: kept as is."""
    base = _base(tmp_path)
    item = b'<?xml version="1.0"?><!DOCTYPE note><note>kept</note>'
    p = _repack(base, tmp_path / "custom.xlsx", add={"customXml/item1.xml": item})
    out = tmp_path / "out.xlsx"
    assert main(["refresh", str(p), "--out", str(out)]) == 0
    assert entries(out)["customXml/item1.xml"] == item


def _refresh_child_ok(book: Path, out: Path) -> str:
    status, stdout, err, _ = _run_child(book, out)
    assert status == 0, err
    return stdout


_Builder = Callable[[Path], Path]


# --- 5. odd books that must refresh -----------------------------------------------------

_WB = "xl/workbook.xml"
_WB_RELS = "xl/_rels/workbook.xml.rels"
_CT = "[Content_Types].xml"
_MACRO = "xl/macrosheets/sheet1.xml"
_R_MACRO = "http://schemas.microsoft.com/office/2006/relationships/xlMacrosheet"
_T_MACRO = "application/vnd.ms-excel.macrosheet+xml"
_MACRO_XML = (
    b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    b'<xm:macrosheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
    b'xmlns:xm="http://schemas.microsoft.com/office/excel/2006/main">'
    b'<sheetData><row r="1"><c r="A1"><v>7</v></c></row></sheetData></xm:macrosheet>'
)


def _sheet_entry(name: str, sheet_id: int, rid: str) -> str:
    return f'<sheet name="{name}" sheetId="{sheet_id}" r:id="{rid}"/>'


def _empty_rid_book(tmp_path: Path) -> Path:
    """A <sheet> whose relationship id is empty, between two real sheets."""
    base = _base(tmp_path)
    wb = _text(base, _WB).replace("</sheets>", _sheet_entry("Ghost", 9, "") + "</sheets>")
    return _repack(base, tmp_path / "ghost.xlsx", {_WB: wb.encode()})


def _macro_book(tmp_path: Path) -> Path:
    """An old-style macro sheet (xl/macrosheets/, relationship type .../xlMacrosheet)."""
    base = _base(tmp_path)
    wb = _text(base, _WB).replace("</sheets>", _sheet_entry("Macro1", 9, "rId90") + "</sheets>")
    rels = _text(base, _WB_RELS).replace(
        "</Relationships>",
        f'<Relationship Id="rId90" Type="{_R_MACRO}" Target="macrosheets/sheet1.xml"/>'
        "</Relationships>",
    )
    ct = _text(base, _CT).replace(
        "</Types>", f'<Override PartName="/{_MACRO}" ContentType="{_T_MACRO}"/></Types>'
    )
    return _repack(base, tmp_path / "macro.xlsx",
                   {_WB: wb.encode(), _WB_RELS: rels.encode(), _CT: ct.encode()},
                   add={_MACRO: _MACRO_XML})


def _no_styles_book(tmp_path: Path) -> Path:
    """The workbook's relationships name xl/styles.xml; the package lacks it."""
    return _repack(_base(tmp_path), tmp_path / "nostyles.xlsx", {"xl/styles.xml": None})


def _no_styles_rel_book(tmp_path: Path) -> Path:
    """No styles part and no relationship or override for one; a user cell carries s="1"."""
    base = _base(tmp_path)
    rels = _text(base, _WB_RELS)
    rels = _drop_rel(rels, "/styles")
    ct = _text(base, _CT).replace(
        '<Override PartName="/xl/styles.xml" '
        'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.styles+xml"/>',
        "",
    )
    sheet = _text(base, SHEET).replace('<c r="B2">', '<c r="B2" s="1">')
    assert 's="1"' in sheet and "styles" not in ct
    return _repack(base, tmp_path / "nostylesrel.xlsx",
                   {"xl/styles.xml": None, _WB_RELS: rels.encode(), _CT: ct.encode(),
                    SHEET: sheet.encode()})


def _drop_rel(rels: str, type_end: str) -> str:
    out = re.sub(rf'<Relationship [^>]*Type="[^"]*{type_end}"[^>]*/>', "", rels)
    assert out != rels
    return out


ODD_BOOKS: dict[str, _Builder] = {
    "empty relationship id": _empty_rid_book,
    "macro sheet": _macro_book,
    "styles part missing": _no_styles_book,
    "no styles part nor relationship": _no_styles_rel_book,
}


@pytest.mark.parametrize("build", ODD_BOOKS.values(), ids=ODD_BOOKS.keys())
def test_odd_books_refresh_and_recalculate(engine, tmp_path: Path, build: _Builder) -> None:
    """Each odd book refreshes (exit 0), keeps every part it does not own byte for byte,
    and the refreshed book opens and recalculates in LibreOffice to its cached values."""
    from engine.compare import assert_cached_values_hold

    book = build(tmp_path)
    before = entries(book)
    out = tmp_path / "out.xlsx"
    stdout = _refresh_child_ok(book, out)
    assert "model a: least squares, cost on units" in stdout
    assert entries(book) == before  # --out leaves the input alone
    after = entries(out)
    shared = {_WB, _WB_RELS, _CT, "docProps/app.xml", "xl/styles.xml"}
    for name, data in before.items():
        if name not in shared:
            assert after.get(name) == data, name
    pkg = open_package(out)
    mine = [s.name for s in open_package(book).sheets]
    assert [s.name for s in pkg.sheets][: len(mine)] == mine
    # index, coef, fitted, resid, charts; about, inputs and log (the book's history)
    assert len(pkg.owned_sheets()) == 8
    # 1e-9 relative, 1e-12 absolute near 0: different summation orders in two engines
    assert_cached_values_hold(out, engine, rel=1e-9, abs_=1e-12)
    # A second refresh of the refreshed book puts the owned sheets back where they were.
    again = tmp_path / "again.xlsx"
    _refresh_child_ok(out, again)
    def layout(path: Path) -> list[tuple[str, str, int]]:
        return [(s.name, s.part, s.sheet_id) for s in open_package(path).sheets]

    assert layout(again) == layout(out)


def test_skipped_sheet_entries_are_kept_byte_for_byte(tmp_path: Path) -> None:
    """The empty-id <sheet> and the macro sheet stay in the workbook part as they were, the
    macro sheet's part and relationship untouched."""
    (tmp_path / "g").mkdir()
    (tmp_path / "m").mkdir()
    ghost, macro = _empty_rid_book(tmp_path / "g"), _macro_book(tmp_path / "m")
    for book, kept in ((ghost, _sheet_entry("Ghost", 9, "")),
                       (macro, _sheet_entry("Macro1", 9, "rId90"))):
        out = book.with_name("out.xlsx")
        assert main(["refresh", str(book), "--out", str(out)]) == 0
        assert kept in _text(out, _WB)
    assert entries(macro.with_name("out.xlsx"))[_MACRO] == _MACRO_XML
    assert f'Id="rId90" Type="{_R_MACRO}"' in _text(macro.with_name("out.xlsx"), _WB_RELS)
    kinds = {s.name: (s.kind, s.is_worksheet) for s in open_package(macro).sheets}
    assert kinds["Macro1"] == ("xlMacrosheet", False) and kinds["Data"] == ("worksheet", True)
    assert open_package(ghost).sheet("Ghost").kind == ""


def test_added_styles_part_keeps_user_cell_formats_plain(tmp_path: Path) -> None:
    """A user cell with s="1" in a book without styles: the added part's format 1 is plain,
    and sheetfit's formats come after it."""
    book = _no_styles_rel_book(tmp_path)
    out = tmp_path / "out.xlsx"
    assert main(["refresh", str(book), "--out", str(out)]) == 0
    styles = _text(out, "xl/styles.xml")
    xfs = re.findall(r"<xf\b[^>]*?/?>", styles.split("<cellXfs", 1)[1])
    assert xfs[1] == xfs[0]
    assert 'Target="styles.xml"' in _text(out, _WB_RELS)
    assert 'PartName="/xl/styles.xml"' in _text(out, _CT)
    owned = open_package(out).owned_sheets()[0].part
    used = {int(i) for i in re.findall(r' s="(\d+)"', _text(out, owned))}
    assert used and min(used) >= 2 or used == {0}


@pytest.mark.parametrize("build,what", [(_macro_book, "a macro sheet"),
                                        (_empty_rid_book, "not a worksheet")],
                         ids=["macro sheet", "empty relationship id"])
def test_declaration_pointing_at_a_sheet_without_cells_is_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], build: _Builder, what: str
) -> None:
    """A name pointing at a macro sheet or a sheet entry without a part: exit 2, one line."""
    book = build(tmp_path)
    ghost = "Macro1" if build is _macro_book else "Ghost"
    wb = _text(book, _WB).replace(
        "</definedNames>", f'<definedName name="sf_b_y">{ghost}!$A$1:$A$5</definedName>'
        f'<definedName name="sf_b_x">{ghost}!$B$1:$B$5</definedName></definedNames>')
    bad = _repack(book, tmp_path / "bad.xlsx", {_WB: wb.encode()})
    before = bad.read_bytes()
    status = main(["refresh", str(bad)])
    err = capsys.readouterr().err
    assert status == 2 and err.count("\n") == 1 and "Traceback" not in err, err
    assert f"it points to '{ghost}', which is {what}, not a sheet of cells" in err
    assert bad.read_bytes() == before


def test_shared_part_that_cannot_be_edited_is_refused(tmp_path: Path,
                                                     capsys: pytest.CaptureFixture[str]) -> None:
    """A content-types part naming an unknown encoding: exit 2, the part named, book unchanged
    (found by the mutation fuzz in test_fuzz_packages.py)."""
    base = _base(tmp_path)
    ct = _text(base, _CT).replace('encoding="UTF-8"', 'encoding="UF-8"')
    assert "UF-8" in ct
    bad = _repack(base, tmp_path / "ct.xlsx", {_CT: ct.encode()})
    before = bad.read_bytes()
    status = main(["refresh", str(bad)])
    err = capsys.readouterr().err
    assert status == 2 and err.count("\n") == 1 and "Traceback" not in err, err
    assert "part [Content_Types].xml is malformed" in err
    assert bad.read_bytes() == before


def test_malformed_app_properties_are_kept_and_the_book_refreshes(tmp_path: Path) -> None:
    """docProps/app.xml only lists titles for file browsers: a broken one is kept byte for
    byte rather than refusing the book (found by the mutation fuzz)."""
    base = _base(tmp_path)
    app = _text(base, "docProps/app.xml")
    broken = app[: len(app) // 2].encode()  # cut in the middle: no closing tags
    book = _repack(base, tmp_path / "app.xlsx", {"docProps/app.xml": broken})
    out = tmp_path / "out.xlsx"
    assert main(["refresh", str(book), "--out", str(out)]) == 0
    assert entries(out)["docProps/app.xml"] == broken
