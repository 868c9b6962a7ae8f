"""A chart as plain data: what it plots, from which cells, where it sits (layout is data).

The renderer turns a :class:`ChartPlan` into a native chart part; every series
reads a column range of the workbook, so the chart follows a refresh. Rows and
columns are 0-based, as in :mod:`sheetfit.sheets.plan`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..a1 import area

__all__ = ["CHART_KINDS", "LOOKS", "ChartPlan", "Series", "Span", "nice_bounds"]

#: "scatter": x-y points and lines; "column": vertical bars over categories.
CHART_KINDS = ("scatter", "column")

#: How a series is drawn: "markers" (points only), "line" (a line, no markers),
#: "reference" (a thin dashed grey line: a zero line, the 45° line), "bars" (columns).
LOOKS = ("markers", "line", "reference", "bars")


@dataclass(frozen=True)
class Span:
    """Rows ``first`` … ``last`` of one column of a sheet."""

    sheet: str
    col: int
    first: int
    last: int

    def ref(self) -> str:
        """Absolute reference, e.g. 'sf a charts'!$N$5:$N$40."""
        return area(self.sheet, self.first, self.col, self.last, self.col)


@dataclass(frozen=True)
class Series:
    """One plotted series: its name, y values and x values (or categories of a column chart)."""

    name: str
    y: Span
    x: Span | None = None
    look: str = "markers"
    in_legend: bool = True

    def __post_init__(self) -> None:
        if self.look not in LOOKS:
            raise ValueError(f"unknown series look {self.look!r}")


@dataclass(frozen=True)
class ChartPlan:
    """One chart: kind, titles, series, the cell its top-left corner sits on, size in pixels."""

    kind: str
    title: str
    x_title: str
    y_title: str
    series: tuple[Series, ...]
    anchor: tuple[int, int]
    size: tuple[int, int] = (960, 640)
    #: Axis bounds (x min, x max, y min, y max) set at refresh time, None = the engine's
    #: own; a chart over data far from zero is read better without the zero baseline.
    bounds: tuple[float | None, float | None, float | None, float | None] = (
        None, None, None, None)

    def __post_init__(self) -> None:
        if self.kind not in CHART_KINDS:
            raise ValueError(f"unknown chart kind {self.kind!r}")
        if not self.series:
            raise ValueError(f"chart {self.title!r} has no series")

    @property
    def legend(self) -> bool:
        """A legend only when more than one series is named in it (no chart junk)."""
        return sum(1 for s in self.series if s.in_legend) > 1


def nice_bounds(values: Sequence[float] | np.ndarray) -> tuple[float | None, float | None]:
    """Round axis bounds around ``values`` (steps of 1, 2 or 5 × a power of ten, about ten
    steps over the range); (None, None) when there is nothing to bound."""
    import math

    vals = np.asarray(values, dtype=np.float64)
    vals = vals[np.isfinite(vals)]
    if not vals.size:
        return None, None
    lo, hi = float(vals.min()), float(vals.max())
    span = hi - lo or abs(hi) or 1.0
    raw = span / 10
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 5, 10) if m * power >= raw)
    return math.floor(lo / step) * step, math.ceil(hi / step) * step
