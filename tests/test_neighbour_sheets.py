"""Neighbour and strip-mean models end to end: refusals, and every formula recalculated."""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pytest
from books import invoices, jobs, make_book
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sheetfit.errors import DataError, SettingError
from sheetfit.owned import sheet_title
from sheetfit.refresh import refresh


def _book(tmp_path: Path, rows, opts, new=None, name="b.xlsx") -> Path:
    last = len(rows)
    sheets = {"Data": rows, "Opts": opts}
    names = {"sf_m_y": f"Data!$A$1:$A${last}", "sf_m_x": f"Data!$B$1:$C${last}",
             "sf_m_opts": f"Opts!$A$1:$B${len(opts)}"}
    if new is not None:
        sheets["New"] = new
        names["sf_m_new"] = f"New!$A$1:$B${len(new)}"
    return make_book(tmp_path / name, sheets, names)


def _check_engine(engine, path: Path) -> int:
    from engine.compare import assert_cached_values_hold

    # 1e-9 relative / 1e-12 absolute: two engines summing in different orders
    return assert_cached_values_hold(path, engine, rel=1e-9, abs_=1e-12)


def test_neighbour_mean_book_recalculates(engine, tmp_path: Path) -> None:
    """Standard units, distances, means and spreads hold their cached values in LibreOffice."""
    p = _book(tmp_path, jobs(), [["method", "neighbour_mean"], ["k", 4]],
              new=[["hours", "km"], [12.0, 30.0], [35.0, 5.0]])
    refresh(p)
    assert _check_engine(engine, p) > 300


def test_neighbour_vote_book_recalculates(engine, tmp_path: Path) -> None:
    """Votes, predictions, confusion matrix, natural frequencies, work list recalculate."""
    p = _book(tmp_path, invoices(), [["method", "neighbour_vote"], ["focus", "late"]],
              new=[["amount", "past delay"], [2500.0, 20.0], [900.0, 2.0], [4000.0, 15.0]])
    refresh(p)
    assert _check_engine(engine, p) > 300


@pytest.mark.parametrize("n", [25, 260], ids=["distinct-grid", "even-grid"])
def test_strip_mean_book_recalculates(engine, tmp_path: Path, n: int) -> None:
    """Strip counts, sums, means, lookups and leave-one-out fitted values recalculate."""
    rng = np.random.default_rng(n)
    x = np.round(rng.uniform(0, 50, n), 1)
    rows = [["cost", "crew"]] + [[float(3 + 2 * v + rng.normal(0, 2)), float(v)] for v in x]
    last = len(rows)
    p = make_book(tmp_path / "s.xlsx", {"Data": rows, "Opts": [["method", "strip_mean"],
                                                               ["width", 2.5]],
                                        "New": [["crew"], [10.0], [60.0]]},
                  {"sf_s_y": f"Data!$A$1:$A${last}", "sf_s_x": f"Data!$B$1:$B${last}",
                   "sf_s_opts": "Opts!$A$1:$B$2", "sf_s_new": "New!$A$1:$A$3"})
    refresh(p)
    assert _check_engine(engine, p) > 3 * n


# --- property: Python prediction equals the recalculated formula prediction ----------

_small = st.lists(
    st.tuples(st.integers(0, 3), st.integers(0, 3), st.integers(0, 2)),
    min_size=6, max_size=12,
)


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.function_scoped_fixture])
@given(rows=_small, k=st.integers(1, 4), vote=st.booleans())
def test_property_formula_prediction_equals_python(engine, tmp_path_factory, rows, k,
                                                   vote) -> None:
    """Random small books full of tied distances and tied votes: formulas agree with Python."""
    ys = [["late", "on time", "open"][c] if vote else float(c * 10 + a) for a, _, c in rows]
    if vote and len(set(ys)) < 2:
        ys[0] = "late" if ys[0] != "late" else "open"
    k = min(k, len(rows) - 1)
    data = [["y", "a", "b"]] + [[ys[i], float(a), float(b)] for i, (a, b, _) in enumerate(rows)]
    if len({(r[1], r[2]) for r in data[1:]}) < 2:
        data[1][1] = 9.0  # keep standard units defined
    if len({r[1] for r in data[1:]}) < 2 or len({r[2] for r in data[1:]}) < 2:
        data[1][1], data[2][2] = 9.0, 7.0
    tmp = tmp_path_factory.mktemp("prop")
    opts = [["method", "neighbour_vote" if vote else "neighbour_mean"], ["k", k]]
    p = _book(tmp, data, opts, new=[["a", "b"], [1.0, 1.0], [2.0, 0.0]])
    refresh(p)
    _check_engine(engine, p)


# --- refusals ------------------------------------------------------------------------

def _digest(p: Path) -> str:
    return hashlib.sha256(p.read_bytes()).hexdigest()


@pytest.mark.parametrize("opts,exc,match", [
    ([["method", "neighbour_mean"], ["k", 0]], SettingError,
     r"setting 'k' must be a whole number of at least 1, or auto, not '0.0'"),
    ([["method", "neighbour_mean"], ["k", 30]], SettingError,
     r"k must be at least 1 and less than the number of rows"),
    ([["method", "strip_mean"], ["width", 0]], SettingError,
     r"setting 'width' must be a number greater than 0"),
    ([["method", "strip_mean"], ["width", 2]], DataError,
     r"a strip mean uses one attribute, x has 2"),
    ([["method", "strip_mean"]], SettingError, r"method strip_mean needs the setting 'width'"),
    ([["method", "neighbour_mean"], ["degree", 2]], SettingError,
     r"setting 'degree' does not apply to method neighbour_mean"),
])
def test_refusals(tmp_path: Path, opts, exc, match) -> None:
    """Bad settings for neighbour and strip models are refused; the book is untouched."""
    p = _book(tmp_path, jobs(), opts)
    before = _digest(p)
    with pytest.raises(exc, match=match):
        refresh(p)
    assert _digest(p) == before


def test_refuse_vote_with_one_class(tmp_path: Path) -> None:
    """A vote needs two classes or more."""
    rows = [["outcome", "a", "b"]] + [["late", float(i), float(i % 3)] for i in range(8)]
    p = _book(tmp_path, rows, [["method", "neighbour_vote"]])
    with pytest.raises(DataError, match=r"only one class"):
        refresh(p)


def test_refuse_text_attribute(tmp_path: Path) -> None:
    """An attribute column of text is refused: distances need numbers."""
    rows = [["cost", "region", "km"]] + [[float(i), "north", float(i * 3 % 7)] for i in range(8)]
    p = _book(tmp_path, rows, [["method", "neighbour_mean"], ["k", 2]])
    with pytest.raises(DataError, match=r"attribute 'region' holds no numbers \(text 'north'"):
        refresh(p)


def test_refuse_new_row_with_blank(tmp_path: Path) -> None:
    """A new row with a blank is refused, naming its cell."""
    p = _book(tmp_path, jobs(), [["method", "neighbour_mean"], ["k", 3]],
              new=[["hours", "km"], [12.0, None]])
    with pytest.raises(DataError, match=r"sf_m_new, sheet 'New' cell B2: a new row holds blank"):
        refresh(p)


def test_vote_sheets_name_outputs(tmp_path: Path) -> None:
    """A vote model writes its summary, standard units, neighbours and fitted sheets."""
    p = _book(tmp_path, invoices(), [["method", "neighbour_vote"], ["k", 5]])
    report = refresh(p)
    (m,) = report.models
    assert m.method == "neighbour_vote" and "k = 5 (given)" in m.figures[0]
    import zipfile

    with zipfile.ZipFile(p) as z:
        wb = z.read("xl/workbook.xml").decode()
    for kind in ("summary", "std", "nbrs", "fitted"):
        assert f'name="{sheet_title("m", kind)}"' in wb
    assert "sf_m_fitted" in wb and "sf_m_resid" not in wb


@settings(max_examples=10, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.function_scoped_fixture])
@given(xs=st.lists(st.integers(0, 6), min_size=4, max_size=14), width=st.integers(1, 3),
       new=st.integers(-2, 8))
def test_property_strip_formulas_equal_python(engine, tmp_path_factory, xs, width, new) -> None:
    """Integer x with integer widths put rows exactly on strip edges: formulas agree."""
    if len(set(xs)) < 2:
        xs = [*xs, max(xs) + 1]
    rows = [["y", "x"]] + [[float(3 * v + (i % 3)), float(v)] for i, v in enumerate(xs)]
    last = len(rows)
    p = make_book(tmp_path_factory.mktemp("strip") / "s.xlsx",
                  {"Data": rows, "Opts": [["method", "strip_mean"], ["width", width]],
                   "New": [["x"], [float(new)]]},
                  {"sf_s_y": f"Data!$A$1:$A${last}", "sf_s_x": f"Data!$B$1:$B${last}",
                   "sf_s_opts": "Opts!$A$1:$B$2", "sf_s_new": "New!$A$1:$A$2"})
    refresh(p)
    _check_engine(engine, p)


def test_refuse_focus_not_a_class(tmp_path: Path) -> None:
    """A focus class that is not in y is refused, listing the classes (capitals count)."""
    p = _book(tmp_path, invoices(), [["method", "neighbour_vote"], ["focus", "Late"]])
    with pytest.raises(SettingError, match=r"focus 'Late' is not one of the classes in y "
                                           r"\(late, on time\)"):
        refresh(p)
