"""Merge the rendered book's cell formats into the user's styles part (append with dedupe).

A rendered sheet's style indices point into the rendered styles part; they are
remapped onto the user's (docs/engine-facts.md, P5 and P8). Fonts,
fills, borders, number formats, cell formats and differential formats are
appended only when the user's part has no equal entry, so a second graft
adds nothing. Entries are compared by a canonical form that ignores
namespace prefixes, attribute order and insignificant whitespace (the effect
of exclusive canonicalisation; inclusive canonicalisation copies in-scope
namespace declarations, which made styles grow on every run).
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass, field
from xml.etree.ElementTree import Element

from sheetfit.reader.package import NS_MAIN, parse_xml
from sheetfit.writer import _graft_text as tx

__all__ = ["StyleMap", "bare_styles", "canonical", "merge_styles", "user_style_indices"]

_ORDER = (
    "numFmts",
    "fonts",
    "fills",
    "borders",
    "cellStyleXfs",
    "cellXfs",
    "cellStyles",
    "dxfs",
    "tableStyles",
    "colors",
    "extLst",
)
_CHILD = {
    "numFmts": "numFmt",
    "fonts": "font",
    "fills": "fill",
    "borders": "border",
    "cellXfs": "xf",
    "dxfs": "dxf",
}
_FIRST_CUSTOM_FMT = 164


@dataclass
class StyleMap:
    """Rendered index → user index, for cell formats (``s``/``style``) and dxfs (``dxfId``)."""

    xf: dict[int, int] = field(default_factory=dict)
    dxf: dict[int, int] = field(default_factory=dict)
    added: int = 0  # entries appended to the user's part


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def canonical(el: Element) -> tuple[object, ...]:
    """A prefix-free, order-free canonical form of an element for equality tests."""
    text = (el.text or "").strip()
    return (
        el.tag,
        tuple(sorted(el.attrib.items())),
        text,
        tuple(canonical(c) for c in el),
    )


def _ser(el: Element, prefix: str) -> str:
    """Serialise a rendered element (all in the main namespace) with the user's prefix."""
    name = f"{prefix}:{_local(el.tag)}" if prefix else _local(el.tag)
    attrs = "".join(f" {k}={tx.qattr(v)}" for k, v in el.attrib.items() if not k.startswith("{"))
    inner = tx.esc(el.text or "") + "".join(_ser(c, prefix) for c in el)
    return f"<{name}{attrs}/>" if not inner else f"<{name}{attrs}>{inner}</{name}>"


class _Section:
    """One container of the user's styles part and what we append to it."""

    def __init__(self, root: Element, name: str) -> None:
        self.name = name
        holder = root.find(f"{{{NS_MAIN}}}{name}")
        self.present = holder is not None
        child = _CHILD.get(name, "")
        self.items: list[Element] = (
            [] if holder is None else holder.findall(f"{{{NS_MAIN}}}{child}")
        )
        self.keys: dict[tuple[object, ...], int] = {}
        for i, el in enumerate(self.items):
            self.keys.setdefault(canonical(el), i)
        self.new: list[Element] = []

    def index_of(self, el: Element) -> int:
        key = canonical(el)
        if key in self.keys:
            return self.keys[key]
        idx = len(self.items) + len(self.new)
        self.new.append(el)
        self.keys[key] = idx
        return idx


def _copy(el: Element, **attrs: str) -> Element:
    out = Element(el.tag, dict(el.attrib))
    out.text = el.text
    out.extend(list(el))
    for k, v in attrs.items():
        out.set(k, v)
    return out


def merge_styles(
    user: bytes, rendered: bytes, file: str = "", part: str = ""
) -> tuple[bytes, StyleMap]:
    """The user's styles part with the rendered formats merged in, and the index maps."""
    u_root = parse_xml(user, file, part or "xl/styles.xml")
    r_root = parse_xml(rendered, "rendered book", "xl/styles.xml")
    sec = {n: _Section(u_root, n) for n in _CHILD}
    rs = {n: _Section(r_root, n) for n in _CHILD}
    smap = StyleMap()

    user_codes: dict[str, int] = {}
    used_ids = [int(e.get("numFmtId", "0")) for e in sec["numFmts"].items]
    for e in sec["numFmts"].items:
        user_codes.setdefault(e.get("formatCode", ""), int(e.get("numFmtId", "0")))
    r_codes = {int(e.get("numFmtId", "0")): e.get("formatCode", "") for e in rs["numFmts"].items}
    next_id = max([_FIRST_CUSTOM_FMT - 1, *used_ids]) + 1

    def fmt_id(rid: int) -> int:
        nonlocal next_id
        if rid < _FIRST_CUSTOM_FMT or rid not in r_codes:
            return rid
        code = r_codes[rid]
        if code not in user_codes:
            user_codes[code] = next_id
            sec["numFmts"].new.append(
                Element(f"{{{NS_MAIN}}}numFmt", {"numFmtId": str(next_id), "formatCode": code})
            )
            next_id += 1
        return user_codes[code]

    def part_id(kind: str, rid: str | None) -> str:
        i = int(rid or "0")
        items = rs[kind].items
        return str(sec[kind].index_of(items[i])) if i < len(items) else str(i)

    for i, xf in enumerate(rs["cellXfs"].items):
        if i == 0:
            smap.xf[0] = 0  # unformatted cells take the user's Normal format
            continue
        new = _copy(
            xf,
            numFmtId=str(fmt_id(int(xf.get("numFmtId", "0")))),
            fontId=part_id("fonts", xf.get("fontId")),
            fillId=part_id("fills", xf.get("fillId")),
            borderId=part_id("borders", xf.get("borderId")),
            xfId="0",
        )
        smap.xf[i] = sec["cellXfs"].index_of(new)
    for i, dxf in enumerate(rs["dxfs"].items):
        new = _copy(dxf)
        nf = dxf.find(f"{{{NS_MAIN}}}numFmt")
        if nf is not None:
            kids = [
                _copy(nf, numFmtId=str(fmt_id(int(nf.get("numFmtId", "0"))))) if c is nf else c
                for c in dxf
            ]
            new = Element(dxf.tag, dict(dxf.attrib))
            new.extend(kids)
        smap.dxf[i] = sec["dxfs"].index_of(new)

    doc = tx.decode(user)
    prefix, _ = tx.root_prefix(doc.text)
    for name in _CHILD:
        if sec[name].new:
            smap.added += len(sec[name].new)
            _append(doc, prefix, name, sec[name])
    return (user if not doc.edits else doc.result()), smap


def _append(doc: tx.Part, prefix: str, name: str, section: _Section) -> None:
    body = "".join(_ser(e, prefix) for e in section.new)
    total = len(section.items) + len(section.new)
    qn = f"{prefix}:{name}" if prefix else name
    spans = tx.elements(doc.text, name, prefix)
    if spans:
        sp = spans[0]
        tag = sp.start_tag
        if tx.attr(tag, "count") is not None or not sp.empty:
            tag = tx.set_attr(tag, "count", str(total))
        if sp.empty:
            open_tag = tag[:-2].rstrip() + ">"
            doc.replace(sp.start, sp.end, f"{open_tag}{body}</{qn}>")
        else:
            doc.replace(sp.start, sp.tag_end, tag)
            doc.insert(sp.inner_end, body)
        return
    block = f'<{qn} count="{total}">{body}</{qn}>'
    for later in _ORDER[_ORDER.index(name) + 1 :]:
        found = tx.elements(doc.text, later, prefix)
        if found:
            doc.insert(found[0].start, block)
            return
    qroot = f"{prefix}:styleSheet" if prefix else "styleSheet"
    end = doc.text.rfind(f"</{qroot}")
    doc.insert(end, block)


_XF = re.compile(r"<xf\b[^>]*/>|<xf\b[^>]*>.*?</xf>", re.DOTALL)
_USER_XF = re.compile(rb"\b(?:s|style)\s*=\s*[\"'](\d+)[\"']")
_USER_DXF = re.compile(rb"\bdxfId\s*=\s*[\"'](\d+)[\"']")


def user_style_indices(sheets: Iterable[bytes]) -> tuple[int, int]:
    """The highest cell-format and differential-format index the user's sheets use (-1: none)."""
    xf = dxf = -1
    for data in sheets:
        xf = max([xf, *(int(m.group(1)) for m in _USER_XF.finditer(data))])
        dxf = max([dxf, *(int(m.group(1)) for m in _USER_DXF.finditer(data))])
    return xf, dxf


def bare_styles(rendered: bytes, max_xf: int, max_dxf: int) -> bytes:
    """A styles part for a book that lacks one: the rendered book's, with the indices
    0 … ``max_xf`` (``max_dxf``) the user's cells already use kept as plain formats, so
    no cell of theirs takes one of sheetfit's formats. Merge the rendered part into it
    to map the rendered sheets' indices past them."""
    text = rendered.decode("utf-8")
    pad_xf = max(0, max_xf)  # index 0 is the rendered part's own plain format
    if pad_xf:
        holder = re.search(r"<cellXfs\b[^>]*>", text)
        first = _XF.search(text, holder.end()) if holder else None
        if holder is None or first is None:
            raise ValueError("rendered styles part has no cell formats")
        count = len(_XF.findall(text, holder.end(), text.index("</cellXfs>")))
        tag = re.sub(r'count="\d+"', f'count="{count + pad_xf}"', holder.group(0))
        text = (text[: holder.start()] + tag + first.group(0) * pad_xf
                + text[holder.end():])
    if max_dxf >= 0:
        pads = "<dxf/>" * (max_dxf + 1)
        holder = re.search(r"<dxfs\b[^>]*?(/?)>", text)
        if holder is None or holder.group(1):
            block = f'<dxfs count="{max_dxf + 1}">{pads}</dxfs>'
            at = holder.start() if holder else text.index("</styleSheet>")
            end = holder.end() if holder else at
            text = text[:at] + block + text[end:]
        else:
            count = text.count("<dxf>", holder.end(), text.index("</dxfs>")) + text.count(
                "<dxf/>", holder.end(), text.index("</dxfs>"))
            tag = re.sub(r'count="\d+"', f'count="{count + max_dxf + 1}"', holder.group(0))
            text = text[: holder.start()] + tag + pads + text[holder.end():]
    return text.encode("utf-8")
