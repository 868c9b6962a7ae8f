"""Reading a user's package: sheets, defined names, date system, and clear refusals."""

from __future__ import annotations

import zipfile
from pathlib import Path

import pytest
import xlsxwriter
from books import soffice_convert

from sheetfit.errors import PackageError
from sheetfit.reader import values as values_mod
from sheetfit.reader.package import DefinedName, open_package
from sheetfit.refresh import _values


def _soffice_xlsx(src: Path, outdir: Path) -> Path:
    """Re-save ``src`` with LibreOffice (private profile); skip or fail (CI) if it is missing."""
    return soffice_convert(src, outdir, "xlsx")


def _book(path: Path, date1904: bool = False) -> Path:
    wb = xlsxwriter.Workbook(str(path), {"date_1904": date1904})
    data = wb.add_worksheet("Data")
    for r in range(1, 40):
        data.write_number(r, 1, r * 2.5)
        data.write_number(r, 3, r)
    mine = wb.add_worksheet("My data")
    mine.write_number(0, 0, 1)
    chart = wb.add_chart({"type": "line"})
    chart.add_series({"values": "=Data!$B$2:$B$40"})
    cs = wb.add_chartsheet("Chart1")
    cs.set_chart(chart)
    hidden = wb.add_worksheet("Hide me")
    hidden.hide()
    wb.define_name("sf_demo_y", "=Data!$B$2:$B$40")
    wb.define_name("sf_demo_x", "='My data'!$B:$B,'My data'!$D:$D")
    wb.define_name("'My data'!local_one", "='My data'!$A$1")
    wb.close()
    return path


def _rewrite(src: Path, dst: Path, change: dict[str, bytes | None]) -> Path:
    """Copy a zip, replacing (bytes) or dropping (None) some entries."""
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            if info.filename in change:
                new = change[info.filename]
                if new is not None:
                    zout.writestr(info.filename, new)
            else:
                zout.writestr(info, zin.read(info))
    return dst


def test_sheets_names_and_scopes(tmp_path: Path) -> None:
    """Sheets (incl. a chartsheet and a hidden one) with parts, ids, states and indices; names."""
    pkg = open_package(_book(tmp_path / "b.xlsx"))
    assert pkg.workbook_part == "xl/workbook.xml"
    assert [s.name for s in pkg.sheets] == ["Data", "My data", "Chart1", "Hide me"]
    assert [s.index for s in pkg.sheets] == [0, 1, 2, 3]
    assert pkg.sheet("my DATA").part == "xl/worksheets/sheet2.xml"
    assert pkg.sheet("chart1").part == "xl/chartsheets/sheet1.xml"
    assert pkg.sheet("Hide me").state == "hidden"
    assert len({s.sheet_id for s in pkg.sheets}) == 4
    names = {d.name: d for d in pkg.defined_names}
    assert names["sf_demo_y"] == DefinedName("sf_demo_y", "Data!$B$2:$B$40", None, False)
    assert names["sf_demo_x"].text == "'My data'!$B:$B,'My data'!$D:$D"
    assert names["local_one"].local_sheet_id == 1
    assert pkg.date1904 is False
    assert pkg.owned_sheets() == []
    with pytest.raises(KeyError):
        pkg.sheet("nope")


def test_date1904(tmp_path: Path) -> None:
    """The 1904 date system is reported."""
    assert open_package(_book(tmp_path / "b.xlsx", date1904=True)).date1904 is True


def test_libreoffice_resaved(tmp_path: Path) -> None:
    """A book re-saved by LibreOffice reads the same sheets and names."""
    saved = _soffice_xlsx(_book(tmp_path / "b.xlsx"), tmp_path / "lo")
    pkg = open_package(saved)
    assert [s.name for s in pkg.sheets] == ["Data", "My data", "Chart1", "Hide me"]
    with zipfile.ZipFile(saved) as z:
        assert {s.part for s in pkg.sheets} <= set(z.namelist())  # LO turns chartsheets into sheets
    names = {(d.name, d.local_sheet_id): d for d in pkg.defined_names}
    assert names[("sf_demo_y", None)].text == "Data!$B$2:$B$40"
    assert ("local_one", 1) in names
    assert "'My data'!$B:$B" in names[("sf_demo_x", None)].text


def test_utf16_workbook_and_absolute_targets(tmp_path: Path) -> None:
    """A UTF-16 workbook part reached through an absolute target reads like the original."""
    src = _book(tmp_path / "b.xlsx")
    with zipfile.ZipFile(src) as z:
        wb = z.read("xl/workbook.xml").decode("utf-8")
        rels = z.read("_rels/.rels").decode("utf-8")
    wb16 = wb.replace('encoding="UTF-8"', 'encoding="UTF-16"').encode("utf-16")
    rels = rels.replace('Target="xl/workbook.xml"', 'Target="/xl/workbook.xml"')
    dst = _rewrite(
        src, tmp_path / "u16.xlsx", {"xl/workbook.xml": wb16, "_rels/.rels": rels.encode()}
    )
    assert [s.name for s in open_package(dst).sheets] == [s.name for s in open_package(src).sheets]
    assert {d.name for d in open_package(dst).defined_names} == {
        "sf_demo_y", "sf_demo_x", "local_one"
    }  # fmt: skip


def test_refuses_non_zip(tmp_path: Path) -> None:
    """A text file is refused, naming the file."""
    p = tmp_path / "notes.xlsx"
    p.write_text("hello")
    with pytest.raises(PackageError, match=r"notes\.xlsx.*not an xlsx package"):
        open_package(p)


def test_refuses_ole(tmp_path: Path) -> None:
    """An OLE compound file (encrypted workbook or .xls) is refused."""
    p = tmp_path / "old.xls"
    p.write_bytes(bytes.fromhex("D0CF11E0A1B11AE1") + b"\0" * 504)
    with pytest.raises(PackageError, match=r"old\.xls.*encrypted.*\.xls"):
        open_package(p)


def test_refuses_strict(tmp_path: Path) -> None:
    """A Strict OOXML package (namespaces under purl.oclc.org) is refused clearly."""
    src = _book(tmp_path / "b.xlsx")
    with zipfile.ZipFile(src) as z:
        wb = z.read("xl/workbook.xml").decode()
        rels = z.read("_rels/.rels").decode()
    wb = wb.replace(
        "http://schemas.openxmlformats.org/spreadsheetml/2006/main",
        "http://purl.oclc.org/ooxml/spreadsheetml/main",
    )
    rels = rels.replace(
        "http://schemas.openxmlformats.org/officeDocument/2006/relationships/officeDocument",
        "http://purl.oclc.org/ooxml/officeDocument/relationships/officeDocument",
    )
    dst = _rewrite(src, tmp_path / "strict.xlsx", {"xl/workbook.xml": wb.encode()})
    with pytest.raises(PackageError, match="Strict Open XML"):
        open_package(dst)
    dst2 = _rewrite(dst, tmp_path / "strict2.xlsx", {"_rels/.rels": rels.encode()})
    with pytest.raises(PackageError, match="Strict Open XML"):
        open_package(dst2)


def test_refuses_missing_workbook(tmp_path: Path) -> None:
    """A zip whose workbook part is missing is refused."""
    dst = _rewrite(_book(tmp_path / "b.xlsx"), tmp_path / "nowb.xlsx", {"xl/workbook.xml": None})
    with pytest.raises(PackageError, match=r"nowb\.xlsx.*no workbook part"):
        open_package(dst)
    dst2 = _rewrite(dst, tmp_path / "norels.xlsx", {"_rels/.rels": None})
    with pytest.raises(PackageError, match="no package relationships"):
        open_package(dst2)


def test_values_come_from_one_open_zip_closed_on_leaving(tmp_path: Path, monkeypatch) -> None:
    """The values reader opens the zip once for all its sheets and closes it on leaving;
    sheets read before stay readable, a sheet not read yet is then refused."""
    p = _book(tmp_path / "b.xlsx")
    pkg = open_package(p)
    opened: list[zipfile.ZipFile] = []
    real = zipfile.ZipFile

    def counting(*args, **kwargs) -> zipfile.ZipFile:
        opened.append(real(*args, **kwargs))
        return opened[-1]

    monkeypatch.setattr(values_mod.zipfile, "ZipFile", counting)
    with _values(pkg, p) as values:
        assert values.sheet("Data").get(2, 2).number == 2.5
        assert values.sheet("my data").get(1, 1).number == 1.0
    assert len(opened) == 1 and opened[0].fp is None
    assert values.sheet("Data").get(3, 2).number == 5.0
    with pytest.raises(ValueError, match="closed"):
        values.sheet("Hide me")
