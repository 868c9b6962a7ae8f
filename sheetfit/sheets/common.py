"""Pieces every model's sheets share: the left-out list, the residual sheet, label text."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from ..declare.model import ModelData
from ..owned import sheet_title
from .plan import SheetPlan

__all__ = ["FIRST_ROW", "fsum_sq", "plan_left_out", "plan_residual_sheet"]

#: Row (0-based) of the first data row on row-by-row sheets (fitted, residual, neighbours).
FIRST_ROW = 4


def fsum_sq(v: Sequence[float] | np.ndarray) -> float:
    """Sum of squares, exactly rounded (what SUMSQ gives up to rounding)."""
    return math.fsum(float(a) * float(a) for a in v)


def plan_left_out(sheet: SheetPlan, model: ModelData, col: int) -> None:
    """List the data rows left out of the fit, with the reason, from column ``col``."""
    if not model.left_out:
        return
    sheet.put(3, col, "left-out data row", style="head")
    sheet.put(3, col + 1, "why it was left out of the fit", style="head")
    for i, lo in enumerate(model.left_out):
        sheet.put(FIRST_ROW + i, col, lo.sheet_row, style="int")
        sheet.put(FIRST_ROW + i, col + 1, lo.reason)
    sheet.widths[col + 1] = 44


def plan_residual_sheet(model: ModelData, fitted_ref: Sequence[str], fitted: np.ndarray,
                        resid: np.ndarray, note: str) -> SheetPlan:
    """The residual sheet: observed, fitted (from another sheet), observed − fitted.

    ``fitted`` and ``resid`` are the cached values (nan where the row has no fitted value,
    which the sheet shows blank).
    """
    y = model.y
    rs = SheetPlan(sheet_title(model.tag, "resid"))
    rs.put(0, 0, f"Residuals — model {model.tag}", style="title")
    rs.note(1, 0, note)
    for c, h in enumerate(["data row", f"{y.name} (observed)", f"fitted {y.name}", "residual"]):
        rs.put(3, c, h, style="head")
    for i, idx in enumerate(model.used):
        r = FIRST_ROW + i
        rs.put(r, 0, int(y.row_of(int(idx))), style="int")
        rs.put(r, 1, float(model.Y[i]), f"={y.cell(int(idx))}", "num")
        f, e = float(fitted[i]), float(resid[i])
        blank = math.isnan(f)
        rs.put(r, 2, "" if blank else f, f"={fitted_ref[i]}", "num")
        rs.put(r, 3, "" if blank else e, f'=IF(C{r + 1}="","",B{r + 1}-C{r + 1})', "num")
    rs.widths = {0: 9, 3: 16}
    rs.freeze = (FIRST_ROW, 1)
    rs.columns.update({"observed": 1, "fitted": 2, "resid": 3})
    return rs
