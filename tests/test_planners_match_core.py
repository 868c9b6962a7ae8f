"""Every method: the numbers the planned sheets carry are the numeric core's (no engine needed).

The sheet planners lay out formulas; the cached value of each fitted value, residual,
prediction and summary figure must be the result object's own number. Neighbour and
strip results are computed the way their formulas are, so those cells must equal the
result exactly. A least-squares fitted value is cached as its formula evaluates it
(coefficient cells times term cells, left to right), which differs from the result's
correctly rounded ``fitted_`` only by the rounding of that evaluation; the bound used
is the standard one for a sum of p products (each rounding at most eps/2 relative,
Higham, *Accuracy and Stability of Numerical Algorithms*, ch. 3 — stated from memory),
taken generously as (p + 2) · eps · Σ|coefficient × term|.

Every book here is invented test data (seeded).
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from books import invoices, jobs, make_book

from sheetfit.a1 import col_index
from sheetfit.declare.model import ModelData, find_models
from sheetfit.fit.results import Fitted
from sheetfit.labels import labels_equal
from sheetfit.methods import REGISTRY
from sheetfit.reader.package import open_package
from sheetfit.refresh import _values, fit_model, plan_book
from sheetfit.sheets.plan import BookPlan, Cell, SheetPlan

EPS = float(np.finfo(float).eps)

# ----------------------------------------------------------------------- invented books


def _strip_rows(n: int, seed: int) -> list[list[Any]]:
    rng = np.random.default_rng(seed)
    x = np.round(rng.uniform(0, 50, n), 1)
    return [["cost", "crew"]] + [[float(3 + 2 * v + rng.normal(0, 2)), float(v)] for v in x]


def _book(tmp_path: Path, name: str, rows: list[list[Any]], opts: list[list[Any]],
          new: list[list[Any]] | None = None, xcols: str = "B:C") -> Path:
    a, b = xcols.split(":")
    last = len(rows)
    sheets: dict[str, Any] = {"Data": rows, "Opts": [["setting", "value"]] + opts}
    names = {"sf_m_y": f"Data!$A$1:$A${last}", "sf_m_x": f"Data!${a}$1:${b}${last}",
             "sf_m_opts": f"Opts!$A$1:$B${len(opts) + 1}"}
    if new is not None:
        sheets["New"] = new
        names["sf_m_new"] = f"New!$A$1:${chr(64 + len(new[0]))}${len(new)}"
    return make_book(tmp_path / f"{name}.xlsx", sheets, names)


CASES: dict[str, tuple[Any, ...]] = {
    "least squares, two attributes": (jobs(30, 3), [], [["hours", "km"], [10.0, 20.0],
                                                         [45.0, 5.0]]),
    "least squares, cubic": ([r[:2] for r in jobs(25, 4)], [["degree", 3]],
                             [["hours"], [20.0], [60.0]], "B:B"),
    "least squares, no intercept": (jobs(12, 5), [["intercept", "no"]], None),
    "neighbour mean, k chosen": (jobs(40, 7), [["method", "neighbour_mean"]],
                                 [["hours", "km"], [12.0, 30.0], [35.0, 5.0]]),
    "neighbour mean, raw units": (jobs(30, 8), [["method", "neighbour_mean"], ["k", 4],
                                                 ["standard_units", "no"]], None),
    "neighbour vote, focus": (invoices(40, 11), [["method", "neighbour_vote"],
                                                  ["focus", "late"]],
                              [["amount", "past delay"], [2500.0, 20.0], [900.0, 2.0],
                               [4000.0, 15.0]]),
    "neighbour vote, numeric classes": (invoices(80, 13, numeric=True),
                                        [["method", "neighbour_vote"], ["k", 5]],
                                        [["amount", "past delay"], [100.0, 3.0]]),
    "strip mean, distinct grid": (_strip_rows(25, 25), [["method", "strip_mean"],
                                                        ["width", 2.5]],
                                  [["crew"], [10.0], [49.9], [-3.0], [60.0]], "B:B"),
    "strip mean, even grid": (_strip_rows(260, 260), [["method", "strip_mean"],
                                                      ["width", 2.5]],
                              [["crew"], [10.0], [49.9]], "B:B"),
    "strip mean, sparse": ([["cost", "crew"]] + [[float(i), float(i * 10)] for i in range(8)],
                           [["method", "strip_mean"], ["width", 3]],
                           [["crew"], [15.0], [34.0]], "B:B"),
}


def _planned(tmp_path: Path, case: str) -> tuple[ModelData, Fitted[Any], BookPlan]:
    rows, opts, new, *xcols = CASES[case]
    p = _book(tmp_path, "b", rows, opts, new, *xcols)
    pkg = open_package(p)
    with _values(pkg, p) as values:
        (model,) = find_models(pkg, values, p.name, REGISTRY)
    fitted = fit_model(model)
    plan, _ = plan_book([(model, fitted)], "2026-01-01 00:00:00 UTC")
    return model, fitted, plan


# ------------------------------------------------------------------- reading the plan

_RANGE = re.compile(r"^(?:'((?:[^']|'')+)'|([^!]+))!\$([A-Z]+)\$(\d+)(?::\$([A-Z]+)\$(\d+))?$")


def _cells(plan: BookPlan, title: str) -> dict[tuple[int, int], Cell]:
    sheet = next(s for s in plan.sheets if s.title == title)
    return {(c.row, c.col): c for c in sheet.cells}


def _column(plan: BookPlan, name: str) -> list[Any]:
    """Cached values of the cells an output name points at (one column), top to bottom."""
    text = dict(plan.names)[name]
    m = _RANGE.match(text)
    assert m, text
    title = (m.group(1) or "").replace("''", "'") or m.group(2)
    col = col_index(m.group(3)) - 1
    r1 = int(m.group(4)) - 1
    r2 = int(m.group(6)) - 1 if m.group(6) else r1
    cells = _cells(plan, title)
    return [cells[(r, col)].value for r in range(r1, r2 + 1)]


def _figure(plan: BookPlan, title: str, label: str, offset: int = 1) -> Any:
    """The cached value beside a label cell on a sheet (the first such label)."""
    sheet: SheetPlan = next(s for s in plan.sheets if s.title == title)
    at = next(c for c in sheet.cells if c.value == label and c.formula is None)
    return _cells(plan, title)[(at.row, at.col + offset)].value


def _numbers(values: list[Any]) -> np.ndarray:
    """Cached numbers, with a blank ("") as nan (the result's mark for 'no value')."""
    return np.array([math.nan if v == "" else float(v) for v in values])


def _same(values: list[Any], expected: np.ndarray) -> None:
    got = _numbers(values)
    assert got.shape == expected.shape
    assert np.array_equal(got, expected, equal_nan=True), (got, expected)


# ------------------------------------------------------------------------------ checks


def _least_squares(model: ModelData, fitted: Fitted[Any], plan: BookPlan) -> None:
    res = fitted.result
    assert np.array_equal(_numbers(_column(plan, "sf_m_coef")), res.coef_)
    terms = np.abs(res.design_ * res.coef_).sum(axis=1)
    bound = (res.p_ + 2) * EPS * terms
    got = _numbers(_column(plan, "sf_m_fitted"))
    assert np.all(np.abs(got - res.fitted_) <= bound)
    r_bound = bound + EPS * np.abs(res.y_)
    resid = _numbers(_column(plan, "sf_m_resid"))
    assert np.all(np.abs(resid - res.resid_) <= r_bound)
    # RMSE is a norm over √n, so it moves at most by the largest residual difference.
    title = f"sf {model.tag} coef"
    assert abs(_figure(plan, title, "RMSE") - res.rmse_) <= r_bound.max()
    assert _figure(plan, title, "rows used (n)") == res.n_
    assert _figure(plan, title, "parameters (p)") == res.p_
    cells = _cells(plan, title)
    head = next(c for c in cells.values() if c.value == "relevant range")
    m = 1 if res.degree_ > 1 else len(res.names_)
    ranges = [[cells[(head.row + 2 + j, c)].value for c in (1, 2)] for j in range(m)]
    assert ranges == np.column_stack([res.x_min_, res.x_max_]).tolist()
    # R² = 1 − ssr/tss: ssr moves by at most 2‖r‖‖Δr‖ + ‖Δr‖².
    dr = float(np.linalg.norm(r_bound))
    d_ssr = 2 * float(np.linalg.norm(res.resid_)) * dr + dr * dr
    label = "R² (uncentred)" if res.r2_uncentred_ else "R²"
    assert abs(_figure(plan, title, label) - res.r2_) <= d_ssr / res.tss_ + 4 * EPS
    if model.new is not None:
        expected = res.predict(model.new.X)
        new_design = np.column_stack(
            ([np.ones(model.new.n)] if res.intercept_ else [])
            + ([model.new.X[:, 0] ** k for k in range(1, res.degree_ + 1)] if res.degree_ > 1
               else list(model.new.X.T)))
        nb = (res.p_ + 2) * EPS * np.abs(new_design * res.coef_).sum(axis=1)
        assert np.all(np.abs(_numbers(_column(plan, "sf_m_pred")) - expected) <= nb)


def _neighbour_mean(model: ModelData, fitted: Fitted[Any], plan: BookPlan) -> None:
    res = fitted.result
    _same(_column(plan, "sf_m_fitted"), res.fitted_)
    _same(_column(plan, "sf_m_resid"), res.resid_)
    title = f"sf {model.tag} summary"
    assert _figure(plan, title, "RMSE") == res.rmse_
    assert _figure(plan, title, "SD of y") == res.y_sd_
    assert _figure(plan, title, "rows used (n)") == res.n_
    assert _figure(plan, title, "k (neighbours)") == res.k_
    _neighbours_sheet(model, fitted, plan)
    if model.new is not None:
        _same(_column(plan, "sf_m_pred"), fitted.new.value)


def _neighbour_vote(model: ModelData, fitted: Fitted[Any], plan: BookPlan) -> None:
    res = fitted.result
    got = _column(plan, "sf_m_fitted")
    assert len(got) == res.n_ and all(labels_equal(a, b) for a, b in zip(got, res.fitted_))
    title = f"sf {model.tag} summary"
    # the sheet's formula is 1 − right/n; the result divides the wrong ones by n
    assert abs(_figure(plan, title, "error rate") - res.error_rate_) <= 2 * EPS
    assert _figure(plan, title, "k (neighbours)") == res.k_
    cells = _cells(plan, title)
    head = next(c for c in cells.values()
                if isinstance(c.value, str) and c.value.startswith("confusion matrix"))
    classes = res.classes_.tolist()
    C = len(classes)
    for a in range(C):
        r = head.row + 1 + a
        assert labels_equal(cells[(r, 0)].value, classes[a])
        assert [cells[(r, 1 + b)].value for b in range(C)] == res.confusion_[a].tolist()
        assert cells[(r, 2 + C)].value == res.base_rate_[a]
        rec = cells[(r, 3 + C)].value
        assert (math.isnan(res.recall_[a]) and rec == "n/a") or rec == res.recall_[a]
    prec = [cells[(head.row + 2 + C, 1 + b)].value for b in range(C)]
    assert all((math.isnan(e) and g == "n/a") or g == e for g, e in zip(prec, res.precision_))
    _neighbours_sheet(model, fitted, plan)
    if model.new is not None:
        pred = _column(plan, "sf_m_pred")
        assert all(labels_equal(a, b) for a, b in zip(pred, fitted.new.value))


def _neighbours_sheet(model: ModelData, fitted: Fitted[Any], plan: BookPlan) -> None:
    """Neighbour rows and distances of every data row are the result's, in its order."""
    res = fitted.result
    cells = _cells(plan, f"sf {model.tag} nbrs")
    k = res.k_
    for i in range(res.n_):
        r = 4 + i
        rows = [cells[(r, 1 + m)].value for m in range(k)]
        assert rows == [model.y.row_of(int(model.used[j])) for j in res.neighbours_[i]]
        assert [cells[(r, 1 + k + m)].value for m in range(k)] == res.distances_[i].tolist()
    z = _cells(plan, f"sf {model.tag} std")
    m = len(model.xs)
    assert [z[(3, 1 + j)].value for j in range(m)] == res.X_mean_.tolist()
    assert [z[(4, 1 + j)].value for j in range(m)] == res.X_sd_.tolist()
    assert [[z[(6 + i, 1 + m + j)].value for j in range(m)] for i in range(res.n_)] \
        == res.Z_.tolist()


def _strip_mean(model: ModelData, fitted: Fitted[Any], plan: BookPlan) -> None:
    res = fitted.result
    _same(_column(plan, "sf_m_fitted"), res.fitted_)
    _same(_column(plan, "sf_m_resid"), res.resid_)
    title = f"sf {model.tag} strip"
    cells = _cells(plan, title)
    g = len(res.centres_)
    # the curve table sits under the answer block: found by its header
    head = next(c for c in cells.values() if c.value == "centre no." and c.style == "head")
    table = [[cells[(head.row + 1 + j, c)].value for c in (1, 2, 3, 4)] for j in range(g)]
    assert [t[0] for t in table] == res.centres_.tolist()
    assert [t[1] for t in table] == res.count_.tolist()
    assert [t[2] for t in table] == res.sum_.tolist()
    _same([t[3] for t in table], res.mean_)
    assert _figure(plan, title, "rows with a fitted value") == res.n_fitted_
    rmse = _figure(plan, title, "RMSE (leave-one-out)")
    assert rmse == (res.rmse_ if res.n_fitted_ else "n/a")
    if model.new is not None:
        _same(_column(plan, "sf_m_pred"), np.asarray(fitted.new, dtype=float))


_CHECKS = {"least_squares": _least_squares, "neighbour_mean": _neighbour_mean,
           "neighbour_vote": _neighbour_vote, "strip_mean": _strip_mean}


def test_every_method_is_covered() -> None:
    """A new method in the registry needs its own check here (and a case below)."""
    assert set(_CHECKS) == set(REGISTRY)
    used = {next((v for k, v in c[1] if k == "method"), "least_squares") for c in CASES.values()}
    assert used == set(REGISTRY)


@pytest.mark.parametrize("case", list(CASES))
def test_planned_numbers_are_the_results(tmp_path: Path, case: str) -> None:
    """Fitted values, residuals, predictions and summary figures on the sheets = the core's."""
    model, fitted, plan = _planned(tmp_path, case)
    _CHECKS[model.settings.method](model, fitted, plan)
