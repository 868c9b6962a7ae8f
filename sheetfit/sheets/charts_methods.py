"""Which charts each method family draws, as ChartPlans on the model's charts sheet.

Every plotted range is a helper column on the charts sheet (``charts.ChartSheet``)
whose formulas read the user's data cells or the cells behind the model's output
names; cached values are the cached values of the cells they read. What is drawn:

- least squares, one attribute: the data and the fitted line (a polynomial: 41 points
  evenly spaced over the plotted x range); several attributes: observed against fitted
  with the 45° line;
- least squares, neighbour mean, strip mean: residuals against fitted values with a
  zero line (leave-one-out fitted values for neighbour and strip models);
- neighbour mean: observed against leave-one-out fitted, with the 45° line;
- strip mean: the data and the graph of averages (strip means at the centres);
- neighbour vote: with two attributes the rows in standard units, one series per class;
  always the confusion matrix as columns.

Residuals in row order need to know the rows are dated; ModelData carries no date
information, so that chart is not drawn (README, "The charts sheet").
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ..a1 import absolute
from ..declare.model import ModelData
from ..fit.inference import intervals
from ..fit.leastsq import LeastSquaresResult
from ..fit.neighbours import NeighbourMeanResult, NeighbourVoteResult
from ..fit.results import Fitted
from ..fit.strip import StripMeanResult
from ..labels import label_text, labels_equal
from .chartplan import Series, Span, nice_bounds
from .charts import (
    HELPER_HEAD,
    NA,
    ChartSheet,
    Located,
    copy_cells,
    data_cells,
    extreme,
    extremes,
    numbers,
    sample_rows,
    suffix,
)
from .plan import Planned, Scalar, SheetPlan

__all__ = ["least_squares_charts", "neighbour_mean_charts", "neighbour_vote_charts",
           "strip_charts"]

#: Points of a fitted polynomial curve (a straight line needs 2).
CURVE_POINTS = 41




def _pick(items: Sequence[object], rows: list[int]) -> list:  # type: ignore[type-arg]
    return [items[i] for i in rows]


def _data(board: ChartSheet, model: ModelData, rows: list[int]) -> tuple[Span, list[Span]]:
    """Helper columns of the plotted rows' observed y and attribute values (user cells)."""
    idx = [int(model.used[i]) for i in rows]
    y = board.column(f"{model.y.name} (observed)",
                     data_cells([model.y.cell(i) for i in idx], [model.Y[i] for i in rows]))
    xs = [board.column(c.name, data_cells([c.value_ref(i) for i in idx],
                                          [model.X[i, j] for i in rows]))
          for j, c in enumerate(model.xs)]
    return y, xs


def _residual_chart(board: ChartSheet, model: ModelData, loc: Located, rows: list[int],
                    fitted_word: str) -> tuple[Span, list[tuple[str, Scalar]]]:
    """Residuals against fitted values with a zero line; returns the fitted span and cells."""
    tag, yname = model.tag, model.y.name
    fit_cells = loc.column(f"sf_{tag}_fitted")
    res_cells = loc.column(f"sf_{tag}_resid")
    fit = board.column(f"{fitted_word} {yname}", copy_cells(_pick(fit_cells, rows)))
    res = board.column("residual", copy_cells(_pick(res_cells, rows)))
    whole = loc.range_text(f"sf_{tag}_fitted")
    values = extremes(fit_cells.values)  # the column's smallest and largest only
    zx = board.column("zero line x", [extreme("MIN", [whole], values),
                                      extreme("MAX", [whole], values)])
    zy = board.column("zero line y", [(None, 0), (None, 0)])
    board.gap()
    board.chart("scatter", f"{yname}: residuals against {fitted_word} values"
                + suffix(len(model.used)), f"{fitted_word} {yname}",
                "residual (observed − fitted)",
                [Series("residual", res, fit, "markers"),
                 Series("zero", zy, zx, "reference", in_legend=False)],
                bounds=(*nice_bounds(values), None, None))
    if model.keys is not None:
        _row_order(board, model, res, rows)
    return fit, _pick(fit_cells, rows)


def _row_order(board: ChartSheet, model: ModelData, res: Span, rows: list[int]) -> None:
    """Residuals in the rows' sheet order, when the rows carry identifiers (a month, a job
    number): a drift over time or along the list shows as a slope or a run of one sign."""
    yname = model.y.name
    sheet_rows = [float(model.y.row_of(int(model.used[i]))) for i in rows]
    at = board.column("data row", [(None, v) for v in sheet_rows])
    zx = board.column("zero line x (rows)", [(None, sheet_rows[0]), (None, sheet_rows[-1])])
    zy = board.column("zero line y (rows)", [(None, 0), (None, 0)])
    board.gap()
    ids = ", ".join(c.name for c in model.keys.columns) if model.keys is not None else ""
    board.chart("scatter", f"{yname}: residuals in row order" + suffix(len(model.used)),
                f"data row (sheet order of {ids})", "residual (observed − fitted)",
                [Series("residual", res, at, "markers"),
                 Series("zero", zy, zx, "reference", in_legend=False)],
                bounds=(*nice_bounds(sheet_rows), None, None))


def _diagonal(board: ChartSheet, model: ModelData, loc: Located, obs: Span,
              obs_values: Sequence[float], fitted_word: str, rows: list[int]) -> None:
    """Observed against fitted with the 45° line (observed = fitted)."""
    tag, yname = model.tag, model.y.name
    fit_cells = loc.column(f"sf_{tag}_fitted")
    fit = board.column(f"{fitted_word} {yname}", copy_cells(_pick(fit_cells, rows)))
    whole = loc.range_text(f"sf_{tag}_fitted")
    values = np.concatenate([extremes(fit_cells.values), extremes(obs_values)])
    ends = board.column("45° line", [extreme("MIN", [whole, obs.ref()], values),
                                     extreme("MAX", [whole, obs.ref()], values)])
    board.gap()
    lo, hi = nice_bounds(values)  # the same on both axes: the 45° line is diagonal
    board.chart("scatter", f"{yname}: observed against {fitted_word}"
                + suffix(len(model.used)), f"{fitted_word} {yname}", f"observed {yname}",
                [Series("rows", obs, fit, "markers"),
                 Series("observed = fitted", ends, ends, "reference")],
                bounds=(lo, hi, lo, hi))


def least_squares_charts(model: ModelData, fitted: Fitted[LeastSquaresResult],
                         planned: Planned) -> list[SheetPlan]:
    res = fitted.result
    loc = Located(planned)
    n = len(model.used)
    rows, _ = sample_rows(n)
    board = ChartSheet.new(model, n)
    obs, xs = _data(board, model, rows)
    obs_values = [float(model.Y[i]) for i in rows]
    if len(model.xs) == 1:
        _line(board, model, res, loc, obs, xs[0], rows)
    else:
        _diagonal(board, model, loc, obs, obs_values, "fitted", rows)
    _residual_chart(board, model, loc, rows, "fitted")
    return [board.sheet]


def _line(board: ChartSheet, model: ModelData, res: LeastSquaresResult, loc: Located,
          obs: Span, x: Span, rows: list[int]) -> None:
    """The data and the fitted line or curve over the plotted x range."""
    degree, intercept = int(res.degree_), bool(res.intercept_)
    coef = loc.column(f"sf_{model.tag}_coef")
    xv = [float(model.X[i, 0]) for i in rows]
    lo, hi = min(xv), max(xv)
    g = 2 if degree == 1 else CURVE_POINTS
    lo_f, hi_f = f"MIN({x.ref()})", f"MAX({x.ref()})"
    grid = [(f"={lo_f}+({hi_f}-{lo_f})*{k}/{g - 1}", lo + (hi - lo) * k / (g - 1))
            for k in range(g)]
    gx = board.column(f"{model.xs[0].name} (line)", grid)
    cells: list[tuple[str | None, Scalar]] = []
    for k, (_, xk) in enumerate(grid):
        xref = board.cell(gx, k)
        parts, value = [], 0.0
        first = True
        if intercept:
            parts.append(coef[0][0])
            value = float(coef[0][1])  # type: ignore[arg-type]
            first = False
        for d in range(1, degree + 1):
            ref, c = coef[d - 1 + int(intercept)]
            term = xref if d == 1 else f"{xref}^{d}"
            parts.append(f"{ref}*{term}")
            tv = float(xk) if d == 1 else float(xk) ** d  # type: ignore[arg-type]
            prod = float(c) * tv  # type: ignore[arg-type]
            value = prod if first else value + prod
            first = False
        cells.append(("=" + "+".join(parts), value))
    gy = board.column(f"fitted {model.y.name} (line)", cells)
    series = [Series("data", obs, x, "markers"), Series(f"fitted {shape_of(degree)}", gy, gx,
                                                       "line")]
    ys = [float(model.Y[i]) for i in rows] + numbers([v for _, v in cells]).tolist()
    band = _band(board, model, res, lo, hi)
    if band is not None:
        bx, blo, bhi, level, values = band
        series += [Series(f"range for one new value ({level:.0%})", blo, bx, "reference"),
                   Series("high end", bhi, bx, "reference", in_legend=False)]
        ys += values
    board.gap()
    board.chart("scatter", f"{model.y.name} against {model.xs[0].name}: data and fitted "
                f"{shape_of(degree)}" + suffix(len(model.used)), model.xs[0].name,
                model.y.name, series, bounds=(*nice_bounds(xv), *nice_bounds(ys)))


def shape_of(degree: int) -> str:
    return "line" if degree == 1 else f"curve (degree {degree})"


#: Points across the plotted x range at which the prediction band is drawn.
BAND_POINTS = 21


def _band(board: ChartSheet, model: ModelData, res: LeastSquaresResult, lo: float,
          hi: float) -> tuple[Span, Span, Span, float, list[float]] | None:
    """The range for one new value across the plotted x range (values computed at refresh:
    prediction ± t · residual SD · √(1 + leverage), as on the fitted-value sheet)."""
    if res.df_resid_ <= 0 or hi <= lo:
        return None
    level = float(model.settings.values.get("level", 0.95))
    grid = np.linspace(lo, hi, BAND_POINTS)
    iv = intervals(res, grid.reshape(-1, 1), level)
    if not (np.all(np.isfinite(iv.obs_lo)) and np.all(np.isfinite(iv.obs_hi))):
        return None
    bx = board.column(f"{model.xs[0].name} (range)", [(None, float(v)) for v in grid])
    blo = board.column(f"one new value: low ({level:.0%})",
                       [(None, float(v)) for v in iv.obs_lo])
    bhi = board.column(f"one new value: high ({level:.0%})",
                       [(None, float(v)) for v in iv.obs_hi])
    return bx, blo, bhi, level, [float(v) for v in iv.obs_lo] + [float(v) for v in iv.obs_hi]


def neighbour_mean_charts(model: ModelData, fitted: Fitted[NeighbourMeanResult],
                          planned: Planned) -> list[SheetPlan]:
    loc = Located(planned)
    n = len(model.used)
    rows, _ = sample_rows(n)
    board = ChartSheet.new(model, n)
    idx = [int(model.used[i]) for i in rows]
    obs_values = [float(model.Y[i]) for i in rows]
    obs = board.column(f"{model.y.name} (observed)",
                       data_cells([model.y.cell(i) for i in idx], obs_values))
    _diagonal(board, model, loc, obs, obs_values, "leave-one-out fitted", rows)
    _residual_chart(board, model, loc, rows, "leave-one-out fitted")
    return [board.sheet]


def strip_charts(model: ModelData, fitted: Fitted[StripMeanResult],
                 planned: Planned) -> list[SheetPlan]:
    res = fitted.result
    loc = Located(planned)
    n = len(model.used)
    rows, _ = sample_rows(n)
    board = ChartSheet.new(model, n)
    obs, xs = _data(board, model, rows)
    board.gap()
    centres = board.column("centre", copy_cells(loc.column(f"sf_{model.tag}_centres")))
    means = board.column(f"strip mean of {model.y.name}",
                         copy_cells(loc.column(f"sf_{model.tag}_means")))
    board.gap()
    xv = [float(model.X[i, 0]) for i in rows]
    ys = [float(model.Y[i]) for i in rows] + numbers(
        loc.column(f"sf_{model.tag}_means").values).tolist()
    board.chart("scatter", f"{model.y.name} against {model.xs[0].name}: data and strip means "
                f"(width {res.width_:g})" + suffix(n), model.xs[0].name, model.y.name,
                [Series("data", obs, xs[0], "markers"),
                 Series("strip mean", means, centres, "line")],
                bounds=(*nice_bounds(xv), *nice_bounds(ys)))
    _residual_chart(board, model, loc, rows, "leave-one-out fitted")
    return [board.sheet]


def neighbour_vote_charts(model: ModelData, fitted: Fitted[NeighbourVoteResult],
                          planned: Planned) -> list[SheetPlan]:
    res = fitted.result
    loc = Located(planned)
    n = len(model.used)
    rows, _ = sample_rows(n)
    board = ChartSheet.new(model, n)
    classes = list(res.classes_.tolist())
    yname = model.y.name
    if len(model.xs) == 2 and loc.has(f"sf_{model.tag}_z"):
        z = loc.block(f"sf_{model.tag}_z")
        on = bool(res.scaling_.on)
        unit = "z " if on else ""
        zx = board.column(f"{unit}{model.xs[0].name}", copy_cells([z[i][0] for i in rows]))
        labels = [res.y_[i] for i in rows]
        idx = [int(model.used[i]) for i in rows]
        series = []
        for cls in classes:
            hdr = absolute(HELPER_HEAD, board.col)  # the header holds the class for EXACT
            cells: list[tuple[str | None, Scalar]] = []
            for k, i in enumerate(rows):
                ref, v = z[i][1]
                cells.append((f"=IF(EXACT({model.y.cell(idx[k])},{hdr}),{ref},NA())",
                              v if labels_equal(labels[k], cls) else NA))
            span = board.column(cls, cells)
            series.append(Series(label_text(cls), span, zx, "markers"))
        board.gap()
        where = "standard units" if on else "their own units"
        board.chart("scatter", f"{yname} by {model.xs[0].name} and {model.xs[1].name}, "
                    f"in {where}" + suffix(n), f"{unit}{model.xs[0].name}",
                    f"{unit}{model.xs[1].name}", series)
    if loc.has(f"sf_{model.tag}_confusion"):
        block = loc.block(f"sf_{model.tag}_confusion")
        cats = board.column(f"actual {yname}", [(None, c) for c in classes], "text")
        series = [Series(f"predicted {label_text(cls)}",
                         board.column(f"predicted {label_text(cls)}",
                                      [(f"={block[a][b][0]}", block[a][b][1])
                                       for a in range(len(classes))], "int"),
                         cats, "bars")
                  for b, cls in enumerate(classes)]
        board.gap()
        board.chart("column", f"{yname}: leave-one-out predictions by actual class",
                    f"actual {yname}", "rows", series)
    return [board.sheet]
