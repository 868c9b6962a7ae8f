"""The forecast register (``sf forecasts``): forecasts of identified new rows, and how they
turned out once a later refresh finds the actual value among the data rows.

A refresh registers each new row of a model that declares identifiers for its new rows
(``newkey``) and whose method gives numeric forecasts: when (UTC), model, identifier,
forecast, and the prediction interval for one new value with its level when the method
gives one (least squares: at the model's ``level`` setting). A later refresh that finds the identifier among the model's used data rows
records the actual value there, once; the sheet then shows error = actual − forecast,
error % = error / |actual|, and whether the actual fell inside the interval, as formulas.
Rows are carried forward like the log, the newest ``REGISTER_CAP`` kept.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..a1 import cell_ref
from ..declare.model import ModelData
from ..owned import FORECAST_SHEET
from ..reader.values import BookValues
from ..sheets.plan import SheetPlan
from ._grid import Plain, read_rows
from .log import key_text

__all__ = ["REGISTER_CAP", "Forecast", "Outcomes", "outcomes", "plan_forecasts",
           "read_forecasts", "register"]

#: Forecasts the register keeps: the newest, oldest dropped first.
REGISTER_CAP = 500
_HEADS = ["forecast made (UTC)", "model", "identifier", "forecast", "interval low",
          "interval high", "level", "actual known (UTC)", "actual", "error (actual − forecast)",
          "error % of actual", "inside interval"]
_KEPT = 9  # columns A..I are the record; J..L are formulas of them


@dataclass
class Forecast:
    made: str
    model: str
    identifier: str
    forecast: float
    low: float | None = None
    high: float | None = None
    level: float | None = None
    known: str | None = None
    actual: float | None = None

    def cells(self) -> list[Plain]:
        return [self.made, self.model, self.identifier, self.forecast, self.low, self.high,
                self.level, self.known, self.actual]

    @property
    def error(self) -> float | None:
        return None if self.actual is None else self.actual - self.forecast

    @property
    def error_pct(self) -> float | None:
        e = self.error
        return None if e is None or self.actual in (None, 0) else e / abs(self.actual or 1)

    @property
    def inside(self) -> bool | None:
        if self.actual is None or self.low is None or self.high is None:
            return None
        return self.low <= self.actual <= self.high


def _f(v: Plain) -> float | None:
    return v if isinstance(v, float) else None


def read_forecasts(values: BookValues) -> list[Forecast]:
    """The register on the owned forecast sheet (the caller makes sure it is owned)."""
    out = []
    rows = read_rows(values, FORECAST_SHEET, 1, _KEPT)
    head = next((i for i, r in enumerate(rows) if r[0] == _HEADS[0]), len(rows))
    for r in rows[head + 1:]:
        if not (isinstance(r[0], str) and isinstance(r[1], str) and isinstance(r[3], float)):
            continue
        out.append(Forecast(r[0], r[1], str(r[2] or ""), r[3], _f(r[4]), _f(r[5]), _f(r[6]),
                            str(r[7]) if r[7] else None, _f(r[8])))
    return out


def _actuals(model: ModelData) -> dict[str, float]:
    """Identifier text -> response of each used data row (numeric responses only)."""
    if model.keys is None or model.Y.dtype == object:
        return {}
    out = {}
    for pos, i in enumerate(model.used):
        key = key_text(model.keys.row(int(i)))
        if key.strip(" /"):
            out[key] = float(model.Y[pos])
    return out


def register(previous: list[Forecast], entries: list[tuple[ModelData, Any]],
             stamp: str) -> list[Forecast]:
    """The register after this refresh: earlier forecasts (with actuals found now), then
    this refresh's forecasts; the newest REGISTER_CAP kept.

    ``entries`` are (model, the method's ``Forecasts`` or None) per model fitted now.
    """
    rows = [Forecast(**vars(f)) for f in previous]
    by_tag = {m.tag.casefold(): _actuals(m) for m, _ in entries}
    for f in rows:
        actuals = by_tag.get(f.model.casefold(), {})
        if f.actual is None and f.identifier in actuals:
            f.actual, f.known = actuals[f.identifier], stamp
    open_ = {(f.model.casefold(), f.identifier, f.forecast) for f in rows if f.actual is None}
    for model, fc in entries:
        if fc is None or model.new is None or model.new.keys is None:
            continue
        point, lo, hi, level = fc
        for i in range(model.new.n):
            key = key_text(model.new.keys.row(i))
            value = float(point[i])
            if not key.strip(" /") or not math.isfinite(value):
                continue
            if (model.tag.casefold(), key, value) in open_:
                continue  # the same forecast, still open: a repeated refresh adds nothing
            low = float(lo[i]) if lo is not None and np.isfinite(lo[i]) else None
            high = float(hi[i]) if hi is not None and np.isfinite(hi[i]) else None
            rows.append(Forecast(stamp, model.tag, key, value, low, high,
                                 level if low is not None else None))
    return rows[-REGISTER_CAP:]


@dataclass
class Outcomes:
    """The forecasts of one model whose actuals are known."""

    model: str
    known: list[Forecast] = field(default_factory=list)

    def sentence(self) -> str:
        n = len(self.known)
        if n == 0:
            return ""
        what = f"Of {n} forecast{'s' if n != 1 else ''} now known, "
        with_iv = [f for f in self.known if f.inside is not None]
        inside = sum(1 for f in with_iv if f.inside)
        levels = {f.level for f in with_iv if f.level is not None}
        level = f"{100 * levels.pop():g} %" if len(levels) == 1 else "recorded"
        if not with_iv:
            what += "none had a recorded interval"
        elif len(with_iv) == n:
            what += f"{_count(inside, n)} fell inside {'its' if n == 1 else 'their'} {level} interval"
        else:
            what += (f"{len(with_iv)} had a recorded {level} interval and "
                     f"{_count(inside, len(with_iv))} of those fell inside it")
        pct = [f.error_pct for f in self.known if f.error_pct is not None]
        if pct:
            avg = 100 * float(np.mean(pct))
            what += f"; the average error was {avg:+.1f} %"
            if round(avg, 1) != 0:
                what += f" (actuals {'above' if avg > 0 else 'below'} the forecasts)"
        return what + "."


def _count(k: int, n: int) -> str:
    return "all" if k == n and n > 1 else "none" if k == 0 else str(k)


def outcomes(rows: list[Forecast], tag: str) -> Outcomes:
    return Outcomes(tag, [f for f in rows if f.model.casefold() == tag.casefold()
                          and f.actual is not None])


def plan_forecasts(rows: list[Forecast], sentences: list[tuple[str, str]]) -> SheetPlan:
    """The register with its outcome formulas, under one sentence per model with outcomes."""
    s = SheetPlan(FORECAST_SHEET)
    s.put(0, 0, "sheetfit — forecasts and how they turned out", style="title")
    s.put(1, 0, ("Forecasts of new rows with identifiers, as made at each refresh; a later "
                 "refresh that finds the identifier among the data rows fills in the actual. "
                 f"The newest {REGISTER_CAP} forecasts are kept."), style="note")
    s.put(2, 0, ("Error = actual − forecast (positive: the actual came in above); error % is of "
                 "the actual. A few outcomes say little: judge a model on many, alongside your "
                 "organisation's own review."), style="note")
    s.put(3, 0, "Outcomes so far", style="label")
    r = 4
    for tag, text in sentences:
        s.put(r, 0, tag, style="label")
        s.put(r, 1, text)
        r += 1
    if not sentences:
        s.put(r, 0, "no forecast has an actual yet")
        r += 1
    head = r + 1
    for c, h in enumerate(_HEADS):
        s.put(head, c, h, style="head")
    for i, f in enumerate(rows):
        r = head + 1 + i
        for c, v in enumerate(f.cells()):
            if v is not None:
                s.put(r, c, v, style="pct" if c == 6 else "text")
        if f.actual is None:
            continue
        a, fc, lo, hi = (cell_ref(r + 1, c) for c in (9, 4, 5, 6))
        err = f.actual - f.forecast
        s.put(r, 9, err, f"={a}-{fc}")
        e = cell_ref(r + 1, 10)
        s.put(r, 10, "" if f.actual == 0 else err / abs(f.actual),
              f'=IF({a}=0,"",{e}/ABS({a}))', style="pct")
        inside = f.inside
        s.put(r, 11, "" if inside is None else "yes" if inside else "no",
              f'=IF(OR({lo}="",{hi}=""),"",IF(AND({a}>={lo},{a}<={hi}),"yes","no"))')
    s.widths = {0: 22, 1: 12, 2: 16, 7: 22, 9: 14, 10: 12}
    s.freeze = (head + 1, 3)
    return s
