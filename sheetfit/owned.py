"""What sheetfit owns in a user's workbook: sheet names, output names, the owned-sheet marker.

One place for the conventions that the reader (declarations), the sheet planner
and the grafter must agree on, including the one rule for "this defined name is
sheetfit's" (:func:`is_ours`).
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from typing import Protocol

from .a1 import quote_sheet

__all__ = [
    "FORECAST_SHEET",
    "INDEX_SHEET",
    "INPUTS_SHEET",
    "INPUT_ROLES",
    "LOG_SHEET",
    "MARKER_NAME",
    "MAX_TAG",
    "OUTPUT_ROLES",
    "PREFIX",
    "SHEET_KINDS",
    "NameLike",
    "is_ours",
    "sheet_title",
    "split_name",
]

#: Every declaration and output name starts with this prefix (case-insensitive).
PREFIX = "sf_"

#: Roles a user declares: response, attributes, rows to predict, settings, the
#: identifier columns of the data rows (``key``) and of the rows to predict (``newkey``),
#: and the coefficients of the rule in use today (``rule``, least squares).
INPUT_ROLES = ("y", "x", "new", "opts", "key", "newkey", "rule")

#: Roles sheetfit writes; replaced on every refresh, never read as declarations.
#: "z" … "means" locate what the charts read: standard units of the used rows (``z``),
#: the confusion matrix counts, the leave-one-out error cell (``loo``), and the strip
#: curve's centres and means.
OUTPUT_ROLES = ("coef", "fitted", "resid", "pred", "se", "robust", "predlow", "predhigh",
                "z", "confusion", "loo", "centres", "means")

#: Hidden sheet-scoped defined name marking a sheet as sheetfit's own. A marker
#: name survives a LibreOffice re-save (docs/engine-facts.md, P2).
MARKER_NAME = "_sheetfit_owned"

#: Title of the one index sheet per book.
INDEX_SHEET = "sf index"

#: Per-book sheets that keep the book's history: what each declared range held when last
#: fitted (``sheetfit check`` compares), the refresh log and the forecast register. The
#: log and the register are carried forward from the previous refresh, never rewritten.
INPUTS_SHEET = "sf inputs"
LOG_SHEET = "sf log"
FORECAST_SHEET = "sf forecasts"

#: Owned sheet kinds and the word used in their titles.
SHEET_KINDS = {
    "coef": "coef",
    "fitted": "fitted",
    "resid": "resid",
    "std": "std",
    "nbrs": "nbrs",
    "summary": "summary",
    "strip": "strip",
    "about": "about",
    "audit": "audit",
    "charts": "charts",
}

#: Longest model tag, so every owned sheet title stays within 31 characters.
MAX_TAG = 20

_NAME_RE = re.compile(r"^sf_(?P<tag>[A-Za-z0-9_]+)_(?P<role>[A-Za-z0-9]+)$", re.IGNORECASE)


def sheet_title(tag: str, kind: str) -> str:
    """Title of an owned sheet for a model tag and a kind ('coef', 'fitted', 'resid')."""
    return f"sf {tag} {SHEET_KINDS[kind]}"


def split_name(name: str) -> tuple[str, str] | None:
    """Split ``sf_<tag>_<role>`` into (tag, role lower-cased); None if it is not of that shape."""
    m = _NAME_RE.match(name)
    if not m:
        return None
    return m.group("tag"), m.group("role").lower()


class NameLike(Protocol):
    """What :func:`is_ours` reads of a defined name (the reader's ``DefinedName`` has it)."""

    @property
    def name(self) -> str: ...
    @property
    def text(self) -> str: ...
    @property
    def local_sheet_id(self) -> int | None: ...


def _refers_to(text: str, titles: Iterable[str]) -> bool:
    """Whether a name's formula text points into one of the sheets titled ``titles``."""
    low = text.lower()
    for t in titles:
        for form in {quote_sheet(t), "'" + t.replace("'", "''") + "'"}:
            if form.lower() + "!" in low:
                return True
    return False


def is_ours(d: NameLike, owned: Sequence[str], removed_idx: set[int]) -> bool:
    """A name sheetfit wrote last time: scoped to an owned sheet, or an output name into one.

    ``owned`` are the titles of the owned sheets, ``removed_idx`` their 0-based
    positions (what ``localSheetId`` refers to). An output name that reads #REF!
    (its owned sheet was deleted by hand) is ours too: it points nowhere and is
    replaced by the fresh one. The grafter and the declarations both use this rule.
    """
    if d.local_sheet_id is not None:
        return d.local_sheet_id in removed_idx
    parts = split_name(d.name)
    if parts is None or parts[1] not in OUTPUT_ROLES:
        return False
    return _refers_to(d.text, owned) or "#REF!" in d.text.upper()
