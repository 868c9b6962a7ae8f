"""Per data row of a least-squares fit: leverage, studentized residual, Cook's distance, PRESS.

The columns go to the right of the residual sheet. Leverage is written as computed
(QR of the design; the note says how to check one by hand); the rest are formulas on
the residual and leverage cells, their cached values computed here in the formulas'
order from the cached values they read.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..a1 import col_letter
from ..fit.inference import LEVERAGE_ONE, Influence
from .common import FIRST_ROW
from .plan import SheetPlan

__all__ = ["STUDENT_LIMIT", "RowColumns", "plan_influence"]

#: Flag limits (common practice; e.g. Weisberg, Applied Linear Regression, ch. 9):
#: |studentized residual| above 3, Cook's distance above 4/n, leverage above 2p/n.
STUDENT_LIMIT = 3.0
_ONE = "1E-10"  # 1 − LEVERAGE_ONE as the formulas write it


@dataclass(frozen=True)
class RowColumns:
    """Where the per-row columns are and what they hold (cached values)."""

    lev_col: int
    student_col: int
    cooks_col: int
    press_col: int
    flag_col: int
    press: list[float | None]
    flags: list[str]
    loo_rmse: float | str


def plan_influence(rs: SheetPlan, infl: Influence, resid: np.ndarray, sd_ref: str,
                   sd_value: float | None, exact_ref: str, n: int, p: int,
                   amount: str = "num") -> RowColumns:
    """Add leverage, studentized residual, Cook's D, PRESS and flags to the residual sheet.

    ``resid`` are the residual cells' cached values, ``sd_ref``/``sd_value`` the residual
    SD cell on the coefficient sheet and its cached value (None when it reads n/a or the
    fit is exact, as the cell ``exact_ref`` says: then no row has a studentized residual).
    """
    rcol = rs.columns["resid"]
    c0 = max(c.col for c in rs.cells) + 2
    lev_c, st_c, ck_c, pr_c, fl_c = c0, c0 + 1, c0 + 2, c0 + 3, c0 + 4
    heads = ["leverage h", "studentized residual", "Cook's distance",
             "leave-one-out residual e/(1−h)", "flags"]
    for k, head in enumerate(heads):
        rs.put(3, c0 + k, head, style="head")
    cook_lim, lev_lim = 4 / n, 2 * p / n
    press: list[float | None] = []
    flags: list[str] = []
    R = col_letter(rcol + 1)
    L, S, C = (col_letter(c + 1) for c in (lev_c, st_c, ck_c))
    for i in range(n):
        r = FIRST_ROW + i
        a = r + 1
        h = float(infl.leverage[i])
        rs.put(r, lev_c, h, style="z")
        e = float(resid[i])
        guard = f'IF({L}{a}>=1-{_ONE},"",'
        st: float | str = ""
        ck: float | str = ""
        pr: float | str = ""
        if h < LEVERAGE_ONE:
            pr = e / (1 - h)
            if sd_value is not None:
                st = e / (sd_value * math.sqrt(1 - h))
                ck = st * st * h / (p * (1 - h))
        rs.put(r, st_c, st,
               f'=IF(OR({L}{a}>=1-{_ONE},{exact_ref}="yes",NOT(ISNUMBER({sd_ref}))),"",'
               f'{R}{a}/({sd_ref}*SQRT(1-{L}{a})))', "dec2")
        rs.put(r, ck_c, ck, f'=IF({S}{a}="","",{S}{a}*{S}{a}*{L}{a}/({p}*(1-{L}{a})))', "z")
        rs.put(r, pr_c, pr, f"={guard}{R}{a}/(1-{L}{a}))", amount)
        words = []
        if isinstance(st, float) and abs(st) > STUDENT_LIMIT:
            words.append("outlier")
        if isinstance(ck, float) and ck > cook_lim:
            words.append("influential")
        if h > lev_lim:
            words.append("high leverage")
        flag = ", ".join(words)
        rs.put(r, fl_c, flag, (
            f'=IF(AND(ISNUMBER({S}{a}),ABS(N({S}{a}))>{STUDENT_LIMIT:g}),"outlier","")'
            f'&IF(AND(ISNUMBER({C}{a}),N({C}{a})>4/{n}),IF(AND(ISNUMBER({S}{a}),'
            f'ABS(N({S}{a}))>{STUDENT_LIMIT:g}),", ","")&"influential","")'
            f'&IF({L}{a}>2*{p}/{n},IF(OR(AND(ISNUMBER({S}{a}),ABS(N({S}{a}))>{STUDENT_LIMIT:g}),'
            f'AND(ISNUMBER({C}{a}),N({C}{a})>4/{n})),", ","")&"high leverage","")'), "flag")
        press.append(pr if isinstance(pr, float) else None)
        flags.append(flag)
    last = FIRST_ROW + n
    rs.put(last + 1, lev_c - 1, "sum of leverages (= p)", style="label")
    lev_sum = math.fsum(float(v) for v in infl.leverage)
    rs.put(last + 1, lev_c, lev_sum, f"=SUM({L}{FIRST_ROW + 1}:{L}{last})", "z")
    rs.put(last + 2, lev_c - 1, "check (|sum − p| < 1e-9)", style="label")
    rs.put(last + 2, lev_c, "holds" if abs(lev_sum - p) < 1e-9 else "FAILS",
           f'=IF(ABS({L}{last + 2}-{p})<1E-9,"holds","FAILS")', "verdict")
    rs.note(last + 4, lev_c - 1, (
        f"Flags: outlier when |studentized residual| > {STUDENT_LIMIT:g}; influential when "
        f"Cook's distance > 4/n = {4 / n:.4g}; high leverage when h > 2p/n = {2 * p / n:.4g} "
        "(common practice). Leverage hᵢ = xᵢᵀ(XᵀX)⁻¹xᵢ is computed by sheetfit (QR of the "
        "design); the leverages add up to p. The studentized residual is e/(s·√(1−h)), "
        "Cook's distance its square × h/(p·(1−h)), and the leave-one-out residual e/(1−h) "
        "is what the row's prediction would miss by if the row were left out of the fit."),
        width=90)
    loo: float | str = "n/a"
    if all(v is not None for v in press):
        loo = math.sqrt(math.fsum(v * v for v in press if v is not None) / n)
    rs.widths.update({lev_c: 11, st_c: 13, ck_c: 12, pr_c: 16, fl_c: 30})
    return RowColumns(lev_c, st_c, ck_c, pr_c, fl_c, press, flags, loo)
