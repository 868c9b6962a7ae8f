"""What a graft changed, read from the source and output packages themselves (test helper)."""

from __future__ import annotations

import zipfile
from pathlib import Path

from sheetfit.reader.package import open_package

__all__ = ["entries", "part_changes", "sheet_changes"]


def entries(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as z:
        return {n: z.read(n) for n in z.namelist()}


def part_changes(src: Path, out: Path) -> tuple[set[str], set[str]]:
    """(removed, added) zip entry names of a graft, read from the source and output packages.

    Removed: entries of the source the output lacks; added: entries of the output the source
    lacks. A sheet part of both whose bytes differ (a new sheet reusing a freed number) counts
    as both removed and added.
    """
    a, b = entries(src), entries(out)
    sheet_parts = {s.part.lower() for p in (src, out) for s in open_package(p).sheets}
    reused = {n for n in a.keys() & b.keys() if n.lower() in sheet_parts and a[n] != b[n]}
    return (a.keys() - b.keys()) | reused, (b.keys() - a.keys()) | reused


def sheet_changes(src: Path, out: Path) -> tuple[list[str], list[str]]:
    """(removed, added) sheet titles of a graft, read from the source and output packages.

    A source sheet is kept when the output has a sheet of the same title in the same part with
    the same bytes; every other source sheet was removed and every other output sheet added.
    """

    def sheets(path: Path) -> list[tuple[str, str, bytes]]:
        data = {n.lower(): d for n, d in entries(path).items()}
        return [(s.name, s.part.lower(), data[s.part.lower()]) for s in open_package(path).sheets]

    old, new = sheets(src), sheets(out)
    return [s[0] for s in old if s not in new], [s[0] for s in new if s not in old]
