"""The index sheet (one row per model, links to every sheet, the cautions of each model)
and what every model's sheets get once planned: status line, cautions, widths, links back.
"""

from __future__ import annotations

from ..a1 import quote_sheet
from ..owned import INDEX_SHEET
from ..summary import ModelSummary
from ..words import plural
from .common import GENERAL_CAUTIONS, check_cell, column_notes, plan_cautions
from .plan import SheetPlan

__all__ = ["GENERAL_CAUTIONS", "back_link", "finish_model_sheets", "link_to", "plan_index"]


def link_to(title: str, cell: str = "A1") -> str:
    """The internal hyperlink target of a cell on sheet ``title``."""
    return f"{quote_sheet(title)}!{cell}"


def _status(m: ModelSummary) -> str:
    said = (f"{plural(len(m.cautions), 'caution')} for this fit, listed at the bottom of "
            "this sheet and on the index" if m.cautions else "no caution for this fit's data")
    return f"Status: {m.status}; {said}."


def finish_model_sheets(sheets: list[SheetPlan], m: ModelSummary) -> None:
    """What every model's sheets get after planning, whatever the method.

    The first sheet: the status line where its planner reserved it (``status_cell``),
    and at the bottom this fit's cautions, the method's standing cautions and the general
    ones. Every sheet: column widths fitted to its headers, and a link back to the index.
    """
    if not sheets:
        return
    first = sheets[0]
    if first.status_cell is not None:
        first.put(*first.status_cell, _status(m), style="label")
    row = first.last_row() + 2
    if m.cautions:
        row = plan_cautions(first, row, m.cautions, "Cautions for this fit")
    plan_cautions(first, row, [*m.standing, *GENERAL_CAUTIONS],
                  f"Read with care: what a {m.title} model is")
    for s in sheets:
        s.fit_columns()
        back_link(s)


def back_link(s: SheetPlan) -> None:
    """A link to the index in the title row, to the right of the title text."""
    title = s.value_at(0, 0)
    need = (len(str(title)) * 1.2 + 2) if title is not None else 0
    col, x = 0, 0.0
    while x < need or not s.is_free(0, col):
        x += s.widths.get(col, 8.43)
        col += 1
    s.put(0, col, "◀ index", style="link", link=link_to(INDEX_SHEET))


def plan_index(summaries: list[ModelSummary], refreshed: str, version: str) -> SheetPlan:
    """Plan the index sheet for every model of the book."""
    s = SheetPlan(INDEX_SHEET)
    s.put(0, 0, "sheetfit — models in this workbook", style="title")
    s.put(1, 0, f"Refreshed {refreshed} by sheetfit {version}. Sheets whose names start with "
          "'sf ' are sheetfit's: they are replaced on every refresh, so keep your own work "
          "elsewhere.", style="note")
    heads = ["model", "method", "response", "attributes", "rows used", ("check: rows on the "
             "fitted sheet"), "rows left out", "new rows", "refreshed (UTC)", "tool version",
             "input fingerprint", "status", "cautions"]
    for c, h in enumerate(heads):
        s.put(3, c, h, style="head")
    for i, m in enumerate(summaries):
        r = 4 + i
        fitted = quote_sheet(next((t for t in m.sheets if t.endswith(" fitted")),
                                  m.sheets[1] if len(m.sheets) > 1 else INDEX_SHEET))
        s.put(r, 0, m.tag, style="link", link=link_to(m.sheets[0]) if m.sheets else None)
        s.put(r, 1, m.title)
        s.put(r, 2, m.response)
        s.put(r, 3, ", ".join(m.attributes))
        s.put(r, 4, m.n_used, f"=COUNT({fitted}!$A$5:$A${4 + m.n_used})", "int")
        formula, verdict = check_cell(f"E{r + 1}-{m.n_used}", 0.0, 0.5)
        s.put(r, 5, verdict, formula, "verdict")
        s.put(r, 6, m.n_left_out, style="int")
        s.put(r, 7, m.n_new, style="int")
        s.put(r, 8, refreshed)
        s.put(r, 9, version)
        s.put(r, 10, m.fingerprint)
        s.put(r, 11, m.status)
        s.put(r, 12, f"{len(m.cautions)}, listed below" if m.cautions else "none", style=(
            "flag" if m.cautions else "text"))
    column_notes(s, {5: "holds when the fitted sheet lists every row used"})
    r = 4 + len(summaries) + 1
    s.put(r, 0, "The sheets of each model (click to open; each sheet links back here)",
          style="label")
    r += 1
    for m in summaries:
        s.put(r, 0, m.tag, style="label")
        for j, t in enumerate(m.sheets):
            s.put(r, 1 + j, t, style="link", link=link_to(t))
        r += 1
    r += 1
    for m in summaries:
        if m.cautions:
            r = plan_cautions(s, r, m.cautions, f"Cautions for model {m.tag} (this fit)")
        r = plan_cautions(s, r, m.standing, f"Model {m.tag}: what a {m.title} model is")
    plan_cautions(s, r, GENERAL_CAUTIONS, "Cautions for every model")
    s.widths = {0: 14, 1: 14, 2: 16, 3: 24, 8: 22, 10: 18, 12: 16}
    s.freeze = (4, 1)
    s.pages_wide = 1
    return s
