"""Read-only view of a user's xlsx package: sheets, defined names, date system.

Nothing here writes. The user's XML is parsed with defusedxml (no entity
expansion, no network); parts may be UTF-8 or UTF-16 (docs/engine-facts.md,
P1).
"""

from __future__ import annotations

import posixpath
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from xml.etree.ElementTree import Element

from defusedxml import DefusedXmlException
from defusedxml import ElementTree as SafeET

from sheetfit.errors import Context, PackageError
from sheetfit.owned import MARKER_NAME
from sheetfit.reader.integrity import check_directory, read_member, scan_members

__all__ = [
    "NS_MAIN",
    "NS_PKG_REL",
    "NS_REL",
    "DefinedName",
    "Package",
    "Rel",
    "SheetEntry",
    "open_package",
    "parse_rels",
    "parse_xml",
    "rels_part_of",
    "resolve_target",
]

NS_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
NS_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
NS_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
_STRICT_MARK = "purl.oclc.org/ooxml"
_OFFICE_DOC = "/officeDocument"
_OLE_MAGIC = bytes.fromhex("D0CF11E0A1B11AE1")


@dataclass(frozen=True)
class SheetEntry:
    """One `<sheet>` of the workbook part: a worksheet, chartsheet, macro sheet or dialog sheet.

    ``kind`` is the last segment of its relationship type (``worksheet``,
    ``chartsheet``, ``xlMacrosheet``, ``dialogsheet``, ...), "" when the entry has no
    relationship (an empty or dangling ``r:id``); only a ``worksheet`` holds cells
    sheetfit reads.
    """

    name: str
    sheet_id: int
    rid: str
    part: str  # zip path, e.g. "xl/worksheets/sheet1.xml"
    state: str  # "visible" | "hidden" | "veryHidden"
    index: int  # 0-based position in <sheets> (what localSheetId refers to)
    kind: str = "worksheet"

    @property
    def is_worksheet(self) -> bool:
        """Whether this sheet holds cells sheetfit may read (a worksheet with a part)."""
        return self.kind == "worksheet" and bool(self.part)


@dataclass(frozen=True)
class DefinedName:
    """One `<definedName>`: its formula text (XML-unescaped) and scope."""

    name: str
    text: str
    local_sheet_id: int | None
    hidden: bool


@dataclass(frozen=True)
class Rel:
    """One relationship; ``part`` is the resolved zip path (None for external targets)."""

    rid: str
    type: str
    target: str
    external: bool
    part: str | None


@dataclass
class Package:
    """What sheetfit needs to know about a user's package, read once."""

    path: Path
    workbook_part: str
    sheets: list[SheetEntry]
    defined_names: list[DefinedName]
    date1904: bool
    #: zip entry names in archive order, as stored.
    entries: list[str] = field(default_factory=list, repr=False)
    #: (CRC-32, size) of each zip entry this view was parsed from, by entry name.
    parsed_from: dict[str, tuple[int, int]] = field(default_factory=dict, repr=False)

    def still_matches(self, zf: zipfile.ZipFile) -> bool:
        """Whether ``zf`` holds the parts this view was parsed from, unchanged (CRC and size).

        A writer that splices the package's bytes by this view checks it first: the
        file may have been saved again since it was opened.
        """
        for name, stamp in self.parsed_from.items():
            try:
                info = zf.getinfo(name)
            except KeyError:
                return False
            if (info.CRC, info.file_size) != stamp:
                return False
        return True

    def owned_sheets(self) -> list[SheetEntry]:
        """Sheets carrying the hidden sheet-scoped marker name (in workbook order)."""
        marked = {
            d.local_sheet_id
            for d in self.defined_names
            if d.name.lower() == MARKER_NAME.lower() and d.local_sheet_id is not None
        }
        return [s for s in self.sheets if s.index in marked]

    def sheet(self, name: str) -> SheetEntry:
        """The sheet called ``name`` (ignoring case); KeyError if there is none."""
        low = name.lower()
        for s in self.sheets:
            if s.name.lower() == low:
                return s
        raise KeyError(name)


def parse_xml(data: bytes, file: str, part: str) -> Element:
    """Parse one part of the user's package safely; PackageError if it is not XML.

    DTDs, entity declarations and external references are refused (the package
    format has no use for them), naming the part.
    """
    try:
        return SafeET.fromstring(data, forbid_dtd=True)
    except DefusedXmlException as exc:
        raise PackageError(
            f"part {part} carries a DTD or entity declaration, which sheetfit does not read",
            Context(file=file),
            hint="open and re-save the book in a spreadsheet application",
        ) from exc
    except Exception as exc:  # defusedxml raises several kinds; all mean "unreadable"
        raise PackageError(
            f"part {part} is not readable XML ({exc.__class__.__name__}: {exc})",
            Context(file=file),
        ) from exc


def rels_part_of(part: str) -> str:
    """Zip path of the relationships part that belongs to ``part`` ("" = the package)."""
    folder, base = posixpath.split(part)
    return posixpath.join(folder, "_rels", base + ".rels")


def resolve_target(source_part: str, target: str) -> str:
    """Zip path a rel target points to; absolute (``/xl/..``) or relative to the source."""
    target = target.split("#", 1)[0]
    if target.startswith("/"):
        return posixpath.normpath(target.lstrip("/"))
    folder = posixpath.dirname(source_part)
    return posixpath.normpath(posixpath.join(folder, target)).lstrip("/")


def parse_rels(data: bytes, source_part: str, file: str = "", rels_part: str = "") -> list[Rel]:
    """The relationships in a .rels part, with targets resolved against ``source_part``."""
    root = parse_xml(data, file, rels_part or rels_part_of(source_part))
    out = []
    for el in root:
        if not el.tag.endswith("}Relationship") and el.tag != "Relationship":
            continue
        target = el.get("Target", "")
        external = el.get("TargetMode", "") == "External"
        out.append(
            Rel(
                rid=el.get("Id", ""),
                type=el.get("Type", ""),
                target=target,
                external=external,
                part=None if external else resolve_target(source_part, target),
            )
        )
    return out


class _Zip:
    """Case-insensitive access to zip entries (OPC part names ignore case)."""

    def __init__(self, zf: zipfile.ZipFile, file: str) -> None:
        self.zf = zf
        self.file = file
        self.names = [i.filename for i in zf.infolist()]
        self.lower = {n.lower(): n for n in self.names}

    def find(self, part: str) -> str | None:
        return self.lower.get(part.lower())

    def read(self, part: str) -> bytes:
        name = self.find(part)
        if name is None:
            raise PackageError(f"part {part} is missing", Context(file=self.file))
        return read_member(self.zf, name, self.file)


def _refuse_non_zip(path: Path, file: str) -> None:
    try:
        with path.open("rb") as fh:
            head = fh.read(8)
    except OSError as exc:
        raise PackageError(f"cannot open the file ({exc.strerror})", Context(file=file)) from exc
    if head.startswith(_OLE_MAGIC):
        raise PackageError(
            "this is an OLE compound file: an encrypted (password-protected) workbook "
            "or an old binary .xls",
            Context(file=file),
            hint="remove the password or save it as .xlsx",
        )
    if not zipfile.is_zipfile(path):
        raise PackageError(
            "not an xlsx package (not a zip archive)",
            Context(file=file),
            hint="save the workbook as .xlsx",
        )


def _find_workbook(z: _Zip) -> str:
    rels_name = z.find("_rels/.rels")
    if rels_name is None:
        raise PackageError(
            "no package relationships (_rels/.rels): not an xlsx package", Context(file=z.file)
        )
    rels = parse_rels(z.read(rels_name), "", z.file, "_rels/.rels")
    for rel in rels:
        if rel.type.endswith(_OFFICE_DOC) and _STRICT_MARK in rel.type:
            raise PackageError(
                "Strict Open XML workbooks are not supported",
                Context(file=z.file),
                hint="save it as a regular (transitional) Excel workbook .xlsx",
            )
    for rel in rels:
        if rel.type.endswith(_OFFICE_DOC) and rel.part is not None:
            found = z.find(rel.part)
            if found is None:
                break
            return found
    raise PackageError("the package has no workbook part", Context(file=z.file))


def _truthy(value: str | None) -> bool:
    return value is not None and value.strip().lower() in ("1", "true")


def open_package(path: str | Path) -> Package:
    """Read the sheets, defined names and date system of a user's xlsx package.

    Raises PackageError (naming the file) for a non-zip, an OLE file (encrypted
    workbook or .xls), a Strict OOXML package, a package without a workbook part,
    and for a package that fails the checks of :mod:`sheetfit.reader.integrity`
    (case-duplicate part names, sizes beyond the caps, a damaged member, a DTD, too
    much shared text), all before anything else is done with it.
    """
    path = Path(path)
    file = str(path)
    _refuse_non_zip(path, file)
    try:
        zf = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError) as exc:
        raise PackageError(f"not a readable zip archive ({exc})", Context(file=file)) from exc
    with zf:
        check_directory(zf, file)
        z = _Zip(zf, file)
        wb_part = _find_workbook(z)
        root = parse_xml(z.read(wb_part), file, wb_part)
        ns = root.tag[1:].split("}", 1)[0] if root.tag.startswith("{") else ""
        if _STRICT_MARK in ns:
            raise PackageError(
                "Strict Open XML workbooks are not supported",
                Context(file=file),
                hint="save it as a regular (transitional) Excel workbook .xlsx",
            )
        if ns != NS_MAIN:
            raise PackageError(f"workbook part {wb_part} is not SpreadsheetML", Context(file=file))
        rels_name = z.find(rels_part_of(wb_part))
        rels = {}
        if rels_name is not None:
            rels = {r.rid: r for r in parse_rels(z.read(rels_name), wb_part, file, rels_name)}
        sheets = _read_sheets(root, rels, z)
        names = _read_names(root)
        pr = root.find(f"{{{NS_MAIN}}}workbookPr")
        date1904 = pr is not None and _truthy(pr.get("date1904"))
        _scan(z, wb_part, rels, sheets)
        sources = [z.find("_rels/.rels"), wb_part, rels_name]
        return Package(
            path=path,
            workbook_part=wb_part,
            sheets=sheets,
            defined_names=names,
            date1904=date1904,
            entries=list(z.names),
            parsed_from={n: (zf.getinfo(n).CRC, zf.getinfo(n).file_size) for n in sources if n},
        )


_PARSED_TYPES = ("/styles", "/sharedStrings", "/calcChain")


def _scan(z: _Zip, wb_part: str, rels: dict[str, Rel], sheets: list[SheetEntry]) -> None:
    """Every member read once (integrity checks) before the package is used."""
    worksheets = {s.part for s in sheets if s.is_worksheet}
    linked = [r.part for r in rels.values() if r.part and r.type.endswith(_PARSED_TYPES)]
    parsed = {n for n in z.names if n.lower().endswith(".rels")}
    parsed |= {wb_part, "[Content_Types].xml", "docProps/app.xml", *worksheets, *linked}
    sst = next(
        (r.part for r in rels.values() if r.part and r.type.endswith("/sharedStrings")), None
    )
    scan_members(z.zf, z.file, parsed, worksheets, z.find(sst) if sst else None)


def _read_sheets(root: Element, rels: dict[str, Rel], z: _Zip) -> list[SheetEntry]:
    out: list[SheetEntry] = []
    holder = root.find(f"{{{NS_MAIN}}}sheets")
    if holder is None:
        return out
    for i, el in enumerate(holder.findall(f"{{{NS_MAIN}}}sheet")):
        rid = el.get(f"{{{NS_REL}}}id", "")
        rel = rels.get(rid) if rid else None
        part = ""
        kind = ""
        if rel is not None and rel.part is not None:
            part = z.find(rel.part) or rel.part
            kind = rel.type.rsplit("/", 1)[-1]
        try:
            sheet_id = int(el.get("sheetId", "0"))
        except ValueError:
            sheet_id = 0
        out.append(
            SheetEntry(
                name=el.get("name", ""),
                sheet_id=sheet_id,
                rid=rid,
                part=part,
                state=el.get("state", "visible"),
                index=i,
                kind=kind,
            )
        )
    return out


def _read_names(root: Element) -> list[DefinedName]:
    holder = root.find(f"{{{NS_MAIN}}}definedNames")
    if holder is None:
        return []
    out = []
    for el in holder.findall(f"{{{NS_MAIN}}}definedName"):
        local = el.get("localSheetId")
        try:
            local_id = int(local) if local is not None else None
        except ValueError:
            local_id = None
        out.append(
            DefinedName(
                name=el.get("name", ""),
                text=el.text or "",
                local_sheet_id=local_id,
                hidden=_truthy(el.get("hidden")),
            )
        )
    return out
