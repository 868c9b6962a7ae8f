"""Unit checks of the graft's pieces on small hand-written parts and packages."""

from __future__ import annotations

import zipfile
from pathlib import Path

import pytest
import xlsxwriter
from books import part_changes, sheet_changes
from lxml import etree

from sheetfit import reader as book
from sheetfit.errors import PackageError
from sheetfit.reader.package import open_package
from sheetfit.writer._graft_app import update_app
from sheetfit.writer._graft_remove import filter_calc_chain
from sheetfit.writer._graft_sheet import convert_sheet, shared_strings
from sheetfit.writer._graft_workbook import next_number
from sheetfit.writer._styles import StyleMap, merge_styles
from sheetfit.writer.graft import OutputName, graft

M = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
R = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
CT_WS = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"
_PARSER = etree.XMLParser(resolve_entities=False, no_network=True)
DECL = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
STYLES = (
    f'{DECL}<styleSheet xmlns="{M}"><fonts count="1"><font><sz val="10"/><name val="Arial"/>'
    '</font></fonts><fills count="2"><fill><patternFill patternType="none"/></fill><fill>'
    '<patternFill patternType="gray125"/></fill></fills><borders count="1"><border/></borders>'
    '<cellStyleXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0"/></cellStyleXfs>'
    '<cellXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/></cellXfs>'
    "</styleSheet>"
)


def _package(path: Path, sheets: list[str], extra: dict[str, str] | None = None,
             wb_tail: str = "", names: str = "", views: str = "",
             wb_rels_extra: str = "", ct_extra: str = "") -> Path:  # fmt: skip
    """A minimal hand-written package with the given sheet names (sheet<i+1>.xml parts)."""
    sheet_els = "".join(
        f'<sheet name="{n}" sheetId="{i + 1}" r:id="rId{i + 1}"/>' for i, n in enumerate(sheets)
    )
    rels = "".join(
        f'<Relationship Id="rId{i + 1}" Type="{R}/worksheet" Target="worksheets/sheet{i + 1}.xml"/>'
        for i in range(len(sheets))
    )
    n = len(sheets)
    rels += f'<Relationship Id="rId{n + 1}" Type="{R}/styles" Target="styles.xml"/>' + wb_rels_extra
    overrides = "".join(
        f'<Override PartName="/xl/worksheets/sheet{i + 1}.xml" ContentType="{CT_WS}"/>'
        for i in range(n)
    )
    parts = {
        "[Content_Types].xml": (
            f'{DECL}<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
            '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.'
            'relationships+xml"/><Default Extension="xml" ContentType="application/xml"/>'
            '<Override PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-'
            'officedocument.spreadsheetml.sheet.main+xml"/>'
            f"{overrides}{ct_extra}</Types>"
        ),
        "_rels/.rels": (
            f'{DECL}<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/'
            f'relationships"><Relationship Id="rId1" Type="{R}/officeDocument" '
            'Target="xl/workbook.xml"/></Relationships>'
        ),
        "xl/workbook.xml": (
            f'{DECL}<workbook xmlns="{M}" xmlns:r="{R}">{views}<sheets>{sheet_els}</sheets>'
            f"{names}{wb_tail}</workbook>"
        ),
        "xl/_rels/workbook.xml.rels": (
            f'{DECL}<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/'
            f'relationships">{rels}</Relationships>'
        ),
        "xl/styles.xml": STYLES,
    }
    for i in range(n):
        parts[f"xl/worksheets/sheet{i + 1}.xml"] = (
            f'{DECL}<worksheet xmlns="{M}"><sheetData/></worksheet>'
        )
    parts.update(extra or {})
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name, text in parts.items():
            z.writestr(name, text)
    return path


def _rendered(path: Path, titles: list[str]) -> Path:
    wb = xlsxwriter.Workbook(str(path))
    bold = wb.add_format({"bold": True})
    for t in titles:
        ws = wb.add_worksheet(t)
        ws.write_string(0, 0, "estimate", bold)
        ws.write_formula(1, 0, "=A1", None, 0)
    wb.close()
    return path


def _read(path: Path, name: str) -> bytes:
    with zipfile.ZipFile(path) as z:
        return z.read(name)


def test_public_list() -> None:
    """The book package exposes an explicit public list."""
    assert set(book.__all__) == {"DefinedName", "Package", "SheetEntry", "open_package"}


def test_style_remap_reuses_and_appends(tmp_path: Path) -> None:
    """Formats equal to the user's are reused (custom code → the user's id); others appended."""
    user = STYLES.replace(
        '<fonts count="1">', '<numFmts count="1"><numFmt numFmtId="170" formatCode="0.000"/>'
        '</numFmts><fonts count="1">',
    ).encode()  # fmt: skip
    wb = xlsxwriter.Workbook(str(tmp_path / "r.xlsx"))
    ws = wb.add_worksheet("s")
    ws.write(0, 0, 1, wb.add_format({"num_format": "0.000"}))
    ws.write(1, 0, 1, wb.add_format({"num_format": "0.0000", "bold": True}))
    ws.conditional_format("A1:A2", {"type": "cell", "criteria": ">", "value": 0,
                                    "format": wb.add_format({"italic": True})})  # fmt: skip
    wb.close()
    rendered = _read(tmp_path / "r.xlsx", "xl/styles.xml")
    merged, smap = merge_styles(user, rendered)
    root = etree.fromstring(merged, _PARSER)
    fmts = {e.get("formatCode"): e.get("numFmtId") for e in root.iter(f"{{{M}}}numFmt")}
    assert fmts == {"0.000": "170", "0.0000": "171"}
    xfs = root.find(f"{{{M}}}cellXfs")
    assert xfs.get("count") == str(len(xfs)) == "3"
    assert xfs[smap.xf[1]].get("numFmtId") == "170" and xfs[smap.xf[2]].get("numFmtId") == "171"
    assert root.find(f"{{{M}}}dxfs").get("count") == "1" and smap.dxf == {0: 0}
    assert smap.xf[0] == 0
    again, smap2 = merge_styles(merged, rendered)
    assert again == merged and smap2.xf == smap.xf and smap2.added == 0


def test_style_remap_keeps_prefix() -> None:
    """Entries appended to a prefixed styles part use the user's prefix and stay parseable."""
    user = (
        STYLES.replace(f'<styleSheet xmlns="{M}">', f'<x:styleSheet xmlns:x="{M}">')
        .replace("</styleSheet>", "</x:styleSheet>")
        .replace("<", "<x:").replace("<x:/", "</x:").replace("<x:?", "<?").replace("</x:x:", "</x:")
        .replace("<x:x:", "<x:")
    )  # fmt: skip
    etree.fromstring(user.encode(), _PARSER)
    wb_styles = (
        f'<styleSheet xmlns="{M}"><fonts count="2"><font><sz val="10"/><name val="Arial"/></font>'
        '<font><b/></font></fonts><fills count="1"><fill><patternFill patternType="none"/></fill>'
        '</fills><borders count="1"><border/></borders><cellXfs count="2"><xf numFmtId="0" '
        'fontId="0" fillId="0" borderId="0" xfId="0"/><xf numFmtId="0" fontId="1" fillId="0" '
        'borderId="0" xfId="0"/></cellXfs></styleSheet>'
    )
    merged, smap = merge_styles(user.encode(), wb_styles.encode())
    root = etree.fromstring(merged, _PARSER)
    assert len(root.find(f"{{{M}}}fonts")) == 2 and smap.xf[1] == 1
    assert b"<x:font><x:b/></x:font>" in merged


def test_shared_strings_become_inline() -> None:
    """Shared-string cells turn into inline strings, keeping rich runs and xml:space."""
    sst = (
        f'<sst xmlns="{M}" count="3" uniqueCount="3"><si><t>plain &amp; simple</t></si>'
        '<si><t xml:space="preserve"> padded </t></si><si><r><t>a</t></r><r><rPr><b/></rPr>'
        '<t xml:space="preserve"> bold</t></r></si><si/></sst>'
    ).encode()
    strings = shared_strings(sst)
    assert len(strings) == 4
    sheet = (
        f'<worksheet xmlns="{M}"><sheetViews><sheetView tabSelected="1" workbookViewId="0"/>'
        '</sheetViews><cols><col min="1" max="1" style="2"/></cols><sheetData>'
        '<row r="1" s="2" customFormat="1"><c r="A1" s="1" t="s"><v>0</v></c>'
        '<c r="B1" t="s"><v>1</v></c><c r="C1" t="s"><v>2</v></c><c r="D1" t="s"><v>3</v></c>'
        '<c r="E1" s="2"><v>1.5</v></c><c r="F1" t="str"><f>"x"</f><v>x</v></c></row>'
        '</sheetData><conditionalFormatting sqref="A1"><cfRule type="cellIs" dxfId="0" '
        'priority="1" operator="equal"><formula>1</formula></cfRule></conditionalFormatting>'
        "</worksheet>"
    ).encode()
    out = convert_sheet(sheet, strings, StyleMap(xf={0: 0, 1: 5, 2: 7}, dxf={0: 3}))
    root = etree.fromstring(out, _PARSER)
    cells = {c.get("r"): c for c in root.iter(f"{{{M}}}c")}
    assert all(c.get("t") != "s" for c in cells.values())
    assert cells["A1"].get("t") == "inlineStr" and cells["A1"].get("s") == "5"
    assert "".join(cells["A1"].itertext()) == "plain & simple"
    t = cells["B1"].find(f"{{{M}}}is/{{{M}}}t")
    assert t.text == " padded " and t.get("{http://www.w3.org/XML/1998/namespace}space")
    runs = cells["C1"].findall(f"{{{M}}}is/{{{M}}}r")
    assert [r.find(f"{{{M}}}t").text for r in runs] == ["a", " bold"]
    assert runs[1].find(f"{{{M}}}rPr/{{{M}}}b") is not None
    assert cells["D1"].find(f"{{{M}}}is/{{{M}}}t") is not None
    assert cells["E1"].get("s") == "7" and cells["F1"].get("t") == "str"
    assert root.find(f".//{{{M}}}row").get("s") == "7"
    assert root.find(f".//{{{M}}}col").get("style") == "7"
    assert root.find(f".//{{{M}}}cfRule").get("dxfId") == "3"
    assert root.find(f".//{{{M}}}sheetView").get("tabSelected") is None


def test_part_numbers_above_dangling_and_case_variants(tmp_path: Path) -> None:
    """New sheet parts go above every number in use: entries, overrides, targets, any case."""
    assert next_number(["xl/worksheets/Sheet7.XML", "xl/chartsheets/sheet9.xml"], "sheet") == 10
    src = _package(
        tmp_path / "u.xlsx", ["Data"],
        extra={"xl/worksheets/SHEET4.xml": f'<worksheet xmlns="{M}"/>'},
        ct_extra=f'<Override PartName="/xl/worksheets/sheet12.xml" ContentType="{CT_WS}"/>',
        wb_rels_extra=f'<Relationship Id="rId9" Type="{R}/x" Target="worksheets/sheet15.xml"/>',
    )  # fmt: skip
    rendered = _rendered(tmp_path / "r.xlsx", ["sf a coef"])
    out = tmp_path / "o.xlsx"
    graft(open_package(src), rendered, [], out)
    assert part_changes(src, out) == (set(), {"xl/worksheets/sheet16.xml"})
    assert open_package(out).sheet("sf a coef").part == "xl/worksheets/sheet16.xml"


def test_refuses_package_saved_again_since_it_was_read(tmp_path: Path) -> None:
    """A book saved again after it was read (its workbook part changed) is refused, untouched."""
    src = _package(tmp_path / "u.xlsx", ["A"])
    pkg = open_package(src)
    _package(src, ["A", "B"])
    before = src.read_bytes()
    out = tmp_path / "o.xlsx"
    with pytest.raises(PackageError, match=r"u\.xlsx.*saved again"):
        graft(pkg, _rendered(tmp_path / "r.xlsx", ["sf a coef"]), [], out)
    assert src.read_bytes() == before and not out.exists()


def test_local_sheet_ids_shift_when_owned_sheet_moved(tmp_path: Path) -> None:
    """An owned sheet the user moved to the middle is removed; later ids and tabs shift down."""
    names = (
        '<definedNames><definedName name="_sheetfit_owned" localSheetId="1" hidden="1">'
        '\'sf a coef\'!$A$1</definedName><definedName name="b_local" localSheetId="2">'
        'B!$A$1</definedName><definedName name="c_local" localSheetId="3">C!$A$1</definedName>'
        "<definedName name=\"sf_a_coef\">'sf a coef'!$A$2</definedName>"
        '<definedName name="sf_a_y">B!$A$1:$A$3</definedName></definedNames>'
    )
    views = '<bookViews><workbookView activeTab="3" firstSheet="2"/></bookViews>'
    src = _package(
        tmp_path / "u.xlsx", ["A", "sf a coef", "B", "C"], names=names, views=views,
        wb_tail='<calcPr calcId="1"/>',
    )  # fmt: skip
    out = tmp_path / "o.xlsx"
    new_names = [OutputName("sf_a_coef", "'sf a coef'!$A$2")]
    graft(open_package(src), _rendered(tmp_path / "r.xlsx", ["sf a coef"]), new_names, out)
    assert sheet_changes(src, out)[0] == ["sf a coef"]
    pkg = open_package(out)
    assert [s.name for s in pkg.sheets] == ["A", "B", "C", "sf a coef"]
    assert pkg.sheet("sf a coef").sheet_id == 5  # highest remaining (4) + 1
    got = [(d.name, d.local_sheet_id) for d in pkg.defined_names]
    assert got == [("b_local", 1), ("c_local", 2), ("sf_a_y", None),
                   ("_sheetfit_owned", 3), ("sf_a_coef", None)]  # fmt: skip
    view = etree.fromstring(_read(out, "xl/workbook.xml"), _PARSER).find(f".//{{{M}}}workbookView")
    assert (view.get("activeTab"), view.get("firstSheet")) == ("2", "1")


def test_calc_chain_filter() -> None:
    """calcChain drops the cells of removed sheet ids, following inherited ids; None if empty."""
    chain = (
        f'<calcChain xmlns="{M}"><c r="A1" i="1"/><c r="A2"/><c r="B1" i="3"/><c r="B2"/>'
        '<c r="C1" i="2" l="1"/></calcChain>'
    ).encode()
    kept = filter_calc_chain(chain, {3})
    assert kept is not None
    refs = [c.get("r") for c in etree.fromstring(kept, _PARSER)]
    assert refs == ["A1", "A2", "C1"]
    assert filter_calc_chain(chain, {1, 2, 3}) is None
    assert filter_calc_chain(chain, {9}) == chain


def test_calc_chain_of_owned_sheets_only_is_deleted(tmp_path: Path) -> None:
    """A calcChain left empty by the removal goes with its rel and override."""
    ct_calc = "application/vnd.openxmlformats-officedocument.spreadsheetml.calcChain+xml"
    src = _package(
        tmp_path / "u.xlsx", ["A", "sf a coef"],
        names='<definedNames><definedName name="_sheetfit_owned" localSheetId="1" hidden="1">'
        "'sf a coef'!$A$1</definedName></definedNames>",
        extra={"xl/calcChain.xml": f'<calcChain xmlns="{M}"><c r="A2" i="2"/></calcChain>'},
        wb_rels_extra=f'<Relationship Id="rId7" Type="{R}/calcChain" Target="calcChain.xml"/>',
        ct_extra=f'<Override PartName="/xl/calcChain.xml" ContentType="{ct_calc}"/>',
    )  # fmt: skip
    out = tmp_path / "o.xlsx"
    graft(open_package(src), _rendered(tmp_path / "r.xlsx", ["sf a coef"]), [], out)
    assert "xl/calcChain.xml" in part_changes(src, out)[0]
    with zipfile.ZipFile(out) as z:
        assert "xl/calcChain.xml" not in z.namelist()
        assert b"calcChain" not in z.read("xl/_rels/workbook.xml.rels")
        assert b"calcChain" not in z.read("[Content_Types].xml")


def test_app_titles_in_localised_group() -> None:
    """Titles go at the end of the worksheet group found by sheet names, whatever its label."""
    vt = "http://schemas.openxmlformats.org/officeDocument/2006/docPropsVTypes"
    app = (
        f'<Properties xmlns="x" xmlns:vt="{vt}"><HeadingPairs><vt:vector size="4" '
        'baseType="variant"><vt:variant><vt:lpstr>Arbeitsblätter</vt:lpstr></vt:variant>'
        "<vt:variant><vt:i4>3</vt:i4></vt:variant><vt:variant><vt:lpstr>Benannte Bereiche"
        "</vt:lpstr></vt:variant><vt:variant><vt:i4>1</vt:i4></vt:variant></vt:vector>"
        '</HeadingPairs><TitlesOfParts><vt:vector size="4" baseType="lpstr"><vt:lpstr>Daten'
        "</vt:lpstr><vt:lpstr>sf old coef</vt:lpstr><vt:lpstr>Mehr</vt:lpstr><vt:lpstr>"
        "Daten!Druckbereich</vt:lpstr></vt:vector></TitlesOfParts></Properties>"
    ).encode("utf-16")
    out = update_app(app, ["Daten", "sf old coef", "Mehr"], ["sf old coef"], ["sf a coef", "a&b"])
    assert out[:2] == b"\xff\xfe"
    root = etree.fromstring(out, _PARSER)
    titles = [e.text for e in root.iter(f"{{{vt}}}lpstr")]
    assert titles[-5:] == ["Daten", "Mehr", "sf a coef", "a&b", "Daten!Druckbereich"]
    assert [e.text for e in root.iter(f"{{{vt}}}i4")] == ["4", "1"]
    sizes = [e.get("size") for e in root.iter(f"{{{vt}}}vector")]
    assert sizes == ["4", "5"]


@pytest.mark.parametrize(
    ("tail", "before"),
    [
        ('<calcPr calcId="1"/>', "calcPr"),
        ('<externalReferences><externalReference r:id="rId8"/></externalReferences><calcPr/>',
         "calcPr"),
        ("", None),
    ],
)  # fmt: skip
def test_defined_names_inserted_in_schema_order(tmp_path: Path, tail: str, before: str | None):
    """A missing definedNames goes after sheets/externalReferences and before calcPr."""
    src = _package(tmp_path / "u.xlsx", ["Data"], wb_tail=tail)
    out = tmp_path / "o.xlsx"
    graft(open_package(src), _rendered(tmp_path / "r.xlsx", ["sf a coef"]), [], out)
    root = etree.fromstring(_read(out, "xl/workbook.xml"), _PARSER)
    kids = [etree.QName(e).localname for e in root]
    i = kids.index("definedNames")
    assert kids[i - 1] in ("sheets", "externalReferences")
    assert (kids[i + 1] if i + 1 < len(kids) else None) == before


def test_utf16_and_prefixed_workbook_stay_so(tmp_path: Path) -> None:
    """A UTF-16 workbook part with a prefixed namespace stays UTF-16 and keeps its prefix."""
    src = _package(tmp_path / "u.xlsx", ["Data"])
    text = _read(src, "xl/workbook.xml").decode()
    text = (
        text.replace('encoding="UTF-8"', 'encoding="UTF-16"')
        .replace(f'<workbook xmlns="{M}"', f'<x:workbook xmlns:x="{M}"')
        .replace("<sheets>", "<x:sheets>").replace("</sheets>", "</x:sheets>")
        .replace("<sheet ", "<x:sheet ").replace("</workbook>", "</x:workbook>")
    )  # fmt: skip
    fixed = tmp_path / "u16.xlsx"
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(fixed, "w") as zout:
        for info in zin.infolist():
            data = zin.read(info)
            zout.writestr(
                info, text.encode("utf-16") if info.filename == "xl/workbook.xml" else data
            )
    out = tmp_path / "o.xlsx"
    graft(open_package(fixed), _rendered(tmp_path / "r.xlsx", ["sf a coef"]), [], out)
    data = _read(out, "xl/workbook.xml")
    assert data[:2] == b"\xff\xfe"
    new = data.decode("utf-16")
    assert text.split("</x:sheets>")[0] in new
    assert '<x:sheet name="sf a coef" sheetId="2" r:id="rId3"/>' in new
    assert '<x:definedName name="_sheetfit_owned"' in new
