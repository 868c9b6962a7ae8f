"""Which parts go with the owned sheets, and what calcChain keeps (docs/engine-facts.md P2, P10).

A part goes when it is reachable through an owned sheet's relationships and
no part that stays refers to it; a removed part's own rels part goes with it.
"""

from __future__ import annotations

import posixpath
import re
from collections.abc import Iterable
from dataclasses import dataclass, field

from sheetfit.reader.package import Rel, parse_rels, rels_part_of
from sheetfit.writer import _graft_text as tx

__all__ = ["RelGraph", "build_graph", "filter_calc_chain", "parts_to_remove"]

_RELS_RE = re.compile(r"^(?P<dir>(?:.*/)?)_rels/(?P<base>[^/]+)\.rels$", re.IGNORECASE)


@dataclass
class RelGraph:
    """Every relationship in a package, by source part (all paths lower-cased)."""

    out: dict[str, list[Rel]] = field(default_factory=dict)  # source -> rels
    into: dict[str, set[str]] = field(default_factory=dict)  # target -> sources
    rels_parts: dict[str, str] = field(default_factory=dict)  # source -> its rels entry name

    def targets(self) -> Iterable[str]:
        for rels in self.out.values():
            for r in rels:
                if r.part is not None:
                    yield r.part


def source_of(rels_name: str) -> str | None:
    """The part a rels entry belongs to ("" for the package rels), or None if not a rels part."""
    m = _RELS_RE.match(rels_name)
    if not m:
        return None
    return m.group("dir") + m.group("base")


def build_graph(entries: dict[str, bytes], file: str) -> RelGraph:
    """The relationship graph of a package given its rels entries (name -> bytes)."""
    g = RelGraph()
    for name, data in entries.items():
        src = source_of(name)
        if src is None:
            continue
        rels = parse_rels(data, src, file, name)
        key = src.lower()
        g.rels_parts[key] = name
        g.out[key] = [
            Rel(r.rid, r.type, r.target, r.external, r.part.lower() if r.part else None)
            for r in rels
        ]
        for r in g.out[key]:
            if r.part is not None:
                g.into.setdefault(r.part, set()).add(key)
    return g


def parts_to_remove(g: RelGraph, owned: Iterable[str], existing: set[str]) -> set[str]:
    """Lower-cased names of the parts (and rels parts) that go with the owned sheet parts."""
    gone = {p.lower() for p in owned}
    changed = True
    while changed:
        changed = False
        for src in list(gone):
            for r in g.out.get(src, []):
                t = r.part
                if t is None or t in gone or t not in existing:
                    continue
                if all(ref in gone for ref in g.into.get(t, set())):
                    gone.add(t)
                    changed = True
    with_rels = set(gone)
    for p in gone:
        rp = g.rels_parts.get(p)
        if rp is not None:
            with_rels.add(rp.lower())
        else:
            with_rels.add(rels_part_of(p).lower())
    return {p for p in with_rels if p in existing}


def filter_calc_chain(data: bytes, removed_ids: set[int]) -> bytes | None:
    """calcChain without the cells of removed sheet ids; None if no cell is left."""
    doc = tx.decode(data)
    prefix, _ = tx.root_prefix(doc.text)
    current: int | None = None
    kept = 0
    for sp in tx.elements(doc.text, "c", prefix):
        raw = tx.attr(sp.start_tag, "i")
        if raw is not None:
            current = int(raw)
        if current in removed_ids:
            doc.replace(sp.start, sp.end, "")
        else:
            kept += 1
    if not kept:
        return None
    return data if not doc.edits else doc.result()


def relative_target(source_part: str, part: str) -> str:
    """A rel target for ``part`` relative to the folder of ``source_part``."""
    return posixpath.relpath(part, posixpath.dirname(source_part) or ".")
