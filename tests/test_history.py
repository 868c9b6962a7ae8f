"""The book over time: the refresh log, forecasts against later actuals, the documentation
sheet kept across refreshes, and all of it recalculated by LibreOffice."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import python_calamine
from books import make_book
from lo_edit import edit_in_libreoffice

from sheetfit.history import forecasts as forecasts_mod
from sheetfit.history import log as log_mod
from sheetfit.owned import FORECAST_SHEET, LOG_SHEET, sheet_title
from sheetfit.refresh import refresh

openpyxl = pytest.importorskip("openpyxl")

NAMES = {
    "sf_a_y": "Data!$B:$B", "sf_a_x": "Data!$C:$C", "sf_a_key": "Data!$A:$A",
    "sf_a_new": "Plan!$B:$B", "sf_a_newkey": "Plan!$A:$A",
    "sf_n_y": "Data!$B:$B", "sf_n_x": "Data!$C:$C", "sf_n_opts": "Opts!$A$1:$B$2",
}


def _units(i: int) -> float:
    # distinct and unevenly spaced, so no two distances from a row tie (12 digits)
    return round(10.0 + 3 * i + 1.7 * float(np.sqrt(i + 0.5)), 4)


def _cost(i: int) -> float:
    return round(100.0 + 2.5 * _units(i) + (1.5 if i % 2 else -1.25), 2)


def _month(i: int) -> str:
    return f"2025-{i + 1:02d}" if i < 12 else f"2026-{i - 11:02d}"


def _book(tmp_path: Path, n: int = 12, plan: range = range(12, 15)) -> Path:
    data = [["month", "cost", "units"]] + [[_month(i), _cost(i), _units(i)] for i in range(n)]
    return make_book(tmp_path / "costs.xlsx", {
        "Data": data,
        "Plan": [["month", "units"]] + [[_month(i), _units(i)] for i in plan],
        "Opts": [["method", "neighbour_mean"], ["k", 3]],
    }, NAMES)


def _append(path: Path, rows: list[list[object]], plan: list[list[object]] | None = None) -> None:
    """The user adds rows under the data (and replaces the plan rows), saving with openpyxl."""
    wb = openpyxl.load_workbook(path)
    for row in rows:
        wb["Data"].append(row)
    if plan is not None:
        ws = wb["Plan"]
        for r, row in enumerate(plan, start=2):
            for c, v in enumerate(row, start=1):
                ws.cell(r, c).value = v
    wb.save(path)


def _rows(path: Path, title: str) -> list[list[object]]:
    return python_calamine.load_workbook(str(path)).get_sheet_by_name(title).to_python(
        skip_empty_area=False)


def _log(path: Path) -> list[list[object]]:
    rows = _rows(path, LOG_SHEET)
    head = next(i for i, r in enumerate(rows) if r[0] == "refreshed (UTC)")
    return [r for r in rows[head + 1:] if r[2]]


def _figures(row: list[object]) -> dict[str, tuple[object, object]]:
    return {str(row[k]): (row[k + 1], row[k + 2]) for k in range(10, len(row) - 2, 3) if row[k]}


def _loo_rmse(x: np.ndarray, y: np.ndarray, k: int) -> float:
    """Leave-one-out RMSE of the k-neighbour mean (one attribute, no distance ties)."""
    from sklearn.neighbors import KNeighborsRegressor  # test-only reference

    err = []
    for i in range(len(y)):
        keep = np.arange(len(y)) != i
        m = KNeighborsRegressor(n_neighbors=k).fit(x[keep, None], y[keep])
        err.append(y[i] - m.predict(x[i:i + 1, None])[0])
    return float(np.sqrt(np.mean(np.square(err))))


def test_three_refreshes_give_three_rows_per_model_with_before_and_after(tmp_path: Path) -> None:
    p = _book(tmp_path)
    refresh(p)
    _append(p, [[_month(i), _cost(i), _units(i)] for i in range(12, 15)])
    refresh(p)
    _append(p, [[_month(i), _cost(i), _units(i)] for i in range(15, 18)])
    refresh(p)
    rows = _log(p)
    assert [r[2] for r in rows] == ["a", "n"] * 3
    # the figures after each refresh, computed here with numpy and scikit-learn
    expected_a, expected_n = [], []
    for n in (12, 15, 18):
        x = np.array([_units(i) for i in range(n)])
        y = np.array([_cost(i) for i in range(n)])
        slope, icept = np.polyfit(x, y, 1)
        expected_a.append({"intercept": icept, "units": slope})
        expected_n.append({"k": 3.0, "leave-one-out RMSE": _loo_rmse(x, y, 3)})
    for j, (ra, rn) in enumerate(zip(rows[0::2], rows[1::2])):
        n = (12, 15, 18)[j]
        assert ra[4] == n and rn[4] == n  # rows used
        assert (ra[5], ra[6]) == ("2025-01", _month(n - 1))  # identifiers of model a
        assert (rn[5], rn[6]) == ("row 2", f"row {n + 1}")  # sheet rows: n has no identifiers
        for row, want in ((ra, expected_a[j]), (rn, expected_n[j])):
            figs = _figures(row)
            assert set(figs) == set(want)
            for name, value in want.items():
                before, after = figs[name]
                assert after == pytest.approx(value, rel=1e-12)  # reference libraries, 1e-12
                if j == 0:
                    assert before == ""
                else:
                    prev = (expected_a if row is ra else expected_n)[j - 1][name]
                    assert before == pytest.approx(prev, rel=1e-12)
            if j:
                shifts = {k: abs(a - b) / abs(b) for k, (b, a) in figs.items()}
                worst = max(shifts, key=shifts.get)
                assert row[7] == pytest.approx(shifts[worst], rel=1e-12) and row[8] == worst
                assert (row[9] == "above 10 %") == (shifts[worst] > 0.10)
    # carried forward unchanged: the first refresh's rows are still the same values
    assert _log(p)[:2] == rows[:2]


def test_the_log_keeps_only_the_newest_rows(tmp_path: Path, monkeypatch) -> None:
    monkeypatch.setattr(log_mod, "LOG_CAP", 3)
    p = _book(tmp_path)
    stamps = []
    for k in range(3):
        refresh(p, now=__import__("datetime").datetime(2026, 1, 1 + k, 12, 0, 0))
        stamps.append(f"2026-01-0{1 + k} 12:00:00 UTC")
    rows = _log(p)
    assert len(rows) == 3
    assert [(r[0], r[2]) for r in rows] == [(stamps[1], "n"), (stamps[2], "a"), (stamps[2], "n")]
    assert "newest 3 rows" in " ".join(str(r[0]) for r in _rows(p, LOG_SHEET)[:3])


def test_a_large_shift_is_marked(tmp_path: Path) -> None:
    p = _book(tmp_path)
    refresh(p)
    # the new rows double the slope: far above 10 %
    _append(p, [[_month(i), 100.0 + 9.0 * _units(i), _units(i)] for i in range(12, 24)])
    refresh(p)
    a = [r for r in _log(p) if r[2] == "a"]
    assert a[1][9] == "above 10 %" and a[1][7] > 0.10


def _fit_reference(n: int, plan: list[int]):
    """statsmodels OLS (test-only reference): forecasts and 95 % prediction intervals."""
    import statsmodels.api as sm

    x = np.array([_units(i) for i in range(n)])
    y = np.array([_cost(i) for i in range(n)])
    res = sm.OLS(y, sm.add_constant(x)).fit()
    xn = sm.add_constant(np.array([_units(i) for i in plan]), has_constant="add")
    frame = res.get_prediction(xn).summary_frame(alpha=0.05)
    return (frame["mean"].to_numpy(), frame["obs_ci_lower"].to_numpy(),
            frame["obs_ci_upper"].to_numpy())


def test_forecasts_meet_their_actuals_errors_and_coverage(tmp_path: Path, capsys) -> None:
    from sheetfit.cli import main

    p = _book(tmp_path)
    refresh(p)
    fc, lo, hi = _fit_reference(12, [12, 13, 14])
    reg = _rows(p, FORECAST_SHEET)
    head = next(i for i, r in enumerate(reg) if r[0] == "forecast made (UTC)")
    made = reg[head + 1:head + 4]
    assert [r[2] for r in made] == ["2026-01", "2026-02", "2026-03"]
    for r, f, a, b in zip(made, fc, lo, hi):
        # statsmodels' t quantile and ours agree far below this (1e-9 relative)
        assert r[3] == pytest.approx(f, rel=1e-12)
        assert (r[4], r[5]) == (pytest.approx(a, rel=1e-9), pytest.approx(b, rel=1e-9))
        assert r[6] == 0.95 and r[8] == ""
    # the actuals arrive: two inside their interval, one far above it
    actual = [round(float(fc[0]) + 2.0, 2), round(float(fc[1]) - 3.0, 2),
              round(float(hi[2]) + 25.0, 2)]
    assert lo[0] < actual[0] < hi[0] and lo[1] < actual[1] < hi[1] and actual[2] > hi[2]
    _append(p, [[_month(12 + j), actual[j], _units(12 + j)] for j in range(3)],
            plan=[[_month(i), _units(i)] for i in (15, 16, 17)])
    assert main(["refresh", str(p)]) == 0
    out = capsys.readouterr().out
    reg = _rows(p, FORECAST_SHEET)
    head = next(i for i, r in enumerate(reg) if r[0] == "forecast made (UTC)")
    rows = [r for r in reg[head + 1:] if r[0]]
    assert len(rows) == 6  # three resolved, three new (2026-04 .. 06) still open
    errors = [a - f for a, f in zip(actual, fc)]
    pct = [e / abs(a) for e, a in zip(errors, actual)]
    for r, a, e, q, inside in zip(rows[:3], actual, errors, pct, ["yes", "yes", "no"]):
        assert r[8] == a and r[7]
        assert r[9] == pytest.approx(e, rel=1e-12) and r[10] == pytest.approx(q, rel=1e-12)
        assert r[11] == inside
    assert all(r[8] == "" for r in rows[3:])
    avg = 100 * sum(pct) / 3
    sentence = (f"Of 3 forecasts now known, 2 fell inside their 95 % interval; the average error "
                f"was {avg:+.1f} % (actuals {'above' if avg > 0 else 'below'} the forecasts).")
    assert sentence in out
    assert [r[1] for r in reg[:8] if r[0] == "a"] == [sentence]
    about = _rows(p, sheet_title("a", "about"))
    assert [r[1] for r in about if r[0] == "forecasts"] == [sentence]


USER_TEXT = {
    "B5": "Estimate next quarter's delivery cost for the budget — “quoted” & <tagged>",
    "B6": "Monthly ledger extract, cost centre 41",
    "B7": "R. Okafor (ops finance)",
    "B8": "Fixed part holds within 10–40 units a month;\nnot for new depots.",
    "C5": 2026.0,
}


def _about_cells(path: Path) -> dict[str, object]:
    rows = _rows(path, sheet_title("a", "about"))
    return {f"{col}{r}": rows[r - 1][ord(col) - 65] for col, r in
            (("B", 5), ("B", 6), ("B", 7), ("B", 8), ("C", 5))}


def test_documentation_typed_with_openpyxl_survives_two_refreshes(tmp_path: Path) -> None:
    p = _book(tmp_path)
    refresh(p)
    wb = openpyxl.load_workbook(p)
    ws = wb[sheet_title("a", "about")]
    assert [ws[f"A{r}"].value for r in range(5, 9)] == ["purpose", "data source", "owner",
                                                       "assumptions and limits"]
    for cell, text in USER_TEXT.items():
        ws[cell] = text
    wb.save(p)
    refresh(p)
    refresh(p)
    assert _about_cells(p) == USER_TEXT
    assert _about_cells(p)["C5"] == 2026.0 and isinstance(_about_cells(p)["C5"], float)


def test_documentation_typed_in_libreoffice_survives_two_refreshes(tmp_path: Path) -> None:
    p = _book(tmp_path)
    refresh(p)
    typed = edit_in_libreoffice(p, tmp_path / "typed.xlsx",
                                [(sheet_title("a", "about"), c, v) for c, v in USER_TEXT.items()])
    refresh(typed)
    refresh(typed)
    assert _about_cells(typed) == USER_TEXT
    # and saved once more by LibreOffice, then refreshed
    again = edit_in_libreoffice(typed, tmp_path / "again.xlsx", [("Data", "E1", "note")])
    refresh(again)
    assert _about_cells(again) == USER_TEXT


def test_history_sheets_recalculate_in_libreoffice(engine, tmp_path: Path) -> None:
    from engine.compare import compare_to_cached

    p = _book(tmp_path)
    refresh(p)
    _append(p, [[_month(12), _cost(12) + 4, _units(12)], [_month(13), _cost(13), _units(13)]],
            plan=[[_month(i), _units(i)] for i in (14, 15, 16)])
    refresh(p)
    mismatches = compare_to_cached(p, engine, rel=1e-9, abs_=1e-12)
    assert not mismatches, mismatches.report()
    from engine.cached import cached_formula_values

    on_register = [k for k in cached_formula_values(p) if k[0] == FORECAST_SHEET]
    assert len(on_register) >= 6  # error, error % and inside for two resolved forecasts


def test_the_register_keeps_only_the_newest_forecasts(tmp_path: Path, monkeypatch) -> None:
    monkeypatch.setattr(forecasts_mod, "REGISTER_CAP", 4)
    p = _book(tmp_path)
    refresh(p)
    refresh(p)  # the same forecasts, still open: not registered twice

    def register_rows() -> list[list[object]]:
        reg = _rows(p, FORECAST_SHEET)
        head = next(i for i, r in enumerate(reg) if r[0] == "forecast made (UTC)")
        return [r for r in reg[head + 1:] if r[0]]

    assert [r[2] for r in register_rows()] == ["2026-01", "2026-02", "2026-03"]
    _append(p, [], plan=[[_month(i), _units(i) + 1.0] for i in (12, 13, 14)])
    refresh(p)  # three new forecasts of the same months: six in all, the newest four kept
    rows = register_rows()
    assert [r[2] for r in rows] == ["2026-03", "2026-01", "2026-02", "2026-03"]
    assert rows[0][3] != rows[3][3]


def test_outcome_sentences_in_words() -> None:
    """The sentence for mixed, missing and single intervals, worked by hand."""
    from sheetfit.history.forecasts import Forecast, Outcomes

    def f(forecast: float, actual: float, lo: float | None = None, hi: float | None = None,
          level: float | None = None) -> Forecast:
        return Forecast("t", "m", "id", forecast, lo, hi, level, "t2", actual)

    # errors (100 − 90) / 100 = +10 % and (50 − 55) / 50 = −10 %: mean 0; 50 is below [52, 60]
    both = Outcomes("m", [f(90.0, 100.0, 80.0, 120.0, 0.9), f(55.0, 50.0, 52.0, 60.0, 0.9)])
    assert both.sentence() == ("Of 2 forecasts now known, 1 fell inside their 90 % interval; "
                               "the average error was +0.0 %.")
    mixed = Outcomes("m", [f(90.0, 100.0, 80.0, 120.0, 0.95), f(100.0, 110.0)])
    # errors: +10/100 = +10 %, +10/110 = +9.0909 %: mean +9.5 %
    assert mixed.sentence() == ("Of 2 forecasts now known, 1 had a recorded 95 % interval and "
                                "1 of those fell inside it; the average error was +9.5 % "
                                "(actuals above the forecasts).")
    none = Outcomes("m", [f(120.0, 100.0)])
    assert none.sentence() == ("Of 1 forecast now known, none had a recorded interval; the "
                               "average error was -20.0 % (actuals below the forecasts).")
    assert Outcomes("m", []).sentence() == ""
