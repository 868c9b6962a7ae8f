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
from ..fit._sums import exact_dot, exact_sum
from ..fit.inference import LEVERAGE_ONE
from ..vectors import Lazy
from .columns import template, this_row
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
    flags: Lazy  # the flags of each row, in words ("" for none)
    loo_rmse: float | str


def plan_influence(rs: SheetPlan, h: np.ndarray, resid: np.ndarray | Lazy, sd_ref: str,
                   sd_value: float | None, exact_ref: str, n: int, p: int,
                   amount: str = "num") -> RowColumns:
    """Add leverage, studentized residual, Cook's D, PRESS and flags to the residual sheet.

    ``h`` are the leverages, ``resid`` the residual cells' cached values, ``sd_ref`` /
    ``sd_value`` the residual SD cell on the coefficient sheet and its cached value (None
    when it reads n/a or the fit is exact, as the cell ``exact_ref`` says: then no row has
    a studentized residual). The columns are made a block of rows at a time as the sheet
    is written (``sheetfit.vectors.Lazy``), each with the same element-wise operations as
    its formula.
    """
    rcol = rs.columns["resid"]
    c0 = rs.last_col() + 2
    lev_c, st_c, ck_c, pr_c, fl_c = c0, c0 + 1, c0 + 2, c0 + 3, c0 + 4
    heads = ["leverage h", "studentized residual", "Cook's distance",
             "leave-one-out residual e/(1−h)", "flags"]
    for k, head in enumerate(heads):
        rs.put(3, c0 + k, head, style="head")
    cook_lim, lev_lim = 4 / n, 2 * p / n
    R = col_letter(rcol + 1)
    L, S, C = (col_letter(c + 1) for c in (lev_c, st_c, ck_c))
    h = np.asarray(h, dtype=float)[:n]
    all_ok = bool((h < LEVERAGE_ONE).all())
    all_st = all_ok and sd_value is not None

    def rows(a: int, b: int) -> tuple[np.ndarray, ...]:
        """(ok, has a studentized residual, studentized, Cook's, e/(1−h)) of rows a..b-1."""
        hb = h[a:b]
        e = np.asarray(resid[a:b], dtype=float)
        ok = hb < LEVERAGE_ONE
        one_minus = np.where(ok, 1 - hb, 1.0)
        pr_num = e / one_minus  # the same operations as e / (1 - h), row by row
        if sd_value is not None:
            st_num = e / (sd_value * np.sqrt(one_minus))
            ck_num = st_num * st_num * hb / (p * one_minus)
        else:
            st_num = ck_num = np.zeros(b - a)
        return ok, ok & (sd_value is not None), st_num, ck_num, pr_num

    def column(k: int, have: int, every: bool) -> Lazy:
        """Item ``k`` of ``rows`` as a column: numbers when every row has one (the
        writer's fast path), else a list with blanks as empty text, which is what the
        formula gives there."""
        if every:
            return Lazy(n, lambda a, b: rows(a, b)[k])

        def make(a: int, b: int) -> list[float | str]:
            got = rows(a, b)
            return [float(x) if on else "" for x, on in zip(got[k].tolist(),
                                                            got[have].tolist(), strict=True)]
        return Lazy(n, make, None)

    def flag_words(a: int, b: int) -> list[str]:
        _, has_st, st_num, ck_num, _ = rows(a, b)
        out_ = has_st & (np.abs(st_num) > STUDENT_LIMIT)
        infl_ = has_st & (ck_num > cook_lim)
        high = h[a:b] > lev_lim
        return [", ".join(w for w, on in (("outlier", x), ("influential", y),
                                          ("high leverage", z)) if on)
                for x, y, z in zip(out_.tolist(), infl_.tolist(), high.tolist(), strict=True)]

    st, ck, pr = column(2, 1, all_st), column(3, 1, all_st), column(4, 0, all_ok)
    flags = Lazy(n, flag_words, None)
    r = this_row
    rs.run(lev_c, FIRST_ROW, h, style="z")
    rs.run(st_c, FIRST_ROW, st, template(
        f"=IF(OR({L}", r, f">=1-{_ONE},{exact_ref}=\"yes\",NOT(ISNUMBER({sd_ref}))),\"\",",
        f"{R}", r, f"/({sd_ref}*SQRT(1-{L}", r, ")))"), "dec2")
    rs.run(ck_c, FIRST_ROW, ck, template(
        f"=IF({S}", r, f'="","",{S}', r, f"*{S}", r, f"*{L}", r, f"/({p}*(1-{L}", r, ")))"), "z")
    rs.run(pr_c, FIRST_ROW, pr, template(
        f"=IF({L}", r, f'>=1-{_ONE},"",{R}', r, f"/(1-{L}", r, "))"), amount)
    lim = f"{STUDENT_LIMIT:g}"
    big_s = (f"AND(ISNUMBER({S}", r, f"),ABS(N({S}", r, f"))>{lim})")
    big_c = (f"AND(ISNUMBER({C}", r, f"),N({C}", r, f")>4/{n})")
    rs.run(fl_c, FIRST_ROW, flags, template(
        "=IF(", *big_s, ',"outlier","")',
        "&IF(", *big_c, ",IF(", *big_s, ',", ","")&"influential","")',
        f"&IF({L}", r, f">2*{p}/{n},IF(OR(", *big_s, ",", *big_c, '),", ","")&"high leverage","")'),
        "flag")
    last = FIRST_ROW + n
    rs.put(last + 1, lev_c - 1, "sum of leverages (= p)", style="label")
    lev_sum = exact_sum(h)
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
    if all_ok:
        loo = math.sqrt(exact_dot(pr, pr) / n)
    rs.widths.update({lev_c: 11, st_c: 13, ck_c: 12, pr_c: 16, fl_c: 30})
    return RowColumns(lev_c, st_c, ck_c, pr_c, fl_c, flags, loo)
