"""Byte-minimal edits of a shared XML part: locate elements in its text, splice at offsets.

Re-serialising a user's part with an XML library reorders namespace
declarations and turns UTF-16 into UTF-8 (docs/engine-facts.md, P13),
so shared parts are edited as text: elements are located by a scanner that
ignores comments, CDATA and processing instructions, and edits replace exact
spans. Everything outside the spans keeps its characters, and the part keeps
its encoding and byte-order mark. Callers have already parsed the part with
defusedxml, so the text is known to be well-formed.
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass
from xml.sax.saxutils import escape, quoteattr

__all__ = [
    "Part",
    "Span",
    "attr",
    "decode",
    "drop_attr",
    "elements",
    "esc",
    "prefix_for",
    "qattr",
    "root_prefix",
    "set_attr",
]

_BOMS = (
    (b"\xef\xbb\xbf", "utf-8"),
    (b"\xff\xfe", "utf-16-le"),
    (b"\xfe\xff", "utf-16-be"),
)


@dataclass
class Part:
    """The text of a part plus what is needed to write it back in its own encoding."""

    text: str
    encoding: str
    bom: bytes
    edits: list[tuple[int, int, str]]

    def encode(self, text: str | None = None) -> bytes:
        return self.bom + (self.text if text is None else text).encode(self.encoding)

    def replace(self, start: int, end: int, new: str) -> None:
        """Queue a replacement of text[start:end]; spans must not overlap."""
        self.edits.append((start, end, new))

    def insert(self, pos: int, new: str) -> None:
        self.edits.append((pos, pos, new))

    def apply(self) -> str:
        """The text with all queued edits applied (insertions at one offset keep their order)."""
        order = sorted(enumerate(self.edits), key=lambda e: (e[1][0], e[1][1], e[0]))
        out: list[str] = []
        pos = 0
        for _, (start, end, new) in order:
            if start < pos:
                raise ValueError("overlapping edits")
            out.append(self.text[pos:start])
            out.append(new)
            pos = end
        out.append(self.text[pos:])
        return "".join(out)

    def result(self) -> bytes:
        return self.encode(self.apply())


def decode(data: bytes) -> Part:
    """Decode a part's bytes, remembering its encoding and byte-order mark."""
    for bom, enc in _BOMS:
        if data.startswith(bom):
            return Part(data[len(bom) :].decode(enc), enc, bom, [])
    if data.startswith(b"<\x00"):
        return Part(data.decode("utf-16-le"), "utf-16-le", b"", [])
    if data.startswith(b"\x00<"):
        return Part(data.decode("utf-16-be"), "utf-16-be", b"", [])
    head = data[:200].decode("ascii", "replace")
    m = re.search(r"encoding\s*=\s*[\"']([A-Za-z0-9._-]+)[\"']", head)
    enc = m.group(1).lower() if m else "utf-8"
    if enc.replace("_", "-") in ("utf-16", "utf-16le", "utf-16be"):
        enc = "utf-8"  # declared UTF-16 without BOM or NUL bytes: the bytes are UTF-8 really
    return Part(data.decode(enc), enc, b"", [])


_MASK_RE = re.compile(r"<!--.*?-->|<!\[CDATA\[.*?\]\]>|<\?.*?\?>", re.DOTALL)


def _mask(text: str) -> str:
    """The text with comments, CDATA and PIs blanked (same length), for scanning."""
    return _MASK_RE.sub(lambda m: " " * len(m.group(0)), text)


@dataclass(frozen=True)
class Span:
    """Where one element is: [start, end) of the whole element, its start tag and content."""

    start: int
    end: int
    tag_end: int  # offset just after the start tag's '>'
    inner_start: int
    inner_end: int  # == inner_start for an empty element
    empty: bool
    start_tag: str


def _qname(prefix: str, local: str) -> str:
    return f"{prefix}:{local}" if prefix else local


def elements(
    text: str, local: str, prefix: str = "", lo: int = 0, hi: int | None = None
) -> list[Span]:
    """Every element ``prefix:local`` in text[lo:hi] (not nested in itself), in document order."""
    scan = _mask(text)
    hi = len(text) if hi is None else hi
    name = re.escape(_qname(prefix, local))
    open_re = re.compile(rf"<{name}(?=[\s/>])[^>]*>")
    close_re = re.compile(rf"</{name}\s*>")
    out: list[Span] = []
    pos = lo
    while True:
        m = open_re.search(scan, pos, hi)
        if not m:
            return out
        tag = text[m.start() : m.end()]
        if tag.endswith("/>"):
            out.append(Span(m.start(), m.end(), m.end(), m.end(), m.end(), True, tag))
            pos = m.end()
            continue
        c = close_re.search(scan, m.end(), hi)
        if not c:
            raise ValueError(f"unclosed <{_qname(prefix, local)}>")
        out.append(Span(m.start(), c.end(), m.end(), m.end(), c.start(), False, tag))
        pos = c.end()


@functools.lru_cache(maxsize=64)
def _attr_re(name: str) -> re.Pattern[str]:
    return re.compile(rf"(\s){re.escape(name)}\s*=\s*(\"[^\"]*\"|'[^']*')")


def attr(start_tag: str, name: str) -> str | None:
    """The raw (still escaped) value of an attribute in a start tag, or None."""
    m = _attr_re(name).search(start_tag)
    return m.group(2)[1:-1] if m else None


def set_attr(start_tag: str, name: str, value: str) -> str:
    """The start tag with attribute ``name`` set to ``value`` (value already escaped)."""
    rx = _attr_re(name)
    if rx.search(start_tag):
        return rx.sub(lambda m: f'{m.group(1)}{name}="{value}"', start_tag, count=1)
    cut = len(start_tag) - (2 if start_tag.endswith("/>") else 1)
    return f'{start_tag[:cut].rstrip()} {name}="{value}"{start_tag[cut:]}'


def drop_attr(start_tag: str, name: str) -> str:
    """The start tag without attribute ``name``."""
    rx = re.compile(rf"\s{re.escape(name)}\s*=\s*(\"[^\"]*\"|'[^']*')")
    return rx.sub("", start_tag, count=1)


def root_prefix(text: str) -> tuple[str, str]:
    """(prefix, start tag) of the document element."""
    scan = _mask(text)
    m = re.search(r"<(?![!?])([A-Za-z_][\w.-]*:)?([A-Za-z_][\w.-]*)[^>]*>", scan)
    if not m:
        raise ValueError("no document element")
    return (m.group(1) or "")[:-1], text[m.start() : m.end()]


def prefix_for(start_tag: str, namespace: str) -> str | None:
    """The prefix a start tag binds to ``namespace`` ("" for a default namespace), or None."""
    for m in re.finditer(r"\sxmlns(?::([\w.-]+))?\s*=\s*(\"[^\"]*\"|'[^']*')", start_tag):
        if m.group(2)[1:-1] == namespace:
            return m.group(1) or ""
    return None


def esc(text: str) -> str:
    """Escape character data."""
    return escape(text)


def qattr(text: str) -> str:
    """A quoted, escaped attribute value."""
    return quoteattr(text)
