"""Parts a rendered owned sheet brings along (drawings, charts, …), renamed into the user's package.

A rendered sheet with relationships (a drawing holding charts) brings every part it
reaches through them. Each gets a part name numbered above every number of its
kind in use in the user's package (``drawing7.xml``, ``chart12.xml``), so no user
part is ever overwritten, and rels parts of our own written afresh with the same
relationship ids and targets relative to the new names. The next refresh removes
them through the owned sheet's rels (``_graft_remove.parts_to_remove``): a part only
owned parts refer to goes with them; the user's own charts are never reached.
"""

from __future__ import annotations

import posixpath
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass

from sheetfit.reader.package import Rel, parse_rels, rels_part_of
from sheetfit.writer import _graft_text as tx
from sheetfit.writer._graft_remove import relative_target
from sheetfit.writer._graft_workbook import next_number

__all__ = ["Attached", "attached_of", "place", "taken_names"]

_NS_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
_NUMBERED = re.compile(r"^(?P<stem>.*?)(?P<num>\d+)\.(?P<ext>[A-Za-z0-9]+)$")
_OVERRIDE = re.compile(r'<(?:\w+:)?Override\s+PartName="([^"]+)"\s+ContentType="([^"]+)"')
_DEFAULT = re.compile(r'<(?:\w+:)?Default\s+Extension="([^"]+)"\s+ContentType="([^"]+)"')


@dataclass(frozen=True)
class Attached:
    """What one rendered sheet brings: its rels, and each reached part with rels and type."""

    rels: list[Rel]
    parts: dict[str, bytes]  # rendered name -> bytes, in the order reached
    part_rels: dict[str, list[Rel]]  # rendered name -> its rels (only parts that have some)
    types: dict[str, str]  # rendered name -> content type


def attached_of(sheet_part: str, read: Callable[[str], bytes | None], ct_text: str
                ) -> Attached | None:
    """The parts a rendered sheet reaches through its rels; None if it has no rels part."""
    data = read(rels_part_of(sheet_part))
    if data is None:
        return None
    overrides = {n.lstrip("/").lower(): t for n, t in _OVERRIDE.findall(ct_text)}
    defaults = {e.lower(): t for e, t in _DEFAULT.findall(ct_text)}
    rels = parse_rels(data, sheet_part)
    parts: dict[str, bytes] = {}
    part_rels: dict[str, list[Rel]] = {}
    types: dict[str, str] = {}
    todo = [r.part for r in rels if r.part]
    while todo:
        p = todo.pop(0)
        if p is None or p in parts:
            continue
        body = read(p)
        if body is None:
            raise ValueError(f"rendered part {p} is referred to but missing")
        parts[p] = body
        ext = p.rsplit(".", 1)[-1].lower()
        ctype = overrides.get(p.lower()) or defaults.get(ext)
        if ctype is None:
            raise ValueError(f"rendered part {p} has no content type")
        types[p] = ctype
        own = read(rels_part_of(p))
        if own is not None:
            part_rels[p] = parse_rels(own, p)
            todo += [r.part for r in part_rels[p] if r.part]
    return Attached(rels, parts, part_rels, types)


def taken_names(names: Iterable[str]) -> set[str]:
    """Part names in use, counting an orphaned rels part's source name as taken too."""
    out = set()
    for n in names:
        out.add(n)
        if n.endswith(".rels"):
            out.add(n[: -len(".rels")].replace("/_rels/", "/"))
    return out


def _rels_xml(rels: list[Rel], source: str, rename: dict[str, str]) -> bytes:
    items = []
    for r in rels:
        if r.external or r.part is None:
            target, mode = r.target, ' TargetMode="External"'
        else:
            target, mode = relative_target(source, rename[r.part]), ""
        items.append(f"<Relationship Id={tx.qattr(r.rid)} Type={tx.qattr(r.type)} "
                     f"Target={tx.qattr(target)}{mode}/>")
    return ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            f'<Relationships xmlns="{_NS_PKG_REL}">' + "".join(items)
            + "</Relationships>").encode("utf-8")


def place(attached: list[tuple[str, Attached]], taken: set[str], rendered_base: str,
          base: str) -> tuple[list[tuple[str, bytes]], dict[str, list[str]]]:
    """New zip entries for the attached parts of each (new sheet part name, Attached).

    ``taken`` are the lower-cased part names in use (grows with the names given out);
    parts keep their folder under the workbook folder (``rendered_base`` → ``base``).
    Returns the entries (parts and rels parts) and the new part names by content type.
    """
    entries: list[tuple[str, bytes]] = []
    by_type: dict[str, list[str]] = {}
    for sheet_part, att in attached:
        rename: dict[str, str] = {}
        for p in att.parts:
            folder = posixpath.relpath(posixpath.dirname(p), rendered_base or ".")
            m = _NUMBERED.match(posixpath.basename(p))
            stem, ext = (m.group("stem"), m.group("ext")) if m else (
                posixpath.basename(p).rsplit(".", 1)[0], p.rsplit(".", 1)[-1])
            new = posixpath.join(base, folder, f"{stem}{next_number(taken, stem)}.{ext}")
            taken.add(new.lower())
            rename[p] = new
        entries.append((rels_part_of(sheet_part), _rels_xml(att.rels, sheet_part, rename)))
        for p, data in att.parts.items():
            entries.append((rename[p], data))
            by_type.setdefault(att.types[p], []).append(rename[p])
            if p in att.part_rels:
                entries.append((rels_part_of(rename[p]),
                                _rels_xml(att.part_rels[p], rename[p], rename)))
    return entries, by_type
