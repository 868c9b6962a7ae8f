"""The documentation sheet of a model (``sf <model> about``): what the user says about the
model, kept across refreshes, and what sheetfit says about the last fit.

The first block has one row per ``ASKED`` item; what is typed in columns B to H of those
rows is read back before the refresh replaces the sheet and written again, value for
value (text as text, numbers as numbers). Rows are found by their label in column A, so
a later version may add items without losing any. Everything below is sheetfit's.
"""

from __future__ import annotations

from typing import Any

from ..declare.model import ModelData
from ..owned import sheet_title
from ..reader.values import BookValues
from ..settings import Settings
from ..sheets.plan import SheetPlan
from ..summary import ModelSummary
from ..words import plural
from ._grid import Plain, read_rows

__all__ = ["ASKED", "KEPT_COLS", "USER_ROW", "plan_about", "read_about"]

#: What the user is asked to fill in, in order (labels in column A).
ASKED = ("purpose", "data source", "owner", "assumptions and limits")
#: Columns (1-based, B..H) of the asked rows whose content is kept.
KEPT_COLS = range(2, 9)
#: Sheet row (1-based) of the first asked item.
USER_ROW = 5

UserCells = dict[str, list[Plain]]


def read_about(values: BookValues, tag: str) -> UserCells:
    """Label -> the values in columns B..H of that row, from the owned sheet of ``tag``."""
    out: UserCells = {}
    rows = read_rows(values, sheet_title(tag, "about"), USER_ROW, max(KEPT_COLS))
    for row in rows[: len(ASKED) + 10]:
        label = row[0]
        if isinstance(label, str) and label in ASKED:
            out[label] = row[1:]
    return out


def _setting(v: Any) -> str:
    if isinstance(v, bool):
        return "yes" if v else "no"
    if v is None:
        return "not set"
    if isinstance(v, float):
        return f"{v:g}"
    if isinstance(v, tuple):
        return " ".join(_setting(p) for p in v)
    return str(v)


def _settings(st: Settings, names: list[str]) -> tuple[str, str]:
    given = ", ".join(f"{n} {_setting(st[n])}" for n in names if n in st.given) or "none"
    used = ", ".join(f"{n} {_setting(st[n])}" for n in names)
    return given, used


def plan_about(model: ModelData, summary: ModelSummary, rule_names: list[str],
               kept: UserCells, last_log: str, outcome: str) -> SheetPlan:
    s = SheetPlan(sheet_title(model.tag, "about"))
    s.put(0, 0, f"About model {model.tag}", style="title")
    s.put(1, 0, ("Fill in column B of the rows below (columns B to H of these rows are kept at "
                 "every refresh; the rest of this sheet is rewritten)."), style="note")
    s.put(USER_ROW - 2, 0, "item", style="head")
    s.put(USER_ROW - 2, 1, "in your words", style="head")
    for i, label in enumerate(ASKED):
        r = USER_ROW - 1 + i
        s.put(r, 0, label, style="label")
        for c, v in zip(KEPT_COLS, kept.get(label, [])):
            if v is not None:
                s.put(r, c - 1, v)
    r = USER_ROW - 1 + len(ASKED) + 1
    s.put(r, 0, "written by sheetfit", style="head")
    s.put(r, 1, "", style="head")
    given, used = _settings(model.settings, rule_names)
    left = [f"row {lo.sheet_row}: {lo.reason}" for lo in model.left_out[:5]]
    more = len(model.left_out) - len(left)
    facts = [
        ("method", summary.title),
        ("response", summary.response),
        ("attributes", ", ".join(summary.attributes)),
        ("settings as given", given),
        ("settings as used", used),
        ("rows used", plural(summary.n_used, "row")),
        ("rows left out", (plural(summary.n_left_out, "row") + (": " + "; ".join(left) if left
                                                                 else "")
                           + (f"; {more} more on the fitted sheet" if more > 0 else ""))),
        ("new rows", plural(summary.n_new, "row")),
        ("key figures", "; ".join(summary.figures[:2]) or "none"),
        ("input fingerprint", summary.fingerprint),
        ("last refresh", last_log),
        ("forecasts", outcome or "no forecast with an identifier has an actual yet"),
    ]
    for k, (label, text) in enumerate(facts):
        s.put(r + 1 + k, 0, label, style="label")
        s.put(r + 1 + k, 1, text)
    r += len(facts) + 2
    s.put(r, 0, "cautions", style="label")
    for k, text in enumerate(summary.cautions or ["none for this fit"]):
        s.put(r + k, 1, text, style="caution")
    r += max(1, len(summary.cautions)) + 1
    s.put(r, 1, ("These results support, and do not replace, your organisation's policies and "
                 "the professional judgement of the preparer and the reviewer."), style="note")
    s.widths = {0: 24, 1: 80}
    return s
