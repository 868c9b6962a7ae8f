"""The audit sheet of a least-squares model: rows whose actual is beyond the expectation.

The expectation is the fitted value; the threshold is fixed before the fit (setting
``threshold``: an amount, or a multiple of the residual SD). Each listed row carries
three columns for the auditor (explanation, corroboration, conclusion) that a refresh
puts back beside the same row, found by its identity (the ``key`` identifiers, else the
sheet row), and notes on rows no longer listed are kept below rather than dropped.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..a1 import absolute, col_letter
from ..carry import AUDIT_NOTES, HEAD_ROW, IDENTITY_HEAD
from ..declare.model import ModelData
from ..owned import sheet_title
from .plan import SheetPlan

__all__ = ["Threshold", "audit_caution", "plan_audit", "row_identity"]


@dataclass(frozen=True)
class Threshold:
    """An amount, or a multiple of the residual SD (``per_sd``)."""

    value: float
    per_sd: bool

    def words(self) -> str:
        return (f"{self.value:g} × residual SD" if self.per_sd else f"{self.value:,.6g}")


def row_identity(model: ModelData, i: int) -> str:
    """How a data row is known across refreshes: its identifiers, else its sheet row."""
    if model.keys is not None:
        parts = []
        for v in model.keys.row(i):
            parts.append("" if v is None else f"{v:g}" if isinstance(v, float) else str(v))
        if any(parts):
            return " · ".join(parts)
    return f"row {model.y.row_of(i)}"


def audit_caution(threshold: float, half_width: float, level: float) -> str | None:
    """Warn when a typical prediction interval is wider than the threshold."""
    if math.isfinite(half_width) and half_width > threshold:
        return (f"the {level:.0%} prediction interval (about ± {half_width:,.4g}) is wider than "
                f"the audit threshold ({threshold:,.4g}): differences of the size the test looks "
                "for are within the model's ordinary error, so it cannot reliably find them")
    return None


def plan_audit(model: ModelData, obs_refs: list[str], fit_refs: list[str],
               fitted: np.ndarray, threshold: Threshold, sd_ref: str, sd: float | None,
               half_width: float, level: float) -> SheetPlan:
    """Plan the audit sheet: threshold, listed rows with the auditor's columns, kept notes."""
    tag = model.tag
    s = SheetPlan(sheet_title(tag, "audit"))
    s.put(0, 0, f"Rows beyond the expectation — model {tag}", style="title")
    s.put(1, 0, ("The expectation is each row's fitted value; a row is listed when its actual "
                 "differs by more than the threshold fixed before the fit. The three columns on "
                 "the right are yours: a refresh keeps them beside the same row."), style="note")
    thr = threshold.value * sd if threshold.per_sd and sd is not None else (
        math.nan if threshold.per_sd else threshold.value)
    s.put(2, 0, "threshold", style="label")
    if threshold.per_sd:
        s.put(2, 1, thr if math.isfinite(thr) else "n/a",
              f'=IF(ISNUMBER({sd_ref}),{threshold.value!r}*{sd_ref},"n/a")', "num")
    else:
        s.put(2, 1, thr, style="num")
    s.put(2, 2, f"setting threshold: {threshold.words()}", style="note")
    thr_ref = absolute(2, 1)
    keys = model.keys
    key_heads = [] if keys is None else [c.name for c in keys.columns]
    heads = ([IDENTITY_HEAD, "data row"] + key_heads
             + ["actual", "expected", "difference", "beyond the threshold"] + list(AUDIT_NOTES))
    head_row = HEAD_ROW - 1
    for c, h in enumerate(heads):
        s.put(head_row, c, h, style="head")
    a_col = 2 + len(key_heads)
    notes_col = a_col + 4
    kept = dict(model.kept.get("audit", {}))
    r = head_row + 1
    caution = audit_caution(thr, half_width, level) if math.isfinite(thr) else None
    listed = 0
    for i, idx in enumerate(model.used):
        actual, expected = float(model.Y[i]), float(fitted[i])
        diff = actual - expected
        if not (math.isfinite(thr) and abs(diff) > thr):
            continue
        ident = row_identity(model, int(idx))
        s.put(r, 0, ident)
        s.put(r, 1, int(model.y.row_of(int(idx))), style="int")
        if keys is not None:
            for j, kc in enumerate(keys.columns):
                v = keys.values[j][int(idx)]
                cell = kc.cell(int(idx))
                s.put(r, 2 + j, "" if v is None else v, f'=IF(ISBLANK({cell}),"",{cell})',
                      "num" if isinstance(v, float) else "text")
        a = r + 1
        A, E, D = (f"{col_letter(a_col + k + 1)}{a}" for k in (0, 1, 2))
        s.put(r, a_col, actual, f"={obs_refs[i]}", "num")
        s.put(r, a_col + 1, expected, f"={fit_refs[i]}", "num")
        s.put(r, a_col + 2, diff, f"={A}-{E}", "num")
        s.put(r, a_col + 3, "yes", f'=IF(ABS({D})>{thr_ref},"yes","no")')
        for k, text in enumerate(kept.pop(ident, [""] * len(AUDIT_NOTES))):
            s.put(r, notes_col + k, text, style="num" if isinstance(text, float) else "text")
        r += 1
        listed += 1
    if listed == 0:
        s.put(r, 0, "(no row is beyond the threshold)", style="note")
        r += 1
    if kept:  # notes on rows no longer listed: kept, never dropped
        r += 1
        s.put(r, 0, "notes kept from earlier refreshes on rows no longer beyond the threshold",
              style="label")
        r += 1
        for ident, texts in kept.items():
            s.put(r, 0, ident)
            for k, text in enumerate(texts):
                s.put(r, notes_col + k, text, style="num" if isinstance(text, float) else "text")
            r += 1
    if caution:
        s.put(r + 1, 0, caution, style="caution")
    s.widths = {0: 22, 1: 9, notes_col: 30, notes_col + 1: 30, notes_col + 2: 30}
    s.freeze = (HEAD_ROW, 1)
    return s
