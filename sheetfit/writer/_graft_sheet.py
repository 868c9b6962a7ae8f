"""Make a rendered worksheet part fit a user's package: inline strings, remapped styles.

The rendered part comes from xlsxwriter (UTF-8, default namespace). Shared-
string cells become inline-string cells so the user's sharedStrings part is
never touched; style indices (``c@s``, ``row@s``, ``col@style``,
``cfRule@dxfId``) are remapped onto the user's styles part; ``tabSelected`` is
dropped so the user's active tab stays the only selected one
(docs/engine-facts.md, P5).
"""

from __future__ import annotations

import re

from sheetfit.writer import _graft_text as tx
from sheetfit.writer._styles import StyleMap

__all__ = ["convert_sheet", "shared_strings"]

_CELL_RE = re.compile(r"<c(?=[\s/>])([^>]*?)(/>|>(.*?)</c>)", re.DOTALL)
_STYLED_RE = re.compile(r"<(c|row|col|cfRule)(?=[\s/>])[^>]*>")
_VIEW_RE = re.compile(r"<sheetView(?=[\s/>])[^>]*>")
_V_RE = re.compile(r"<v>\s*(\d+)\s*</v>")
_ATTR = {"c": "s", "row": "s", "col": "style", "cfRule": "dxfId"}


def shared_strings(sst: bytes) -> list[str]:
    """The inner XML of each `<si>` of a shared-strings part, in index order."""
    text = tx.decode(sst).text
    return [text[s.inner_start : s.inner_end] for s in tx.elements(text, "si")]


def _inline(match: re.Match[str], strings: list[str]) -> str:
    attrs = match.group(1)
    if tx.attr(attrs, "t") != "s":
        return match.group(0)
    body = match.group(3) or ""
    v = _V_RE.search(body)
    if v is None:
        raise ValueError(f"shared-string cell without an index: {match.group(0)[:80]}")
    idx = int(v.group(1))
    if idx >= len(strings):
        raise ValueError(f"shared-string index {idx} out of range ({len(strings)} strings)")
    inner = strings[idx] or "<t/>"
    attrs = tx.set_attr(attrs, "t", "inlineStr")
    return f"<c{attrs}><is>{inner}</is></c>"


def _restyle(match: re.Match[str], smap: StyleMap) -> str:
    tag = match.group(0)
    kind = match.group(1)
    name = _ATTR[kind]
    raw = tx.attr(tag, name)
    if raw is None:
        return tag
    table = smap.dxf if kind == "cfRule" else smap.xf
    old = int(raw)
    new = table.get(old, old if kind == "cfRule" else 0)
    return tx.set_attr(tag, name, str(new)) if new != old else tag


def convert_sheet(xml: bytes, strings: list[str], smap: StyleMap) -> bytes:
    """The rendered worksheet with inline strings, user style indices and no tabSelected."""
    text = tx.decode(xml).text
    text = _CELL_RE.sub(lambda m: _inline(m, strings), text)
    text = _STYLED_RE.sub(lambda m: _restyle(m, smap), text)
    text = _VIEW_RE.sub(lambda m: tx.drop_attr(m.group(0), "tabSelected"), text)
    return text.encode("utf-8")
