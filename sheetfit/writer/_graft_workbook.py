"""Splice edits into the workbook part, its rels and the content types (docs/engine-facts.md P2, P6, P7).

Each function takes the part's bytes and returns new bytes in which only the
owned entries were removed or added; everything else keeps its characters.
"""

from __future__ import annotations

import posixpath
import re
from collections.abc import Iterable, Sequence
from typing import Protocol

from sheetfit.a1 import quote_sheet
from sheetfit.owned import MARKER_NAME, is_ours
from sheetfit.reader.package import NS_REL, Package, SheetEntry
from sheetfit.writer import _graft_text as tx

__all__ = [
    "edit_content_types",
    "edit_rels",
    "edit_workbook",
    "next_number",
    "next_rid",
]

_AFTER_NAMES = ("sheets", "functionGroups", "externalReferences")


class _Named(Protocol):
    @property
    def name(self) -> str: ...
    @property
    def text(self) -> str: ...


def next_number(in_use: Iterable[str], stem: str) -> int:
    """The first number above every ``<stem>N.<ext>`` part name in use (any folder, any case)."""
    rx = re.compile(rf"^{re.escape(stem)}(\d+)\.[a-z0-9]+$", re.IGNORECASE)
    top = 0
    for name in in_use:
        m = rx.match(posixpath.basename(name))
        if m:
            top = max(top, int(m.group(1)))
    return top + 1


def next_rid(rids: Iterable[str]) -> int:
    """The first number N such that ``rIdN`` is above every rId number in use."""
    top = 0
    for rid in rids:
        m = re.fullmatch(r"rId(\d+)", rid)
        if m:
            top = max(top, int(m.group(1)))
    return top + 1


def _q(prefix: str, local: str) -> str:
    return f"{prefix}:{local}" if prefix else local


def _shift(i: int, removed: set[int], kept: int) -> int:
    new = i - sum(1 for r in removed if r < i)
    if i in removed:
        new = max(0, min(new, kept - 1))
    return new


def edit_workbook(
    data: bytes,
    pkg: Package,
    owned: Sequence[SheetEntry],
    titles: Sequence[str],
    rids: Sequence[str],
    names: Sequence[_Named],
    sheet_names: Sequence[tuple[int, str, str]] = (),
) -> bytes:
    """The workbook part without the owned sheets and their names, with the new ones appended.

    ``sheet_names`` are names scoped to a new sheet, (its position among ``titles``,
    name, text) — the rendered print titles (``_xlnm.Print_Titles``); like the marker
    they are scoped to an owned sheet, so the next refresh removes them with it.
    """
    doc = tx.decode(data)
    text = doc.text
    prefix, root_tag = tx.root_prefix(text)
    rpre = tx.prefix_for(root_tag, NS_REL)
    removed = {s.index for s in owned}
    kept = len(pkg.sheets) - len(removed)

    holder = tx.elements(text, "sheets", prefix)[0]
    spans = tx.elements(text, "sheet", prefix, holder.inner_start, holder.inner_end)
    if len(spans) != len(pkg.sheets):
        raise ValueError("workbook part: <sheet> elements do not match the parsed sheets")
    for s in owned:
        doc.replace(spans[s.index].start, spans[s.index].end, "")
    top = max((s.sheet_id for s in pkg.sheets if s.index not in removed), default=0)
    rid_attr = f"{rpre}:id" if rpre else f'xmlns:r="{NS_REL}" r:id'
    added = "".join(
        f'<{_q(prefix, "sheet")} name={tx.qattr(t)} sheetId="{top + 1 + j}" {rid_attr}="{rid}"/>'
        for j, (t, rid) in enumerate(zip(titles, rids, strict=True))
    )
    doc.insert(holder.inner_end, added)

    for view in tx.elements(text, "workbookView", prefix):
        tag = view.start_tag
        for att in ("activeTab", "firstSheet"):
            raw = tx.attr(tag, att)
            if raw is not None and raw.strip().isdigit():
                tag = tx.set_attr(tag, att, str(_shift(int(raw), removed, kept)))
        if tag != view.start_tag:
            doc.replace(view.start, view.tag_end, tag)

    qn = _q(prefix, "definedName")
    new_names = "".join(
        f'<{qn} name="{MARKER_NAME}" localSheetId="{kept + j}" hidden="1">'
        f"{tx.esc(quote_sheet(t))}!$A$1</{qn}>"
        for j, t in enumerate(titles)
    ) + "".join(
        f'<{qn} name={tx.qattr(name)} localSheetId="{kept + j}">{tx.esc(text_)}</{qn}>'
        for j, name, text_ in sheet_names
    ) + "".join(f"<{qn} name={tx.qattr(n.name)}>{tx.esc(n.text)}</{qn}>" for n in names)
    _edit_names(doc, prefix, pkg, owned, removed, kept, new_names)
    return doc.result()


def _edit_names(
    doc: tx.Part,
    prefix: str,
    pkg: Package,
    owned: Sequence[SheetEntry],
    removed: set[int],
    kept: int,
    new_names: str,
) -> None:
    text = doc.text
    holders = tx.elements(text, "definedNames", prefix)
    qh = _q(prefix, "definedNames")
    if not holders:
        if new_names:
            ends = [sp.end for local in _AFTER_NAMES for sp in tx.elements(text, local, prefix)[:1]]
            doc.insert(max(ends), f"<{qh}>{new_names}</{qh}>")
        return
    holder = holders[0]
    spans = (
        []
        if holder.empty
        else tx.elements(text, "definedName", prefix, holder.inner_start, holder.inner_end)
    )
    if len(spans) != len(pkg.defined_names):
        raise ValueError("workbook part: <definedName> elements do not match the parsed names")
    titles = [s.name for s in owned]
    left = 0
    edits: list[tuple[int, int, str]] = []
    for sp, d in zip(spans, pkg.defined_names, strict=True):
        if is_ours(d, titles, removed):
            edits.append((sp.start, sp.end, ""))
            continue
        left += 1
        if d.local_sheet_id is not None:
            new = _shift(d.local_sheet_id, removed, kept)
            if new != d.local_sheet_id:
                tag = tx.set_attr(sp.start_tag, "localSheetId", str(new))
                edits.append((sp.start, sp.tag_end, tag))
    if not left and not new_names:
        doc.replace(holder.start, holder.end, "")
        return
    for e in edits:
        doc.replace(*e)
    if holder.empty:
        doc.replace(
            holder.start, holder.end, f"{holder.start_tag[:-2].rstrip()}>{new_names}</{qh}>"
        )
    else:
        doc.insert(holder.inner_end, new_names)


def edit_rels(
    data: bytes, drop: set[str], targets: Sequence[str], rids: Sequence[str], rel_type: str
) -> bytes:
    """A rels part without the ``drop`` ids, with ``rel_type`` rels to ``targets`` appended."""
    doc = tx.decode(data)
    prefix, _ = tx.root_prefix(doc.text)
    for sp in tx.elements(doc.text, "Relationship", prefix):
        if tx.attr(sp.start_tag, "Id") in drop:
            doc.replace(sp.start, sp.end, "")
    qn = _q(prefix, "Relationship")
    added = "".join(
        f'<{qn} Id="{rid}" Type="{rel_type}" Target={tx.qattr(t)}/>'
        for rid, t in zip(rids, targets, strict=True)
    )
    doc.insert(doc.text.rfind(f"</{_q(prefix, 'Relationships')}"), added)
    return doc.result()


def edit_content_types(
    data: bytes, gone: set[str], parts: Sequence[str], content_type: str
) -> tuple[bytes, set[str]]:
    """Content types without overrides of ``gone`` parts, with overrides for ``parts``.

    Also returns every part name (lower case, no leading slash) that keeps an
    override, for part numbering.
    """
    doc = tx.decode(data)
    prefix, _ = tx.root_prefix(doc.text)
    listed: set[str] = set()
    for sp in tx.elements(doc.text, "Override", prefix):
        name = (tx.attr(sp.start_tag, "PartName") or "").lstrip("/").lower()
        if name in gone:
            doc.replace(sp.start, sp.end, "")
        else:
            listed.add(name)
    defaults = {
        (tx.attr(sp.start_tag, "Extension") or "").lower(): tx.attr(sp.start_tag, "ContentType")
        for sp in tx.elements(doc.text, "Default", prefix)
    }
    qn = _q(prefix, "Override")
    added = "".join(
        f'<{qn} PartName={tx.qattr("/" + p)} ContentType="{content_type}"/>'
        for p in parts
        if defaults.get(p.rsplit(".", 1)[-1].lower()) != content_type
    )
    doc.insert(doc.text.rfind(f"</{_q(prefix, 'Types')}"), added)
    return doc.result(), listed
