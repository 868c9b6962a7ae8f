"""The least-squares sheets' inference, as LibreOffice recalculates it, against statsmodels.

Reference: statsmodels OLS (test-only) — ``bse``, ``HC3_se``, ``tvalues``, ``pvalues``,
``conf_int``, ``rsquared_adj``, ``fvalue``, ``f_pvalue``, ``get_influence()``,
``variance_inflation_factor``, ``het_breuschpagan``, ``get_prediction().summary_frame()``.
Tolerance 1e-9 relative (1e-12 absolute near 0): the sheet's formulas and statsmodels
compute the same closed forms in float64 from the same data; p-values 1e-7 absolute
(LibreOffice's probability functions, docs/engine-facts.md E6).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import python_calamine
import statsmodels.api as sm
from books import make_book
from statsmodels.stats.diagnostic import het_breuschpagan
from statsmodels.stats.outliers_influence import variance_inflation_factor

from sheetfit.a1 import col_letter
from sheetfit.owned import sheet_title
from sheetfit.refresh import refresh

pytestmark = pytest.mark.engine

N, LEVEL = 48, 0.9


def _data() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    rng = np.random.default_rng(20261202)
    X = np.column_stack([rng.uniform(10, 90, N), rng.integers(1, 30, N).astype(float),
                         rng.uniform(0, 5, N)])
    X[:, 2] += 0.02 * X[:, 0]  # some overlap between attributes
    y = 120 + X @ [2.5, -3.0, 14.0] + rng.normal(0, 1, N) * (5 + 0.3 * X[:, 0])
    y[7] += 150  # one row far off the plane
    new = np.array([[50.0, 10.0, 2.0], [95.0, 29.0, 4.0], [12.0, 2.0, 0.5]])
    return np.round(X, 3), np.round(y, 2), new


def _rows(path: Path, title: str) -> list[list[object]]:
    return python_calamine.load_workbook(str(path)).get_sheet_by_name(title).to_python(
        skip_empty_area=False)


def _head_row(rows, head: str) -> int:
    """0-based row of the header ``head`` (row 4 on row-by-row sheets; lower on the
    coefficient sheet, under the answer block)."""
    return next(i for i, r in enumerate(rows) if head in r)


def _column(rows, cells, head: str, first: int, count: int) -> np.ndarray:
    """Recalculated values of a formula column under header ``head``, from the ``first``-th
    row below it (1 = the first row under the header)."""
    h = _head_row(rows, head)
    c = rows[h].index(head)
    out = [cells[f"{col_letter(c + 1)}{h + 1 + first + k}"].value for k in range(count)]
    return np.array(out, dtype=float)


def _values(rows, head: str, first: int, count: int) -> np.ndarray:
    """Written values (not formulas) under header ``head``, from its ``first``-th row."""
    h = _head_row(rows, head)
    c = rows[h].index(head)
    return np.array([rows[h + first + k][c] for k in range(count)], dtype=float)


def _close(got, want, rel=1e-9, abs_=1e-12) -> None:
    np.testing.assert_allclose(np.asarray(got, float), np.asarray(want, float), rtol=rel,
                               atol=abs_)


@pytest.fixture(scope="module")
def book(tmp_path_factory, engine):
    X, y, new = _data()
    rows = [["cost", "miles", "crew", "weight"]] + [[float(a)] + [float(v) for v in r]
                                                  for a, r in zip(y, X)]
    plan = [["miles", "crew", "weight"]] + new.tolist()
    path = tmp_path_factory.mktemp("inf") / "b.xlsx"
    make_book(path, {"Data": rows, "Plan": plan, "Opts": [["level", LEVEL]]}, {
        "sf_m_y": f"Data!$A$1:$A${N + 1}", "sf_m_x": f"Data!$B$1:$D${N + 1}",
        "sf_m_new": "Plan!$A$1:$C$4", "sf_m_opts": "Opts!$A$1:$B$1"})
    refresh(path)
    fresh = engine.recalculate(path)
    exog = sm.add_constant(X)
    ols = sm.OLS(y, exog).fit()
    return path, fresh, ols, exog, new


def test_coefficient_table_matches_statsmodels(book) -> None:
    path, fresh, ols, exog, _ = book
    title = sheet_title("m", "coef")
    rows, cells = _rows(path, title), fresh.sheet(title).cells
    _close(_column(rows, cells, "standard error", 1, 4), ols.bse)
    _close(_values(rows, "HC3 standard error (robust)", 1, 4), ols.HC3_se)
    _close(_column(rows, cells, "t = coefficient / SE", 1, 4), ols.tvalues)
    _close(_column(rows, cells, "p-value (two-sided)", 1, 4), ols.pvalues, abs_=1e-7)
    ci = ols.conf_int(alpha=1 - LEVEL)
    _close(_column(rows, cells, "low end (90%)", 1, 4), ci[:, 0])
    _close(_column(rows, cells, "high end (90%)", 1, 4), ci[:, 1])
    vif = [variance_inflation_factor(exog, j) for j in range(1, 4)]
    _close(_column(rows, cells, "variance inflation", 2, 3), vif)
    fig = {r[0]: i + 1 for i, r in enumerate(rows) if r and isinstance(r[0], str)
           and i > _head_row(rows, "standard error")}
    at = lambda label: cells[f"B{fig[label]}"].value
    _close(at("adjusted R²"), ols.rsquared_adj)
    _close(at("F statistic"), ols.fvalue)
    _close(at("p-value of F"), ols.f_pvalue, abs_=1e-7)
    lm, lm_p, _, _ = het_breuschpagan(ols.resid, exog)
    _close(float(rows[fig["Breusch–Pagan statistic"] - 1][1]), lm)
    _close(at("p-value of Breusch–Pagan"), lm_p, abs_=1e-7)


def test_row_diagnostics_match_statsmodels(book) -> None:
    path, fresh, ols, _, _ = book
    title = sheet_title("m", "resid")
    rows, cells = _rows(path, title), fresh.sheet(title).cells
    infl = ols.get_influence()
    h = infl.hat_matrix_diag
    _close(_values(rows, "leverage h", 1, N), h)
    _close(_column(rows, cells, "studentized residual", 1, N), infl.resid_studentized_internal)
    _close(_column(rows, cells, "Cook's distance", 1, N), infl.cooks_distance[0])
    _close(_column(rows, cells, "leave-one-out residual e/(1−h)", 1, N),
           ols.resid / (1 - h), abs_=1e-9)
    flags = [rows[4 + i][rows[3].index("flags")] for i in range(N)]
    assert "outlier" in flags[7]  # the row pushed 150 off the plane
    big = np.flatnonzero(np.abs(infl.resid_studentized_internal) > 3)
    assert [i for i, f in enumerate(flags) if "outlier" in str(f)] == list(big)


def test_new_row_intervals_match_statsmodels(book) -> None:
    path, fresh, ols, _, new = book
    title = sheet_title("m", "fitted")
    rows, cells = _rows(path, title), fresh.sheet(title).cells
    frame = ols.get_prediction(sm.add_constant(new, has_constant="add")).summary_frame(
        alpha=1 - LEVEL)
    _close(_column(rows, cells, "predicted cost", 1, 3), frame["mean"])
    _close(_column(rows, cells, "average: low (90%)", 1, 3), frame["mean_ci_lower"])
    _close(_column(rows, cells, "average: high (90%)", 1, 3), frame["mean_ci_upper"])
    _close(_column(rows, cells, "one new value: low (90%)", 1, 3), frame["obs_ci_lower"])
    _close(_column(rows, cells, "one new value: high (90%)", 1, 3), frame["obs_ci_upper"])
    flags = [rows[4 + i][rows[3].index("flag")] for i in range(3)]
    assert flags[0] == "" and "miles" in flags[1] and "extrapolated" in flags[1]


def test_every_new_formula_recalculates_to_its_cached_value(book, engine) -> None:
    from engine.compare import compare_to_cached

    path = book[0]
    mismatches = compare_to_cached(path, engine)
    assert mismatches.checked > 10 * N
    assert not mismatches, mismatches.report()


def _anscombe(which: str) -> tuple[list[float], list[float]]:
    import csv

    xs, ys = [], []
    with open(Path(__file__).parent / "reference" / "anscombe.csv", newline="") as fh:
        for row in csv.DictReader(fh):
            if row["set"] == which:
                xs.append(float(row["x"]))
                ys.append(float(row["y"]))
    return xs, ys


@pytest.mark.parametrize("which", ["III", "IV"])
def test_anscombe_rows_that_drive_the_line_are_flagged(which: str, tmp_path: Path) -> None:
    """Set III's outlier is the row flagged by Cook's distance; set IV's lone x = 19 has
    leverage 1 and is flagged, with no leave-one-out quantities.

    Source: Anscombe, F. J. (1973), Graphs in Statistical Analysis, The American
    Statistician 27(1):17-21 (the data; the line 3.00 + 0.500x and r = 0.816 are printed
    there, to those digits).
    """
    x, y = _anscombe(which)
    rows = [["y", "x"]] + [[b, a] for a, b in zip(x, y)]
    path = make_book(tmp_path / "a.xlsx", {"Data": rows},
                     {"sf_a_y": "Data!$A$1:$A$12", "sf_a_x": "Data!$B$1:$B$12"})
    refresh(path)
    coef = _rows(path, sheet_title("a", "coef"))
    h = _head_row(coef, "standard error")
    assert round(float(coef[h + 1][1]), 2) == 3.00 and round(float(coef[h + 2][1]), 3) == 0.500
    rs = _rows(path, sheet_title("a", "resid"))
    head = rs[3]
    flags = [str(rs[4 + i][head.index("flags")]) for i in range(11)]
    lev = [float(rs[4 + i][head.index("leverage h")]) for i in range(11)]
    cook = [rs[4 + i][head.index("Cook's distance")] for i in range(11)]
    if which == "III":
        far = max(range(11), key=lambda i: abs(y[i] - (3.0 + 0.5 * x[i])))
        assert x[far] == 13.0  # the published outlier, (13, 12.74)
        assert "influential" in flags[far]
        assert max(range(11), key=lambda i: float(cook[i])) == far
        assert float(cook[far]) > 4 / 11
    else:
        lone = x.index(19.0)
        assert lev[lone] == pytest.approx(1.0, abs=1e-12)
        assert "high leverage" in flags[lone] and cook[lone] == ""
        fig = {r[0]: r[1] for r in coef[h:] if r and isinstance(r[0], str)}
        assert fig["leave-one-out RMSE"] == "n/a"


def test_rule_in_use_is_compared_fairly(tmp_path: Path, engine) -> None:
    """A declared rule (5,000 a month plus 0.45 per km, invented) beside the fit: its RMSE on
    the same rows as a formula, and the verdict from the fit's leave-one-out RMSE.

    Reference: numpy on the same numbers (the rule's RMSE is a plain mean of squares) and
    statsmodels' hat diagonal for the leave-one-out residuals e/(1 − h).
    """
    rng = np.random.default_rng(7)
    km = rng.uniform(2000, 9000, 30).round(0)
    cost = (4200 + 0.52 * km + rng.normal(0, 300, 30)).round(2)
    rows = [["cost", "km"]] + [[float(c), float(k)] for c, k in zip(cost, km)]
    path = make_book(tmp_path / "r.xlsx", {"Data": rows, "Rule": [[5000.0], [0.45]]},
                     {"sf_r_y": "Data!$A$1:$A$31", "sf_r_x": "Data!$B$1:$B$31",
                      "sf_r_rule": "Rule!$A$1:$A$2"})
    refresh(path)
    title = sheet_title("r", "coef")
    rows_c = _rows(path, title)
    cells = engine.recalculate(path).sheet(title).cells
    h = _head_row(rows_c, "standard error")
    at = {r[0]: i + 1 for i, r in enumerate(rows_c) if r and isinstance(r[0], str) and i > h}
    rule_rmse = float(np.sqrt(np.mean((cost - (5000 + 0.45 * km)) ** 2)))
    got = cells[f"B{at['RMSE of the rule on these rows']}"].value
    assert got == pytest.approx(rule_rmse, rel=1e-12)
    ols = sm.OLS(cost, sm.add_constant(km)).fit()
    press = ols.resid / (1 - ols.get_influence().hat_matrix_diag)
    loo = float(np.sqrt(np.mean(press**2)))
    assert cells[f"B{at['leave-one-out RMSE of the fit']}"].value == pytest.approx(loo, rel=1e-9)
    want = "the fit" if loo < rule_rmse else "the rule"
    assert cells[f"B{at['closer on rows it did not see']}"].value == want
    from engine.compare import compare_to_cached

    assert not (m := compare_to_cached(path, engine)), m.report()


def test_audit_sheet_lists_rows_beyond_threshold_and_keeps_notes(tmp_path: Path,
                                                                 engine) -> None:
    """Rows with |actual − fitted| > 2 residual SD are listed by identity; notes typed by the
    auditor survive a refresh, beside the same row, even after rows are inserted above.

    Reference: statsmodels residuals and residual SD (sqrt(scale)) choose the listed rows.
    """
    import openpyxl
    from engine.compare import compare_to_cached

    rng = np.random.default_rng(31)
    n = 40
    units = rng.uniform(100, 900, n).round(0)
    cost = (800 + 3.1 * units + rng.normal(0, 60, n)).round(2)
    cost[[5, 22]] += [600, -550]
    invoices = [f"INV-{1000 + i}" for i in range(n)]
    rows = [["invoice", "cost", "units"]] + [[v, float(c), float(u)]
                                             for v, c, u in zip(invoices, cost, units)]
    names = {"sf_q_y": "Data!$B:$B", "sf_q_x": "Data!$C:$C", "sf_q_key": "Data!$A:$A",
             "sf_q_opts": "Opts!$A$1:$B$1"}
    path = make_book(tmp_path / "q.xlsx", {"Data": rows, "Opts": [["threshold", "2 sd"]]}, names)
    refresh(path)
    ols = sm.OLS(cost, sm.add_constant(units)).fit()
    beyond = [invoices[i] for i in np.flatnonzero(np.abs(ols.resid) > 2 * np.sqrt(ols.scale))]
    assert "INV-1005" in beyond and "INV-1022" in beyond
    title = sheet_title("q", "audit")
    sheet = _rows(path, title)
    listed = [r[0] for r in sheet[4:] if str(r[0]).startswith("INV-")]
    assert listed == beyond
    assert not (m := compare_to_cached(path, engine)), m.report()

    # the auditor types notes, then two rows are inserted at the top of the data
    wb = openpyxl.load_workbook(path)
    ws = wb[title]
    head = [c.value for c in ws[4]]
    at = {r[0].value: r[0].row for r in ws.iter_rows(min_row=5) if r[0].value}
    ws.cell(at["INV-1022"], head.index("explanation") + 1, "credit note posted twice")
    ws.cell(at["INV-1022"], head.index("conclusion") + 1, "corrected in December")
    wb.save(path)
    rows2 = [rows[0], ["INV-0998", 1500.0, 230.0], ["INV-0999", 2100.0, 420.0]] + rows[1:]
    wb = openpyxl.load_workbook(path)
    data = wb["Data"]
    data.insert_rows(2, 2)
    for j, v in enumerate(rows2[1]):
        data.cell(2, j + 1, v)
    for j, v in enumerate(rows2[2]):
        data.cell(3, j + 1, v)
    wb.save(path)
    refresh(path)
    sheet = _rows(path, title)
    where = {r[0]: r for r in sheet[4:] if r and r[0]}
    row = where["INV-1022"]
    assert row[sheet[3].index("explanation")] == "credit note posted twice"
    assert row[sheet[3].index("conclusion")] == "corrected in December"
    assert row[sheet[3].index("data row")] == 26  # moved down by the two inserted rows


def test_bootstrap_ranges_on_the_sheets_are_reproducible(tmp_path: Path) -> None:
    """The sheets carry the core's bootstrap ranges (same seed → same numbers, written as
    values) and say how to repeat them; another seed moves them."""
    from sheetfit.fit.bootstrap import bootstrap
    from sheetfit.fit.leastsq import LeastSquares

    X, y, new = _data()
    rows = [["cost", "miles", "crew", "weight"]] + [[float(a)] + [float(v) for v in r]
                                                  for a, r in zip(y, X)]
    plan = [["miles", "crew", "weight"]] + new.tolist()

    def book(seed: int) -> tuple[list, list]:
        path = make_book(tmp_path / f"s{seed}.xlsx", {
            "Data": rows, "Plan": plan, "Opts": [["resamples", 400], ["seed", seed]]}, {
            "sf_m_y": f"Data!$A$1:$A${N + 1}", "sf_m_x": f"Data!$B$1:$D${N + 1}",
            "sf_m_new": "Plan!$A$1:$C$4", "sf_m_opts": "Opts!$A$1:$B$2"})
        refresh(path)
        return _rows(path, sheet_title("m", "coef")), _rows(path, sheet_title("m", "fitted"))

    coef7, fit7 = book(7)
    res = LeastSquares().fit(X, y, names=["miles", "crew", "weight"])
    want = bootstrap(res, new, resamples=400, seed=7, level=0.95)
    _close(_values(coef7, "bootstrap low (95%)", 1, 4), want.coef_lo, rel=0, abs_=0)
    _close(_values(coef7, "bootstrap high (95%)", 1, 4), want.coef_hi, rel=0, abs_=0)
    _close(_values(fit7, "average: bootstrap low (95%)", 1, 3), want.pred_lo, rel=0, abs_=0)
    assert any("default_rng(7)" in str(r[0]) for r in coef7 if r)
    coef8, _ = book(8)
    assert not np.array_equal(_values(coef8, "bootstrap low (95%)", 1, 4), want.coef_lo)
