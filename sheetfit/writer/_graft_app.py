"""Keep docProps/app.xml's list of sheet titles in step with the owned sheets.

The extended properties list part titles in groups whose labels are localised
("Worksheets", "Arbeitsblätter"); the worksheet group is found by the titles
it holds, not by its label (docs/engine-facts.md, P9).
"""

from __future__ import annotations

from collections.abc import Sequence
from xml.sax.saxutils import unescape

from sheetfit.writer import _graft_text as tx

__all__ = ["update_app"]

NS_VT = "http://schemas.openxmlformats.org/officeDocument/2006/docPropsVTypes"


def _inner(text: str, sp: tx.Span) -> str:
    return text[sp.inner_start : sp.inner_end]


def update_app(
    data: bytes, sheet_names: Sequence[str], removed: Sequence[str], added: Sequence[str]
) -> bytes:
    """app.xml without the ``removed`` titles and with ``added`` at the end of the sheet group.

    ``sheet_names`` are the worksheet titles of the book before the graft (user's
    and owned); they identify the group. Returns ``data`` itself when there is
    nothing to change or the part has no title groups.
    """
    doc = tx.decode(data)
    text = doc.text
    prefix, root_tag = tx.root_prefix(text)
    vt = tx.prefix_for(root_tag, NS_VT)
    if vt is None:
        return data
    heads = tx.elements(text, "HeadingPairs", prefix)
    titles = tx.elements(text, "TitlesOfParts", prefix)
    if not heads or not titles or heads[0].empty or titles[0].empty:
        return data
    h_vec = tx.elements(text, "vector", vt, heads[0].inner_start, heads[0].inner_end)
    t_vec = tx.elements(text, "vector", vt, titles[0].inner_start, titles[0].inner_end)
    if not h_vec or not t_vec or t_vec[0].empty or h_vec[0].empty:
        return data
    lpstrs = tx.elements(text, "lpstr", vt, t_vec[0].inner_start, t_vec[0].inner_end)
    variants = tx.elements(text, "variant", vt, h_vec[0].inner_start, h_vec[0].inner_end)
    groups: list[tuple[tx.Span, int]] = []  # (i4 span, count)
    for v in variants:
        i4 = tx.elements(text, "i4", vt, v.inner_start, v.inner_end)
        if i4:
            groups.append((i4[0], int(_inner(text, i4[0]).strip() or "0")))
    if not groups:
        return data

    wanted = {n.lower() for n in sheet_names}
    best, best_hits, offset = 0, -1, 0
    ranges = []
    for gi, (_, count) in enumerate(groups):
        members = lpstrs[offset : offset + count]
        ranges.append((offset, offset + count))
        hits = sum(unescape(_inner(text, s)).lower() in wanted for s in members)
        if hits > best_hits:
            best, best_hits = gi, hits
        offset += count
    lo, hi = ranges[best]
    gone = {n.lower() for n in removed}
    dropped = 0
    for s in lpstrs[lo:hi]:
        if unescape(_inner(text, s)).lower() in gone:
            doc.replace(s.start, s.end, "")
            dropped += 1
    if not dropped and not added:
        return data
    qn = f"{vt}:lpstr" if vt else "lpstr"
    new = "".join(f"<{qn}>{tx.esc(t)}</{qn}>" for t in added)
    if hi > lo:
        doc.insert(lpstrs[hi - 1].end, new)
    elif lo < len(lpstrs):
        doc.insert(lpstrs[lo].start, new)
    else:
        doc.insert(t_vec[0].inner_end, new)
    count_span, count = groups[best]
    doc.replace(count_span.inner_start, count_span.inner_end, str(count - dropped + len(added)))
    size = len(lpstrs) - dropped + len(added)
    doc.replace(
        t_vec[0].start, t_vec[0].tag_end, tx.set_attr(t_vec[0].start_tag, "size", str(size))
    )
    return doc.result()
