"""Acceptance test of promise 2 ("nothing else touched") for the graft of owned sheets.

Packages are compared part by part on their unzipped bytes. Shared parts are
checked twice: on bytes (the source text survives as a subsequence of the
result: only insertions, apart from count attributes), and on content (after
removing the owned entries from the parsed result, the canonical XML equals
the source's; canonical form because removal is done with an XML library).
"""

from __future__ import annotations

import difflib
import io
import os
import re
import shutil
import struct
import zlib
from pathlib import Path

import pytest
import xlsxwriter
from books import entries, part_changes, sheet_changes, soffice_convert
from lxml import etree

import sheetfit.writer.target as target_mod
from sheetfit.errors import DeclarationError
from sheetfit.owned import MARKER_NAME
from sheetfit.reader.package import open_package, resolve_target
from sheetfit.writer.graft import OutputName, graft

MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
SHARED = ("xl/workbook.xml", "xl/_rels/workbook.xml.rels", "[Content_Types].xml")
STYLES = "xl/styles.xml"
APP = "docProps/app.xml"
TITLES = ("sf demo coef", "sf demo fitted", "sf index")
NAMES = (
    OutputName("sf_demo_coef", "'sf demo coef'!$B$2:$B$3"),
    OutputName("sf_demo_fitted", "'sf demo fitted'!$A$2:$A$11"),
)
# CT_Workbook child order (ECMA-376 Part 1, 18.2.27).
WB_ORDER = [
    "fileVersion", "fileSharing", "workbookPr", "workbookProtection", "bookViews", "sheets",
    "functionGroups", "externalReferences", "definedNames", "calcPr", "oleSize",
    "customWorkbookViews", "pivotCaches", "smartTagPr", "smartTagTypes", "webPublishing",
    "fileRecoveryPr", "webPublishObjects", "extLst",
]  # fmt: skip
_PARSER = etree.XMLParser(resolve_entities=False, no_network=True)


# ---------------------------------------------------------------- helpers


def _soffice(src: Path, outdir: Path, fmt: str, ext: str) -> Path:
    """Convert with LibreOffice (private profile); skip, or fail in CI, if it is missing."""
    out = soffice_convert(src, outdir, fmt)
    if ext == "csv":
        out = outdir / f"{src.stem}-{TITLES[0]}.csv"
        assert out.exists(), f"LibreOffice wrote no {out.name}"
    return out


def _png(w: int = 4, h: int = 3) -> bytes:
    """A small red RGB PNG."""

    def chunk(kind: bytes, data: bytes) -> bytes:
        crc = zlib.crc32(kind + data) & 0xFFFFFFFF
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", crc)

    raw = b"".join(b"\x00" + bytes([255, 0, 0]) * w for _ in range(h))
    head = struct.pack(">IIBBBBB", w, h, 8, 2, 0, 0, 0)
    return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", head) + chunk(b"IDAT", zlib.compress(raw))


def _user_book(path: Path) -> Path:
    """A user book with a chart, comments, an image, validation, formats, a name, a table."""
    wb = xlsxwriter.Workbook(str(path))
    money = wb.add_format({"num_format": "$#,##0.00", "italic": True})
    data = wb.add_worksheet("Data")
    data.write_row(0, 0, ["id", "units", "cost"])
    for r in range(1, 11):
        data.write_row(r, 0, [f"row {r}", r, 0.5 + 2 * r], money)
    data.write_comment("B2", "units shipped")
    data.write_comment("C3", "from the ledger")
    data.data_validation("B2:B11", {"validate": "integer", "criteria": ">", "value": 0})
    data.conditional_format("C2:C11", {"type": "3_color_scale"})
    data.insert_image("F2", "dot.png", {"image_data": io.BytesIO(_png())})
    chart = wb.add_chart({"type": "scatter"})
    chart.add_series({"categories": "=Data!$B$2:$B$11", "values": "=Data!$C$2:$C$11"})
    data.insert_chart("F8", chart)
    more = wb.add_worksheet("More")
    more.add_table("B2:C5", {"name": "Plan", "columns": [{"header": "q"}, {"header": "v"}]})
    more.write_row(2, 1, [1, 2])
    wb.define_name("sf_demo_y", "=Data!$C$2:$C$11")
    wb.define_name("sf_demo_x", "=Data!$B$2:$B$11")
    wb.define_name("More!local", "=More!$B$2")
    wb.close()
    return path


def _rendered(path: Path) -> Path:
    """Rendered owned sheets: formulas into Data with cached values, strings, numbers, formats."""
    wb = xlsxwriter.Workbook(str(path))
    bold = wb.add_format({"bold": True})
    three = wb.add_format({"num_format": "0.000"})
    coef = wb.add_worksheet(TITLES[0])
    coef.write_row(0, 0, ["term", "estimate"], bold)
    coef.write_string(1, 0, "intercept")
    coef.write_formula(1, 1, "=INTERCEPT(Data!$C$2:$C$11,Data!$B$2:$B$11)", three, 0.5)
    coef.write_string(2, 0, "slope")
    coef.write_formula(2, 1, "=SLOPE(Data!$C$2:$C$11,Data!$B$2:$B$11)", three, 2.0)
    fitted = wb.add_worksheet(TITLES[1])
    fitted.write_string(0, 0, "fitted", bold)
    for r in range(1, 11):
        f = f"='{TITLES[0]}'!$B$2+'{TITLES[0]}'!$B$3*Data!$B${r + 1}"
        fitted.write_formula(r, 0, f, three, 0.5 + 2 * r)
    index = wb.add_worksheet(TITLES[2])
    index.write_row(0, 0, ["model", "rows"], bold)
    index.write_row(1, 0, ["demo", 10])
    index.write_string(2, 0, " spaced ")
    wb.close()
    return path


def _owned_parts(path: Path) -> set[str]:
    pkg = open_package(path)
    parts = set()
    for s in pkg.owned_sheets():
        parts.add(s.part)
        parts.add(f"{os.path.dirname(s.part)}/_rels/{os.path.basename(s.part)}.rels")
    return parts


def _only_insertions(old: bytes, new: bytes, normalise: str | None = None) -> None:
    """The old text survives in the new one; the new one only adds text."""
    a, b = old.decode("utf-8"), new.decode("utf-8")
    if normalise:
        a, b = re.sub(normalise, "#", a), re.sub(normalise, "#", b)
    ops = difflib.SequenceMatcher(None, a, b, autojunk=False).get_opcodes()
    assert {op[0] for op in ops} <= {"equal", "insert"}, [o for o in ops if o[0] != "equal"][:3]


def _canon(el: etree._Element) -> bytes:
    return etree.tostring(el, method="c14n", exclusive=True)


def _strip_workbook(data: bytes) -> bytes:
    root = etree.fromstring(data, _PARSER)
    for el in root.iter(f"{{{MAIN}}}sheet"):
        if el.get("name") in TITLES:
            el.getparent().remove(el)
    holder = root.find(f"{{{MAIN}}}definedNames")
    if holder is not None:
        ours = {MARKER_NAME, *(n.name for n in NAMES)}
        for el in list(holder):
            if el.get("name") in ours:
                holder.remove(el)
        if len(holder) == 0:
            root.remove(holder)
    return _canon(root)


def _strip_list(data: bytes, tag: str, attr: str, owned: set[str]) -> bytes:
    root = etree.fromstring(data, _PARSER)
    for el in list(root):
        if el.tag.endswith(tag) and el.get(attr, "").lstrip("/") in owned:
            root.remove(el)
    return _canon(root)


def _check_invariants(path: Path) -> None:
    """sheetIds unique, content types for every part, rel targets exist, names in schema order."""
    ent = entries(path)
    lower = {n.lower() for n in ent}
    assert len(lower) == len(ent), "case-duplicate part names"
    ct = etree.fromstring(ent["[Content_Types].xml"], _PARSER)
    defaults = {e.get("Extension").lower() for e in ct if e.tag.endswith("Default")}
    overrides = [e.get("PartName").lstrip("/").lower() for e in ct if e.tag.endswith("Override")]
    assert len(overrides) == len(set(overrides))
    assert set(overrides) <= lower, "override for a missing part"
    for name in ent:
        if name != "[Content_Types].xml" and not name.endswith("/"):
            ext = name.rsplit(".", 1)[-1].lower()
            assert name.lower() in overrides or ext in defaults, f"no content type: {name}"
    for name, data in ent.items():
        if not name.endswith(".rels"):
            continue
        folder = name.split("_rels/")[0]
        src = folder + name.split("_rels/")[1][: -len(".rels")]
        for rel in etree.fromstring(data, _PARSER):
            if rel.get("TargetMode") == "External":
                continue
            assert resolve_target(src, rel.get("Target")).lower() in lower, (name, rel.attrib)
    pkg = open_package(path)
    assert len({s.sheet_id for s in pkg.sheets}) == len(pkg.sheets)
    assert len({s.name.lower() for s in pkg.sheets}) == len(pkg.sheets)
    wb = etree.fromstring(ent[pkg.workbook_part], _PARSER)
    order = [WB_ORDER.index(etree.QName(el).localname) for el in wb]
    assert order == sorted(order), "workbook children out of schema order"
    for d in pkg.defined_names:
        assert d.local_sheet_id is None or 0 <= d.local_sheet_id < len(pkg.sheets)


# ---------------------------------------------------------------- fixtures


@pytest.fixture(scope="module")
def books(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """The user's book as xlsxwriter wrote it, the same re-saved by LibreOffice, the render."""
    d = tmp_path_factory.mktemp("books")
    made = _user_book(d / "user.xlsx")
    out = {"xlsxwriter": made, "rendered": _rendered(d / "rendered.xlsx")}
    out["libreoffice"] = _soffice(made, d / "lo", "xlsx", "xlsx")
    return out


@pytest.fixture(params=["xlsxwriter", "libreoffice"])
def user(request: pytest.FixtureRequest, books: dict[str, Path], tmp_path: Path) -> Path:
    """A fresh copy of one kind of user book."""
    dst = tmp_path / "user.xlsx"
    shutil.copyfile(books[request.param], dst)
    return dst


# ---------------------------------------------------------------- tests


def test_non_owned_parts_keep_their_bytes(user: Path, books: dict[str, Path], tmp_path: Path):
    """Every entry sheetfit does not own or share is byte-identical, in the same order."""
    out = tmp_path / "out.xlsx"
    graft(open_package(user), books["rendered"], NAMES, out)
    assert sheet_changes(user, out) == ([], list(TITLES))
    src, res = entries(user), entries(out)
    owned = _owned_parts(out)
    assert len(owned & set(res)) == 3
    assert list(res)[: len(src)] == list(src), "entry order changed"
    assert set(res) - set(src) == owned & set(res)
    touched = {*SHARED, STYLES, APP}
    for name, data in src.items():
        if name not in touched:
            assert res[name] == data, f"{name} changed"
    assert res["xl/sharedStrings.xml"] == src["xl/sharedStrings.xml"]
    for name in res:
        if name in owned:
            assert b't="s"' not in res[name] and b"tabSelected" not in res[name]
    _check_invariants(out)


def test_shared_parts_only_gain_ownedentries(user: Path, books: dict[str, Path], tmp_path: Path):
    """workbook, its rels, content types, styles, app properties: owned entries added, no more."""
    out = tmp_path / "out.xlsx"
    graft(open_package(user), books["rendered"], NAMES, out)
    src, res = entries(user), entries(out)
    owned = {p.lower() for p in _owned_parts(out)}
    for name in SHARED:
        _only_insertions(src[name], res[name])
    assert _strip_workbook(res[SHARED[0]]) == _strip_workbook(src[SHARED[0]])
    owned_targets = {p.removeprefix("xl/") for p in owned}
    assert _strip_list(res[SHARED[1]], "Relationship", "Target", owned_targets) == _canon(
        etree.fromstring(src[SHARED[1]], _PARSER)
    )
    assert _strip_list(res[SHARED[2]], "Override", "PartName", owned) == _canon(
        etree.fromstring(src[SHARED[2]], _PARSER)
    )
    _only_insertions(src[STYLES], res[STYLES], normalise=r'count="\d+"')
    u_root, r_root = (etree.fromstring(x[STYLES], _PARSER) for x in (src, res))
    for holder in u_root:
        twin = r_root.find(holder.tag)
        assert [_canon(c) for c in twin][: len(holder)] == [_canon(c) for c in holder]
        if twin.get("count") is not None:
            assert int(twin.get("count")) == len(twin)
    if APP in src:
        _only_insertions(src[APP], res[APP], normalise=r'size="\d+"|<vt:i4>\d+</vt:i4>')
        titles = [e.text for e in etree.fromstring(res[APP], _PARSER).iter() if
                  etree.QName(e).localname == "lpstr"]  # fmt: skip
        if "Data" in titles:
            assert titles[titles.index("More") + 1 : titles.index("More") + 4] == list(TITLES)


def test_second_graft_is_identical(user: Path, books: dict[str, Path], tmp_path: Path):
    """Grafting the same render again gives the same package, entry for entry, byte for byte."""
    one, two = tmp_path / "one.xlsx", tmp_path / "two.xlsx"
    graft(open_package(user), books["rendered"], NAMES, one)
    graft(open_package(one), books["rendered"], NAMES, two)
    # The second graft replaces the owned sheets by byte-identical ones, so the removal leaves
    # no trace in the files. What they show: the sheets a graft removes (those carrying the
    # marker) are exactly TITLES in its source, and its output holds each title once, after the
    # user's sheets, so none was kept beside its replacement.
    assert [s.name for s in open_package(one).owned_sheets()] == list(TITLES)
    titles = [s.name for s in open_package(two).sheets]
    assert titles[-len(TITLES) :] == list(TITLES) and len(set(titles)) == len(titles)
    e1, e2 = entries(one), entries(two)
    # New parts reuse the numbers freed by the removed ones: the output has no entry its
    # source lacks.
    assert set(e2) <= set(e1)
    assert list(e1) == list(e2)
    for name in e1:
        assert e1[name] == e2[name], f"{name} differs after a second graft"
    assert one.read_bytes() == two.read_bytes()


def test_libreoffice_opens_the_graft(user: Path, books: dict[str, Path], tmp_path: Path):
    """LibreOffice loads the grafted book and shows the owned sheet's values and formats."""
    out = tmp_path / "grafted.xlsx"
    graft(open_package(user), books["rendered"], NAMES, out)
    csv = _soffice(
        out, tmp_path / "csv",
        "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,true,false,false,-1", "csv",
    )  # fmt: skip
    text = csv.read_text(encoding="utf-8")
    assert "intercept,0.500" in text and "slope,2.000" in text


def test_removal_after_libreoffice_resave(books: dict[str, Path], tmp_path: Path):
    """After LibreOffice re-saves a grafted book, the marker still finds the owned sheets."""
    first = tmp_path / "first.xlsx"
    shutil.copyfile(books["xlsxwriter"], tmp_path / "u.xlsx")
    graft(open_package(tmp_path / "u.xlsx"), books["rendered"], NAMES, first)
    resaved = _soffice(first, tmp_path / "lo", "xlsx", "xlsx")
    pkg = open_package(resaved)
    assert [s.name for s in pkg.owned_sheets()] == list(TITLES)
    again = tmp_path / "again.xlsx"
    graft(open_package(resaved), books["rendered"], NAMES, again)
    assert sheet_changes(resaved, again)[0] == list(TITLES)
    pkg2 = open_package(again)
    assert [s.name for s in pkg2.sheets] == ["Data", "More", *TITLES]
    markers = [d for d in pkg2.defined_names if d.name == MARKER_NAME]
    assert sorted(d.local_sheet_id for d in markers) == [2, 3, 4]
    assert sum(d.name == "sf_demo_coef" for d in pkg2.defined_names) == 1
    src, res = entries(resaved), entries(again)
    removed, _ = part_changes(resaved, again)
    # What went is exactly the owned sheets' parts (and their rels, if any); LibreOffice
    # numbered them last, so the rendered sheets reuse those numbers with new bytes.
    assert removed == _owned_parts(resaved) & set(src)
    for name, data in src.items():
        if name not in {*SHARED, STYLES, APP, *removed}:
            assert res[name] == data, f"{name} changed"
    # A removed part stays in the output only as the home of a rendered sheet.
    assert removed & set(res) <= {s.part for s in pkg2.owned_sheets()}
    _check_invariants(again)


def test_refuses_user_sheet_with_owned_title(tmp_path: Path, books: dict[str, Path]):
    """A user sheet named like an owned sheet is a refusal; the file keeps its bytes."""
    p = tmp_path / "clash.xlsx"
    wb = xlsxwriter.Workbook(str(p))
    wb.add_worksheet("Data").write(0, 0, 1)
    wb.add_worksheet("SF Demo Coef").write(0, 0, "mine")
    wb.close()
    before = p.read_bytes()
    with pytest.raises(DeclarationError, match=r"clash\.xlsx.*called 'SF Demo Coef'.*rename"):
        graft(open_package(p), books["rendered"], NAMES, p)
    assert p.read_bytes() == before
    assert os.listdir(tmp_path) == ["clash.xlsx"]


def test_refuses_user_name_colliding_with_output(tmp_path: Path, books: dict[str, Path]):
    """A user's global name equal to an output name (not into an owned sheet) is a refusal."""
    p = tmp_path / "names.xlsx"
    wb = xlsxwriter.Workbook(str(p))
    wb.add_worksheet("Data").write(0, 0, 1)
    wb.define_name("SF_DEMO_COEF", "=Data!$A$1")
    wb.close()
    before = p.read_bytes()
    with pytest.raises(DeclarationError, match=r"name SF_DEMO_COEF"):
        graft(open_package(p), books["rendered"], NAMES, p)
    assert p.read_bytes() == before
    assert os.listdir(tmp_path) == ["names.xlsx"]


def test_in_place_and_failure_leave_no_temp(tmp_path: Path, books: dict[str, Path], monkeypatch):
    """target == source is replaced atomically; a failure before the rename leaves no trace."""
    p = tmp_path / "book.xlsx"
    shutil.copyfile(books["xlsxwriter"], p)
    before = p.read_bytes()

    def boom(*_args: object) -> None:
        raise OSError("disk full")

    with monkeypatch.context() as m:
        m.setattr(target_mod.os, "replace", boom)
        with pytest.raises(OSError, match="disk full"):
            graft(open_package(p), books["rendered"], NAMES, p)
    assert p.read_bytes() == before
    assert os.listdir(tmp_path) == ["book.xlsx"]
    graft(open_package(p), books["rendered"], NAMES, p)
    assert [s.name for s in open_package(p).owned_sheets()] == list(TITLES)
    assert os.listdir(tmp_path) == ["book.xlsx"]


def test_refresh_end_to_end_keeps_user_parts_and_repeats_exactly(user: Path, tmp_path: Path):
    """The whole refresh (declare, fit, render, graft) on the rich book: user parts keep
    their bytes, and refreshing the result again gives the same entries but the log's."""
    import datetime as dt

    from sheetfit.refresh import refresh

    when = dt.datetime(2026, 1, 1, tzinfo=dt.UTC)
    out, again = tmp_path / "out.xlsx", tmp_path / "again.xlsx"
    refresh(user, out, now=when)
    src, res = entries(user), entries(out)
    for name, data in src.items():
        if name not in {*SHARED, STYLES, APP}:
            assert res[name] == data, f"{name} changed"
    _check_invariants(out)
    # the user's chart keeps its bytes and its name; ours are numbered above it and are
    # reached only through the owned charts sheet's drawing
    assert src["xl/charts/chart1.xml"] == res["xl/charts/chart1.xml"]
    ours = sorted(set(res) - set(src))
    assert [n for n in ours if n.startswith("xl/charts/")] == ["xl/charts/chart2.xml",
                                                               "xl/charts/chart3.xml"]
    assert [n for n in ours if n.startswith("xl/drawings/drawing")] == ["xl/drawings/drawing2.xml"]
    refresh(out, again, now=when)
    # A refresh appends to the log (one row per model), the documentation sheet quotes
    # that row, and the log's percent format joins the styles; all else repeats exactly.
    pkg = open_package(again)
    history = {pkg.sheet(t).part for t in ("sf log", "sf demo about")} | {STYLES}
    now = entries(again)
    assert set(now) == set(res)
    assert {name for name in res if now[name] != res[name]} <= history


def test_refresh_after_libreoffice_resave_replaces_its_sheets(books: dict[str, Path],
                                                              tmp_path: Path):
    """Refresh, let LibreOffice re-save the book, refresh again: the owned sheets and names
    are found and replaced, not duplicated, and the user's sheets are all still there."""
    from sheetfit.refresh import refresh

    first = tmp_path / "first.xlsx"
    refresh(books["xlsxwriter"], first)
    resaved = _soffice(first, tmp_path / "lo", "xlsx", "xlsx")
    second = tmp_path / "second.xlsx"
    refresh(resaved, second)
    pkg = open_package(second)
    titles = [s.name for s in pkg.sheets]
    assert titles == ["Data", "More", "sf index", "sf demo coef", "sf demo fitted",
                      "sf demo resid", "sf demo charts", "sf demo about", "sf inputs", "sf log"]
    outputs = sorted(d.name for d in pkg.defined_names if d.name.startswith("sf_demo_"))
    assert outputs == ["sf_demo_coef", "sf_demo_fitted", "sf_demo_loo", "sf_demo_resid",
                       "sf_demo_robust", "sf_demo_se", "sf_demo_x", "sf_demo_y"]
    assert len(pkg.owned_sheets()) == 8
    # one set of charts: the user's chart and the two on sf demo charts, nothing left over
    charts = [n for n in entries(second) if re.fullmatch(r"xl/charts/chart\d+\.xml", n)]
    assert len(charts) == 1 + 2, charts
    _check_invariants(second)
