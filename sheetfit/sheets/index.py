"""The index sheet: one row per model, when and how it was refreshed, and the cautions."""

from __future__ import annotations

from ..owned import INDEX_SHEET, sheet_title
from ..summary import ModelSummary
from .plan import SheetPlan

__all__ = ["GENERAL_CAUTIONS", "plan_index"]

#: Cautions that hold for every fit (common practice in cost and audit work).
GENERAL_CAUTIONS = (
    ("A fitted line describes the data between the smallest and largest attribute values "
     "seen; outside that range it is an extrapolation."),
    "Correlation is not cause: a good fit does not show that the attribute drives the response.",
    "In-sample error understates forecast error; residuals on these sheets are in-sample.",
    "A relationship holds only while the business it describes stays the same.",
    ("These fits support, and do not replace, your organisation's policies and the "
     "professional judgement of the preparer and the reviewer."),
)


def plan_index(summaries: list[ModelSummary], refreshed: str, version: str) -> SheetPlan:
    """Plan the index sheet for every model of the book."""
    s = SheetPlan(INDEX_SHEET)
    s.put(0, 0, "sheetfit — models in this workbook", style="title")
    s.note(1, 0, f"Refreshed {refreshed} by sheetfit {version}. Sheets whose names start with "
           "'sf ' are sheetfit's: they are replaced on every refresh, so keep your own work "
           "elsewhere.")
    heads = ["model", "method", "response", "attributes", "rows used", "rows left out",
             "new rows", "refreshed (UTC)", "tool version", "input fingerprint", "status",
             "cautions"]
    for c, h in enumerate(heads):
        s.put(3, c, h, style="head")
    for i, m in enumerate(summaries):
        r = 4 + i
        fitted = f"'{sheet_title(m.tag, 'fitted')}'"
        s.put(r, 0, m.tag, style="label")
        s.put(r, 1, m.title)
        s.put(r, 2, m.response)
        s.put(r, 3, ", ".join(m.attributes))
        s.put(r, 4, m.n_used, f"=COUNT({fitted}!$A$5:$A${4 + m.n_used})", "int")
        s.put(r, 5, m.n_left_out, style="int")
        s.put(r, 6, m.n_new, style="int")
        s.put(r, 7, refreshed)
        s.put(r, 8, version)
        s.put(r, 9, m.fingerprint)
        s.put(r, 10, m.status)
        s.put(r, 11, f"{len(m.cautions)}, listed below" if m.cautions else "none")
    r = 4 + len(summaries) + 1
    s.put(r, 0, "model", style="head")
    s.put(r, 1, "caution for this model", style="head")
    r += 1
    for m in summaries:
        for text in m.cautions:
            s.put(r, 0, m.tag, style="label")
            s.put(r, 1, text, style="caution")
            r += 1
    r += 1
    s.put(r, 0, "Cautions for every model", style="label")
    for k, text in enumerate(GENERAL_CAUTIONS):
        s.put(r + 1 + k, 0, text, style="caution")
    s.widths = {0: 14, 1: 14, 2: 16, 3: 24, 7: 22, 9: 18, 11: 16}
    s.freeze = (4, 1)
    return s
