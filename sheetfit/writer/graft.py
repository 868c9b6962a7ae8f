"""Graft rendered owned sheets into a user's package, replacing those of the last run.

The write-back of a refresh: previously owned sheets (found by their marker
name) are removed with everything only they use, then the rendered sheets are
added at the end of the book. Shared parts are edited by splicing text so they
only gain or lose owned entries; every other zip entry keeps its bytes. The
result replaces the target atomically (docs/engine-facts.md,
section P). The user's package comes in as the reader's view (``Package``) that
the refresh already opened; its zip is read for part bytes.
"""

from __future__ import annotations

import contextlib
import posixpath
import queue
import re
import threading
import zipfile
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import IO

from sheetfit.errors import Context, DeclarationError, PackageError
from sheetfit.owned import is_ours
from sheetfit.reader.package import Package, SheetEntry, open_package, parse_rels, rels_part_of
from sheetfit.sheets.columns import Run, Span
from sheetfit.writer._bulk import stream_sheet
from sheetfit.writer._graft_app import update_app
from sheetfit.writer._graft_parts import Attached, attached_of, place, taken_names
from sheetfit.writer._graft_remove import (
    build_graph,
    filter_calc_chain,
    parts_to_remove,
    relative_target,
)
from sheetfit.writer._graft_sheet import convert_sheet, shared_strings
from sheetfit.writer._graft_workbook import (
    edit_content_types,
    edit_rels,
    edit_workbook,
    next_number,
    next_rid,
)
from sheetfit.writer._styles import StyleMap, bare_styles, merge_styles, user_style_indices
from sheetfit.writer.render import Rendition
from sheetfit.writer.target import Destination, plain, replacing

__all__ = ["OutputName", "graft"]

_CT_PART = "[Content_Types].xml"
_APP_PART = "docProps/app.xml"
_T_WORKSHEET = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"
_R_WORKSHEET = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/worksheet"
_R_STYLES = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/styles"
_T_STYLES = "application/vnd.openxmlformats-officedocument.spreadsheetml.styles+xml"
_FIXED_TIME = (1980, 1, 1, 0, 0, 0)


@dataclass(frozen=True)
class OutputName:
    """A workbook-scoped name sheetfit writes, e.g. sf_demo_coef -> 'sf demo coef'!$B$2:$B$4."""

    name: str
    text: str


@dataclass(frozen=True)
class _Streamed:
    """A sheet part written at the last moment: the converted part with its runs and spans."""

    xml: bytes
    runs: list[Run]
    styles: dict[str, int | None]
    spans: list[Span]

    def chunks(self) -> Iterator[bytes]:
        return stream_sheet(self.xml, self.runs, self.styles, self.spans)


Entry = bytes | _Streamed


@dataclass(frozen=True)
class _Rendered:
    title: str
    xml: bytes
    attached: Attached | None = None  # drawings, charts … the sheet brings along


@dataclass(frozen=True)
class _RenderedBook:
    pkg: Package
    sheets: list[_Rendered]
    styles: bytes | None
    strings: list[str]
    sheet_type: str
    sheet_names: list[tuple[int, str, str]]  # print titles: (sheet position, name, text)
    base: str  # the rendered workbook's folder


def _read_rendered(path: Path) -> _RenderedBook:
    """The rendered book's sheets (in order), styles part, shared strings and sheet type."""
    rp = open_package(path)
    with zipfile.ZipFile(path) as z:
        lower = {n.lower(): n for n in z.namelist()}

        def read(part: str | None) -> bytes | None:
            name = lower.get(part.lower()) if part else None
            return z.read(name) if name else None

        rels_data = read(rels_part_of(rp.workbook_part))
        rels = parse_rels(rels_data, rp.workbook_part) if rels_data else []
        sst = read(next((r.part for r in rels if r.type.endswith("/sharedStrings")), None))
        styles = read(next((r.part for r in rels if r.type.endswith("/styles")), None))
        ct = (read(_CT_PART) or b"").decode("utf-8")
        sheets = []
        for s in rp.sheets:
            if "/worksheets/" not in s.part.lower():
                raise ValueError(f"rendered sheet {s.name!r} is not a worksheet")
            # a sheet with charts brings its drawing and chart parts (_graft_parts)
            sheets.append(_Rendered(s.name, read(s.part) or b"", attached_of(s.part, read, ct)))
    m = re.search(r'PartName="/[^"]*worksheets/[^"]+"\s+ContentType="([^"]+)"', ct)
    if sheets and styles is None:
        raise ValueError("rendered book has no styles part")
    # names the renderer scoped to its sheets: only print titles and print areas
    scoped = [(d.local_sheet_id, d.name, d.text) for d in rp.defined_names
              if d.local_sheet_id is not None
              and d.name.lower() in ("_xlnm.print_titles", "_xlnm.print_area")]
    return _RenderedBook(
        rp, sheets, styles, shared_strings(sst) if sst else [], m.group(1) if m else _T_WORKSHEET,
        scoped,
        posixpath.dirname(rp.workbook_part),
    )


def _check_collisions(
    pkg: Package,
    owned: Sequence[SheetEntry],
    titles: Sequence[str],
    names: Sequence[OutputName],
    file: str,
) -> None:
    removed = {s.index for s in owned}
    wanted = {t.lower() for t in titles}
    for s in pkg.sheets:
        if s.index not in removed and s.name.lower() in wanted:
            raise DeclarationError(
                f"a sheet of yours is called '{s.name}', which sheetfit needs for its results",
                Context(file=file, sheet=s.name),
                hint="rename your sheet or the model",
            )
    out = {n.name.lower() for n in names}
    owned_titles = [s.name for s in owned]
    for d in pkg.defined_names:
        if (
            d.local_sheet_id is None
            and d.name.lower() in out
            and not is_ours(d, owned_titles, removed)
        ):
            raise DeclarationError(
                f"a name of yours, {d.name}, is one sheetfit needs for its results",
                Context(file=file, name=d.name),
                hint="rename your name or the model",
            )


@contextlib.contextmanager
def _editing(part: str, file: str) -> Iterator[None]:
    """Refuse a shared part the graft cannot edit safely (malformed, mis-encoded text)."""
    try:
        yield
    except (ValueError, LookupError) as exc:  # UnicodeDecodeError, KeyError, IndexError too
        reason = str(exc).splitlines()[0][:80] if str(exc) else type(exc).__name__
        raise PackageError(
            f"part {part} is malformed and cannot be edited safely ({reason})",
            Context(file=file),
            hint="open and re-save the book in a spreadsheet application",
        ) from exc


def graft(
    pkg: Package,
    rendered: str | Path | Rendition,
    names: Sequence[OutputName],
    target: str | Path | Destination,
) -> None:
    """Replace the owned sheets of the package ``pkg`` by those of ``rendered``.

    ``pkg`` is the user's package as :func:`~sheetfit.reader.package.open_package`
    read it; its file (``pkg.path``) is read for part bytes and the result is
    written to ``target`` atomically (``target`` may be ``pkg.path``; a path is
    taken as it is, a ``Destination`` comes checked from ``writer.target``).

    Raises DeclarationError when a sheet or workbook-scoped name of the user's
    takes a title or output name sheetfit needs, PackageError when the source
    cannot be read or was saved again since ``pkg`` was read, OutputError when
    the target cannot be written; on any error neither file is changed.
    """
    rendition = rendered if isinstance(rendered, Rendition) else Rendition(Path(rendered))
    source, rendered = pkg.path, rendition.path
    dest = target if isinstance(target, Destination) else plain(target)
    file = str(source)
    rb = _read_rendered(rendered)
    if rb.pkg.date1904 != pkg.date1904:
        raise ValueError("rendered book uses a different date system from the user's book")
    owned = pkg.owned_sheets()
    titles = [r.title for r in rb.sheets]
    _check_collisions(pkg, owned, titles, names, file)

    try:
        zs = zipfile.ZipFile(source)
    except (zipfile.BadZipFile, OSError) as exc:
        raise PackageError(f"not a readable zip archive ({exc})", Context(file=file)) from exc
    with zs:
        if not pkg.still_matches(zs):
            raise PackageError(
                "the workbook was saved again while sheetfit was refreshing it",
                Context(file=file),
                hint="refresh again",
            )
        infos = zs.infolist()
        lower = {i.filename.lower(): i.filename for i in infos}

        def read(part: str | None) -> bytes | None:
            name = lower.get(part.lower()) if part else None
            return zs.read(name) if name else None

        rels_entries = {
            i.filename: zs.read(i) for i in infos if i.filename.lower().endswith(".rels")
        }
        graph = build_graph(rels_entries, file)
        existing = set(lower)
        gone = parts_to_remove(graph, [s.part for s in owned if s.part], existing)
        wb_part = pkg.workbook_part
        wb_rels = graph.out.get(wb_part.lower(), [])
        drop_rids = {s.rid for s in owned}
        edits: dict[str, bytes] = {}

        calc = next((r for r in wb_rels if r.type.endswith("/calcChain") and r.part), None)
        if owned and calc and calc.part and calc.part in existing and calc.part not in gone:
            data = read(calc.part)
            if data is None:  # calc.part is among the entries, so read() finds it
                raise RuntimeError(f"calcChain part {calc.part} listed but not readable")
            with _editing(calc.part, file):
                left = filter_calc_chain(data, {s.sheet_id for s in owned})
            if left is None:
                gone.add(calc.part)
                calc_rels = rels_part_of(calc.part).lower()
                if calc_rels in existing:
                    gone.add(calc_rels)
                drop_rids.add(calc.rid)
            elif left is not data:
                edits[lower[calc.part]] = left

        ct_data = read(_CT_PART)
        if ct_data is None:
            raise PackageError("the package has no [Content_Types].xml", Context(file=file))
        # New part numbers go above every number in use: entries, overrides, rel targets.
        in_use = {n for n in existing if n not in gone}
        for src, rels in graph.out.items():
            if src in gone:
                continue
            dropped = drop_rids if src == wb_part.lower() else set()
            in_use.update(r.part for r in rels if r.part and r.rid not in dropped)
        base = posixpath.join(posixpath.dirname(wb_part), "worksheets")
        with _editing(_CT_PART, file):
            _, listed = edit_content_types(ct_data, gone, [], rb.sheet_type)
        taken = taken_names(in_use | listed)
        first = next_number(taken, "sheet")
        parts = [posixpath.join(base, f"sheet{first + j}.xml") for j in range(len(rb.sheets))]
        taken.update(p.lower() for p in parts)
        attached_entries, attached_types = place(
            [(p, r.attached) for p, r in zip(parts, rb.sheets, strict=True) if r.attached],
            taken, rb.base, posixpath.dirname(wb_part))

        smap = StyleMap()
        sty = next((r for r in wb_rels if r.type.endswith("/styles") and r.part), None)
        sty_data = read(sty.part if sty else None)
        added_styles: str | None = None  # a styles part the book lacks, added by the graft
        if rb.sheets:
            if rb.styles is None:
                raise ValueError("rendered book has no styles part")
            if sty is not None and sty.part is not None and sty_data is not None:
                with _editing(lower[sty.part], file):
                    new_styles, smap = merge_styles(sty_data, rb.styles, file, lower[sty.part])
                if new_styles is not sty_data:
                    edits[lower[sty.part]] = new_styles
            else:
                # The book has no styles part (or its relationship names a missing one):
                # add the rendered one, keeping the indices the user's cells use plain.
                added_styles = sty.part if sty is not None and sty.part else posixpath.join(
                    posixpath.dirname(wb_part), "styles.xml")
                if added_styles.lower() in existing:
                    raise PackageError("the styles part is missing", Context(file=file),
                                       hint="open and re-save the book in a spreadsheet application")
                user_sheets = (read(s.part) or b"" for s in pkg.sheets if s.is_worksheet)
                base_styles = bare_styles(rb.styles, *user_style_indices(user_sheets))
                sty_data, smap = merge_styles(base_styles, rb.styles)
        final = {k: (None if v is None else smap.xf.get(v, 0) or None)
                 for k, v in rendition.styles.items()}
        new_entries: list[tuple[str, Entry]] = []
        for p, r in zip(parts, rb.sheets, strict=True):
            xml = convert_sheet(r.xml, rb.strings, smap)
            runs = rendition.runs.get(r.title)
            spans = rendition.spans.get(r.title, [])
            new_entries.append((p, xml if not (runs or spans)
                                else _Streamed(xml, runs or [], final, spans)))
        new_entries += attached_entries
        if added_styles is not None and sty_data is not None:
            new_entries.append((added_styles, sty_data))

        wb_data = read(wb_part)
        wb_rels_data = read(rels_part_of(wb_part))
        if wb_data is None or wb_rels_data is None:
            missing = wb_part if wb_data is None else rels_part_of(wb_part)
            raise PackageError(f"part {missing} is missing", Context(file=file))
        start = next_rid([r.rid for r in wb_rels if r.rid not in drop_rids])
        rids = [f"rId{start + j}" for j in range(len(rb.sheets))]
        with _editing(wb_part, file):
            edits[wb_part] = edit_workbook(wb_data, pkg, owned, titles, rids, names,
                                             rb.sheet_names)
        with _editing(rels_part_of(wb_part), file):
            new_rels = edit_rels(
                wb_rels_data,
                drop_rids,
                [relative_target(wb_part, p) for p in parts],
                rids,
                _R_WORKSHEET,
            )
            if added_styles is not None and sty is None:
                new_rels = edit_rels(new_rels, set(), [relative_target(wb_part, added_styles)],
                                     [f"rId{start + len(rb.sheets)}"], _R_STYLES)
        with _editing(_CT_PART, file):
            new_ct, listed = edit_content_types(ct_data, gone, parts, rb.sheet_type)
            if added_styles is not None and added_styles.lower() not in listed:
                new_ct = edit_content_types(new_ct, set(), [added_styles], _T_STYLES)[0]
            for ctype, names_of_type in attached_types.items():
                new_ct = edit_content_types(new_ct, set(), names_of_type, ctype)[0]
        edits[lower[rels_part_of(wb_part).lower()]] = new_rels
        edits[lower[_CT_PART.lower()]] = new_ct
        app = read(_APP_PART)
        if app is not None:
            sheet_names = [s.name for s in pkg.sheets if s.kind in ("worksheet", "")]
            try:
                new_app = update_app(app, sheet_names, [s.name for s in owned], titles)
            except (ValueError, LookupError):
                # docProps/app.xml only lists titles for file browsers; a malformed one is
                # left exactly as it is rather than refusing the whole book over it.
                new_app = app
            if new_app is not app:
                edits[lower[_APP_PART.lower()]] = new_app
        edits = {k: v for k, v in edits.items() if v != read(k)}
        _write_atomic(zs, infos, gone, edits, new_entries, dest)


#: Deflate level of the parts sheetfit writes (docs/engine-facts.md, P15: level 1 writes
#: sheet XML several times faster than the default 6 for a few per cent more bytes).
COMPRESS_LEVEL = 1


def _copy_raw(src: zipfile.ZipFile, info: zipfile.ZipInfo, zout: zipfile.ZipFile) -> None:
    """Copy an entry's compressed bytes as they are: no inflating and deflating again, so
    the user's parts keep their bytes inside the archive as well as out of it."""
    fp = src.fp
    if fp is None:
        raise ValueError("source archive is closed")
    fp.seek(info.header_offset)
    head = fp.read(30)
    if head[:4] != b"PK\x03\x04":
        raise zipfile.BadZipFile(f"bad local header for {info.filename}")
    skip = int.from_bytes(head[26:28], "little") + int.from_bytes(head[28:30], "little")
    start = info.header_offset + 30 + skip
    zi = zipfile.ZipInfo(info.filename, info.date_time)
    zi.compress_type = info.compress_type
    zi.external_attr = info.external_attr
    zi.create_system = info.create_system
    zi.flag_bits = info.flag_bits & ~0x08  # sizes go in the local header: no descriptor
    zi.CRC, zi.compress_size, zi.file_size = info.CRC, info.compress_size, info.file_size
    out = zout.fp
    if out is None:
        raise ValueError("target archive is closed")
    zi.header_offset = out.tell()
    zip64 = info.file_size > zipfile.ZIP64_LIMIT or info.compress_size > zipfile.ZIP64_LIMIT
    out.write(zi.FileHeader(zip64))
    fp.seek(start)
    left = info.compress_size
    while left > 0:  # a megabyte at a time: a million-row data part is ~30 MB compressed
        block = fp.read(min(left, 1 << 20))
        if not block:
            raise zipfile.BadZipFile(f"{info.filename} is cut short")
        out.write(block)
        left -= len(block)
    zout.start_dir = out.tell()
    zout.filelist.append(zi)
    zout.NameToInfo[zi.filename] = zi


def _write_beside(part: IO[bytes], chunks: Iterator[bytes]) -> None:
    """Write ``chunks`` to ``part`` from a second thread, so that deflating one chunk
    (zlib lets go of the interpreter lock) runs beside building the next on another core.
    An error on either side stops both and is raised here."""
    todo: queue.Queue[bytes | None] = queue.Queue(maxsize=3)
    failed: list[BaseException] = []

    def consume() -> None:
        while (chunk := todo.get()) is not None:
            if not failed:
                try:
                    part.write(chunk)
                except BaseException as exc:  # noqa: BLE001 - handed to the producer
                    failed.append(exc)

    worker = threading.Thread(target=consume, name="sheetfit-deflate", daemon=True)
    worker.start()
    try:
        for chunk in chunks:
            if failed:
                break
            todo.put(chunk)
    finally:
        todo.put(None)
        worker.join()
    if failed:
        raise failed[0]


def _write_atomic(
    zs: zipfile.ZipFile,
    infos: list[zipfile.ZipInfo],
    gone: set[str],
    edits: dict[str, bytes],
    new_entries: list[tuple[str, Entry]],
    target: Destination,
) -> None:
    """Write the new package into a temporary file beside ``target`` that then replaces it
    (``writer/target.py``: permissions kept, backup if asked, OS errors as refusals).
    Untouched entries are copied compressed, as they are; sheet parts with column runs
    are streamed in chunks."""
    with replacing(target) as fh, zipfile.ZipFile(fh, "w") as zout:
        for info in infos:
            if info.filename.lower() in gone:
                continue
            data = edits.get(info.filename)
            if data is None and info.compress_type in (zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED):
                _copy_raw(zs, info, zout)
                continue
            if data is None:
                data = zs.read(info)
            zi = zipfile.ZipInfo(info.filename, info.date_time)
            zi.compress_type = info.compress_type
            zi.external_attr = info.external_attr
            zi.create_system = info.create_system
            zout.writestr(zi, data)
        for name, entry in new_entries:
            zi = zipfile.ZipInfo(name, _FIXED_TIME)
            zi.compress_type = zipfile.ZIP_DEFLATED
            zi._compresslevel = COMPRESS_LEVEL  # type: ignore[attr-defined]
            if isinstance(entry, bytes):
                zout.writestr(zi, entry)
                continue
            with zout.open(zi, "w") as part:
                _write_beside(part, entry.chunks())
