"""Worksheet functions give the refresh's numbers on the example books, and error values.

The data are read from the example books' declared cells the way a host passes a range
(rows of cells, blanks as None, the header row included) and compared with
``refresh.fit_model(model)``: every number is compared exactly (``==``), since both
paths run the same numeric core on the same float64 values.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from sheetfit.declare.model import Column, ModelData, find_models
from sheetfit.fit.leastsq import LeastSquares
from sheetfit.functions import (
    NA,
    NUM,
    VALUE,
    fit_coefficients,
    fit_predict,
    fit_rmse,
    loo_error,
    neighbour_mean,
    neighbour_vote,
    standard_units_of,
    strip_means,
)
from sheetfit.methods import REGISTRY, Fitted
from sheetfit.reader.package import open_package
from sheetfit.reader.values import BLANK, NUMBER, BookValues
from sheetfit.refresh import _values, fit_model

BOOKS = Path(__file__).resolve().parent.parent / "example_books"
Grid = list[list[Any]]


class Case:
    """One declared model: its fit by the refresh path and its cells as a host passes them."""

    def __init__(self, model: ModelData, fitted: Fitted[Any], values: BookValues) -> None:
        self.model, self.fitted, self.res = model, fitted, fitted.result
        self.y = _cells([model.y], model.n_rows, values, header=True)
        self.x = _cells(model.xs, model.n_rows, values, header=True)
        self.new: Grid | None = None
        if model.new is not None:
            self.new = _cells(model.new.columns, model.new.n, values, header=False)

    def bare(self, grid: Grid) -> Grid:
        """The same cells without the header row."""
        return grid[1:]


def _cell(v: Any) -> Any:
    if v.kind == NUMBER:
        return v.number
    return None if v.kind == BLANK else v.text


def _cells(cols: list[Column], n: int, values: BookValues, header: bool) -> Grid:
    first = -1 if header else 0
    return [[_cell(values.sheet(c.sheet).get(c.row_of(i), c.col)) for c in cols]
            for i in range(first, n)]


@pytest.fixture(scope="module")
def cases() -> dict[str, Case]:
    out = {}
    for book in ("delivery_costs", "field_jobs", "open_invoices"):
        path = BOOKS / f"{book}.xlsx"
        pkg = open_package(path)
        with _values(pkg, path) as values:
            for model in find_models(pkg, values, path.name, REGISTRY):
                out[model.tag] = Case(model, fit_model(model), values)
    return out


def column(grid: Grid, j: int) -> list[Any]:
    return [r[j] for r in grid[1:]]


def used_rows(grid: Grid, case: Case) -> Grid:
    """The output rows of the data rows the fit used (the others are blank)."""
    rows = grid[1:]
    kept = set(case.model.used.tolist())
    assert all(all(v is None for v in r) for i, r in enumerate(rows) if i not in kept)
    return [rows[i] for i in case.model.used.tolist()]


# ---------------------------------------------------------------- least squares

@pytest.mark.parametrize("tag", ["route", "bykm"])
def test_coefficients_equal_the_refresh(cases: dict[str, Case], tag: str) -> None:
    c = cases[tag]
    assert c.model.left_out  # the 'n/a' row is passed in and left out, as in the refresh
    out = fit_coefficients(c.y, c.x)
    assert out[0] == ["term", "coefficient", "standard error"]
    assert column(out, 0) == c.res.terms_
    assert column(out, 0)[0] == "intercept"
    assert column(out, 1) == c.res.coef_.tolist()
    assert column(out, 2) == c.res.coef_se_.tolist()
    bare = fit_coefficients(c.bare(c.y), c.bare(c.x))
    assert [r[1:] for r in bare[1:]] == [r[1:] for r in out[1:]]
    assert column(bare, 0)[1:] == [f"x{j + 1}" for j in range(len(c.model.xs))]


def test_predictions_equal_the_refresh(cases: dict[str, Case]) -> None:
    c = cases["route"]
    assert c.new is not None and c.fitted.new is not None
    out = fit_predict(c.y, c.x, c.new)
    assert out[0] == ["prediction"]
    assert column(out, 0) == c.fitted.new.tolist()
    assert fit_predict(c.bare(c.y), c.bare(c.x), [["stops", "km driven"]] + c.new) == out


def test_prediction_rows_with_a_blank_stay_aligned(cases: dict[str, Case]) -> None:
    c = cases["route"]
    assert c.new is not None
    rows = [c.new[0], [None, 5.0], ["?", 3.0], c.new[1]]
    out = fit_predict(c.y, c.x, rows)
    assert column(out, 0) == [c.fitted.new[0], None, None, c.fitted.new[1]]


def test_degree_and_no_intercept_use_the_core(cases: dict[str, Case]) -> None:
    c = cases["bykm"]
    core = LeastSquares(intercept=False, degree=2).fit(c.model.X, c.model.Y,
                                                       names=c.model.attribute_names)
    out = fit_coefficients(c.y, c.x, intercept=False, degree=2.0)  # hosts pass floats
    assert column(out, 0) == ["km driven", "km driven^2"] == core.terms_
    assert column(out, 1) == core.coef_.tolist()


def test_rmse_least_squares_is_in_sample(cases: dict[str, Case]) -> None:
    c = cases["route"]
    out = fit_rmse(c.y, c.x)
    assert out == [["RMSE", "kind", "rows"], [c.res.rmse_, "in-sample", len(c.model.used)]]


# ---------------------------------------------------------------- strip mean

def test_strip_means_equal_the_curve(cases: dict[str, Case]) -> None:
    c = cases["byhours"]
    width = c.model.settings["width"]
    out = strip_means(c.y, c.x, width)
    assert out[0] == ["centre", "rows in strip", "strip mean"]
    assert column(out, 0) == c.res.centres_.tolist()
    assert column(out, 1) == c.res.count_.tolist()
    means = [None if math.isnan(v) else v for v in c.res.mean_.tolist()]
    assert column(out, 2) == means
    given = strip_means(c.bare(c.y), c.bare(c.x), width,
                        [["centre"]] + [[v] for v in c.res.centres_.tolist()] + [[None]])
    assert given[1:-1] == out[1:] and given[-1] == [None, None, None]


def test_strip_rmse_and_loo_error(cases: dict[str, Case]) -> None:
    c = cases["byhours"]
    width = c.model.settings["width"]
    assert fit_rmse(c.y, c.x, "strip_mean", width=width) == [
        ["RMSE", "kind", "rows"], [c.res.rmse_, "leave-one-out", c.res.n_fitted_]]
    assert loo_error(c.y, c.x, "strip_mean", width=width) == [
        ["width", "leave-one-out RMSE", "rows"], [width, c.res.rmse_, c.res.n_fitted_]]


def test_a_strip_with_no_rows_has_a_blank_mean() -> None:
    out = strip_means([[1.0], [2.0], [4.0]], [[0.0], [1.0], [2.0]], 0.5, [[1.0], [10.0]])
    assert out[1:] == [[1.0, 1, 2.0], [10.0, 0, None]]


# ---------------------------------------------------------------- neighbour mean

def test_neighbour_mean_of_new_rows_equals_the_refresh(cases: dict[str, Case]) -> None:
    c = cases["similar"]
    p = c.fitted.new
    assert c.new is not None and p is not None
    k = c.res.k_
    out = neighbour_mean(c.y, c.x, c.new, neighbours=True)
    assert out[0] == (["neighbour mean"] + [f"neighbour {j}" for j in range(1, k + 1)]
                      + [f"distance {j}" for j in range(1, k + 1)])
    assert column(out, 0) == p.value.tolist()
    assert [r[1:k + 1] for r in out[1:]] == (c.model.used[p.neighbours] + 1).tolist()
    assert [r[k + 1:] for r in out[1:]] == p.distances.tolist()
    assert neighbour_mean(c.bare(c.y), c.bare(c.x), c.new)[1:] == [r[:1] for r in out[1:]]


def test_neighbour_mean_leave_one_out_equals_the_refresh(cases: dict[str, Case]) -> None:
    c = cases["similar"]
    k = c.res.k_
    out = neighbour_mean(c.y, c.x, neighbours="yes")
    assert len(out) == c.model.n_rows + 1
    rows = used_rows(out, c)
    assert [r[0] for r in rows] == c.res.fitted_.tolist()
    assert [r[1:k + 1] for r in rows] == (c.model.used[c.res.neighbours_] + 1).tolist()
    assert [r[k + 1:] for r in rows] == c.res.distances_.tolist()


def test_neighbour_mean_rmse_and_k_table(cases: dict[str, Case]) -> None:
    c = cases["similar"]
    assert fit_rmse(c.y, c.x, "neighbour_mean") == [
        ["RMSE", "kind", "rows"], [c.res.rmse_, "leave-one-out", c.res.n_]]
    out = loo_error(c.y, c.x, "neighbour mean")
    assert out[0] == ["k", "leave-one-out RMSE", "chosen"]
    assert [tuple(r[:2]) for r in out[1:]] == c.res.k_table_
    assert [r[0] for r in out[1:] if r[2] == "yes"] == [c.res.k_]


def test_a_given_k_beyond_the_table_is_added() -> None:
    xs = [[float(i)] for i in range(40)]
    ys = [[float(i % 7)] for i in range(40)]
    out = loo_error(ys, xs, k=30)
    assert out[-1][0] == 30 and out[-1][2] == "yes" and len(out) == 1 + 25 + 1
    assert out[-1][1] == fit_rmse(ys, xs, "neighbour_mean", k=30)[1][0]


# ---------------------------------------------------------------- neighbour vote

def test_neighbour_vote_of_new_rows_equals_the_refresh(cases: dict[str, Case]) -> None:
    c = cases["late"]
    p = c.fitted.new
    assert c.new is not None and p is not None
    k = c.model.settings["k"]
    out = neighbour_vote(c.y, c.x, c.new, k=float(k), share_of="late", neighbours=True)
    assert out[0][:3] == ["class", "votes", "share late"]
    assert column(out, 0) == p.value.tolist()
    assert column(out, 1) == p.votes.tolist()
    assert column(out, 2) == p.share("late").tolist()
    assert [r[3:3 + k] for r in out[1:]] == (c.model.used[p.neighbours] + 1).tolist()
    assert [r[3 + k:] for r in out[1:]] == p.distances.tolist()


def test_neighbour_vote_leave_one_out_equals_the_refresh(cases: dict[str, Case]) -> None:
    c = cases["late"]
    k = c.model.settings["k"]
    rows = used_rows(neighbour_vote(c.bare(c.y), c.bare(c.x), k=k, share_of="late"), c)
    assert [r[0] for r in rows] == c.res.fitted_.tolist()
    assert [r[1] for r in rows] == c.res.votes_.tolist()
    assert [r[2] for r in rows] == c.res.share("late").tolist()
    out = loo_error(c.y, c.x, "neighbour_vote", k=k)
    assert out[0] == ["k", "leave-one-out error rate", "chosen"]
    assert [tuple(r[:2]) for r in out[1:]] == c.res.k_table_
    assert [r[0] for r in out[1:] if r[2] == "yes"] == [k]


def test_standard_units_equal_the_refresh(cases: dict[str, Case]) -> None:
    c = cases["similar"]
    p = c.fitted.new
    assert c.new is not None and p is not None
    out = standard_units_of(c.x, y=c.y)
    assert out[0] == c.model.attribute_names
    assert used_rows(out, c) == c.res.Z_.tolist()
    assert standard_units_of(c.x, c.new, c.y)[1:] == p.Z.tolist()
    assert standard_units_of(c.bare(c.x), c.new, c.bare(c.y))[1:] == p.Z.tolist()


def test_standard_units_without_y_leave_out_only_incomplete_x() -> None:
    out = standard_units_of([["a"], [1.0], [None], [3.0]])
    assert out == [["a"], [-1.0], [None], [1.0]]


# ---------------------------------------------------------------- refusals

X3 = [["u", "v"], [1.0, 2.0], [2.0, 1.0], [3.0, 5.0], [4.0, 3.0], [5.0, 7.0]]
Y3 = [["y"], [1.0], [2.0], [2.5], [4.0], [6.0]]


def code(out: Grid) -> str:
    assert len(out) == 1 and len(out[0]) == 2 and isinstance(out[0][1], str) and out[0][1]
    return str(out[0][0])


def test_blanks_only_are_missing() -> None:
    blanks = [[None], [None], [None]]
    out = fit_coefficients(blanks, blanks)
    assert code(out) == NA and "data row 1: blank in y" in out[0][1]
    assert code(neighbour_mean([[1.0], [2.0], [3.0]], blanks)) == NA
    assert code(fit_coefficients(None, X3)) == NA


def test_text_in_a_data_row_leaves_the_row_out() -> None:
    with_text = [r[:] for r in X3]
    with_text[3][1] = "unknown"
    dropped = [r for i, r in enumerate(X3) if i != 3]
    ydropped = [r for i, r in enumerate(Y3) if i != 3]
    assert fit_coefficients(Y3, with_text) == fit_coefficients(ydropped, dropped)
    assert fit_coefficients([r for r in Y3[:3]] + [["n/a"]] + Y3[4:], X3) == \
        fit_coefficients(ydropped, dropped)


def test_wrong_kinds_and_shapes() -> None:
    assert code(fit_coefficients(Y3, [["u"], ["a"], ["b"], ["c"], ["d"], ["e"]])) == VALUE
    assert code(fit_coefficients([r + r for r in Y3], X3)) == VALUE  # y two columns
    assert code(fit_coefficients(Y3, X3[:-1])) == VALUE  # lengths differ
    assert code(fit_coefficients(Y3, [[1.0, 2.0], [3.0]])) == VALUE  # ragged
    assert code(fit_coefficients(Y3, {"u": 1})) == VALUE
    assert code(fit_coefficients(Y3, [[object()]] * 6)) == VALUE
    assert code(fit_predict(Y3, X3, [[1.0]])) == VALUE  # new rows need 2 columns
    assert code(fit_coefficients(Y3, X3, degree=11)) == VALUE
    assert code(strip_means(Y3, [r[:1] for r in X3], width=-1)) == VALUE
    assert code(strip_means(Y3, X3, width=1)) == VALUE  # two attributes
    assert code(neighbour_mean(Y3, X3, k=2.5)) == VALUE
    assert code(neighbour_mean(Y3, X3, k=0)) == VALUE
    assert code(neighbour_mean(Y3, X3, neighbours="some")) == VALUE
    assert code(fit_rmse(Y3, X3, method="guess")) == VALUE
    assert code(fit_rmse([["c"], ["a"], ["b"], ["a"], ["b"], ["a"]], X3, "neighbour_vote")) \
        == VALUE
    assert code(loo_error(Y3, X3, "least_squares")) == VALUE
    assert code(neighbour_vote([[1.0], ["a"], [2.0], ["b"], ["a"]], X3[1:])) == VALUE
    assert code(fit_coefficients(Y3, [["u", "U"]] + X3[1:])) == VALUE  # names repeat


def test_too_few_rows() -> None:
    assert code(fit_coefficients(Y3[:3], X3[:3])) == NA  # 2 rows, 3 parameters
    assert code(fit_coefficients([["y"]], [["u"]])) == NA  # header only
    assert code(neighbour_mean(Y3[:2], X3[:2])) == NA
    assert code(strip_means(Y3[:2], [r[:1] for r in X3[:2]], 1.0)) == NA
    assert code(fit_coefficients(Y3[:3] + [[None]] * 3, X3)) == NA  # blanks leave 2 rows


def test_numerical_problems() -> None:
    collinear = [["u", "v"]] + [[r[0], 2.0 * r[0]] for r in X3[1:]]
    out = fit_coefficients(Y3, collinear)
    assert code(out) == NUM and "collinear" in out[0][1]
    constant = [["u", "v"]] + [[r[0], 3.0] for r in X3[1:]]
    assert code(fit_coefficients(Y3, constant)) == NUM
    assert code(neighbour_mean(Y3, constant)) == NUM  # no standard units
    assert code(standard_units_of(constant)) == NUM
    assert code(neighbour_mean(Y3, X3, k=5)) == NUM  # k not below the 5 rows
    assert code(neighbour_vote([["c"], ["a"], ["b"], ["a"], ["b"], ["a"]], X3, k=9)) == NUM


def test_unknown_or_single_class() -> None:
    labels = [["c"], ["a"], ["b"], ["a"], ["b"], ["a"]]
    out = neighbour_vote(labels, X3, [[2.0, 2.0]], k=1, share_of="late")
    assert code(out) == NA and "late" in out[0][1]
    assert code(neighbour_vote(labels, X3, k=1, share_of="A")) == NA  # capitals count
    assert code(neighbour_vote([["c"]] + [["a"]] * 5, X3)) == NA


def test_header_is_optional() -> None:
    bare_y, bare_x = Y3[1:], X3[1:]
    a, b = fit_coefficients(Y3, X3), fit_coefficients(bare_y, bare_x)
    assert [r[1:] for r in a[1:]] == [r[1:] for r in b[1:]]
    assert [r[0] for r in a[1:]] == ["intercept", "u", "v"]
    assert [r[0] for r in b[1:]] == ["intercept", "x1", "x2"]
    for fn in (neighbour_mean, fit_rmse, loo_error):
        assert fn(Y3, X3) == fn(bare_y, bare_x)
    assert np.array_equal(np.array(standard_units_of(X3)[1:]),
                          np.array(standard_units_of(bare_x)[1:]))


def test_a_single_cell_and_numpy_numbers_are_accepted() -> None:
    out = fit_predict(Y3, [r[:1] for r in X3], np.float64(2.0))
    assert out[0] == ["prediction"] and isinstance(out[1][0], float)


def test_a_fault_comes_back_as_an_error_value(monkeypatch: pytest.MonkeyPatch) -> None:
    def broken(*args: Any, **kwargs: Any) -> None:
        raise RuntimeError("boom")

    monkeypatch.setattr(LeastSquares, "fit", broken)
    out = fit_coefficients(Y3, X3)
    assert code(out) == VALUE and out[0][1].startswith("sheetfit fault: RuntimeError")
