"""What people typed on owned sheets, read before a refresh replaces those sheets.

A refresh rewrites every owned sheet; the few columns meant for people (the audit
sheet's explanation, corroboration and conclusion) are read here first, keyed by the
row identity written beside them, so the new sheet can put each note back beside the
same row wherever it now stands.
"""

from __future__ import annotations

from .owned import sheet_title
from .reader.values import BLANK, NUMBER, BookValues, Value

__all__ = ["AUDIT_NOTES", "HEAD_ROW", "IDENTITY_HEAD", "Note", "read_kept"]

#: The columns people fill in on the audit sheet, by header.
AUDIT_NOTES = ("explanation", "corroboration", "conclusion")
#: Header of the column that identifies a row across refreshes.
IDENTITY_HEAD = "row identity"
#: Sheet row (1-based) of the headers on the sheets that carry notes.
HEAD_ROW = 4


#: A kept note: text, or a number someone typed (written back as a number).
Note = str | float


def read_kept(values: BookValues, tag: str) -> dict[str, dict[str, list[Note]]]:
    """Notes typed on the model's audit sheet at the last refresh: {"audit": {id: texts}}."""
    try:
        sv = values.sheet(sheet_title(tag, "audit"))
    except KeyError:
        return {}
    heads: dict[str, int] = {}
    for col in range(1, 64):
        v = sv.get(HEAD_ROW, col)
        if v.kind != BLANK:
            heads[v.text.strip().casefold()] = col
    if IDENTITY_HEAD not in heads or not all(h in heads for h in AUDIT_NOTES):
        return {}
    id_col = heads[IDENTITY_HEAD]
    note_cols = [heads[h] for h in AUDIT_NOTES]
    kept: dict[str, list[Note]] = {}
    row, blanks = HEAD_ROW + 1, 0
    while blanks < 3 and row < 1_048_577:
        ident = sv.get(row, id_col)
        row += 1
        if ident.kind == BLANK:
            blanks += 1
            continue
        blanks = 0
        texts = [_text(sv.get(row - 1, c)) for c in note_cols]
        if any(t != "" for t in texts):
            key = f"{ident.number:g}" if ident.kind == NUMBER else ident.text.strip()
            kept[key] = texts
    return {"audit": kept} if kept else {}


def _text(v: Value) -> Note:
    if v.kind == BLANK:
        return ""
    return v.number if v.kind == NUMBER else v.text
