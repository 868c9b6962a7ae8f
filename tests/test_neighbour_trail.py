"""The audit trail's extent on neighbour models (setting ``trail``): which data rows the
neighbours sheet shows, the seeded sample, what the other rows hold, the stated note,
and LibreOffice recalculation of a sampled book.

The size limits are lowered here (monkeypatched) so that a 60-row book takes the
sampled path that a book of more than 20,000 rows takes by default. Books are
invented test data (seeded).
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from books import invoices, jobs, make_book

from sheetfit.a1 import col_letter
from sheetfit.declare.model import ModelData, find_models
from sheetfit.errors import SettingError
from sheetfit.fit.results import Fitted
from sheetfit.methods import REGISTRY
from sheetfit.reader.package import open_package
from sheetfit.refresh import _values, fit_model, plan_book, refresh
from sheetfit.sheets import _nb_trail
from sheetfit.sheets.common import FIRST_ROW
from sheetfit.sheets.plan import BookPlan, Cell

N = 60
LIMIT, SAMPLE = 30, 9


@pytest.fixture()
def small_limits(monkeypatch: pytest.MonkeyPatch) -> None:
    """auto samples above 30 rows, 9 of them (by default: above 20,000, 2,000 of them)."""
    monkeypatch.setattr(_nb_trail, "TRAIL_ALL_UP_TO", LIMIT)
    monkeypatch.setattr(_nb_trail, "TRAIL_SAMPLE", SAMPLE)


def _book(tmp_path: Path, opts: list[list[Any]], vote: bool = False, n: int = N) -> Path:
    rows = invoices(n, 5) if vote else jobs(n, 3)
    last = len(rows)
    method = "neighbour_vote" if vote else "neighbour_mean"
    opts = [["method", method], ["k", 3], *opts]
    new = [["hours", "km"], [20.0, 30.0], [5.0, 60.0]] if not vote else \
        [["amount", "past delay"], [2500.0, 20.0], [900.0, 2.0]]
    return make_book(tmp_path / "b.xlsx",
                     {"Data": rows, "Opts": opts, "New": new},
                     {"sf_m_y": f"Data!$A$1:$A${last}", "sf_m_x": f"Data!$B$1:$C${last}",
                      "sf_m_opts": f"Opts!$A$1:$B${len(opts)}", "sf_m_new": "New!$A$1:$B$3"})


def _planned(path: Path) -> tuple[ModelData, Fitted[Any], BookPlan]:
    pkg = open_package(path)
    with _values(pkg, path) as values:
        (model,) = find_models(pkg, values, path.name, REGISTRY)
    fitted = fit_model(model)
    plan, _ = plan_book([(model, fitted)], "2026-01-01 00:00:00 UTC")
    return model, fitted, plan


def _cells(plan: BookPlan, kind: str) -> dict[tuple[int, int], Cell]:
    sheet = next(s for s in plan.sheets if s.title == f"sf m {kind}")
    return {(c.row, c.col): c for c in sheet.cells}


def _trail_rows(plan: BookPlan) -> list[int]:
    """The data rows (sheet rows of sheet Data) the neighbours sheet shows, top to bottom."""
    nb = _cells(plan, "nbrs")
    out, r = [], FIRST_ROW
    while (r, 0) in nb:
        out.append(nb[(r, 0)].value)
        r += 1
    return out


# --- the rule itself -----------------------------------------------------------------

def test_rule_all_auto_new() -> None:
    assert _nb_trail.trail_of(50_000, "all").full
    assert _nb_trail.trail_of(_nb_trail.TRAIL_ALL_UP_TO, "auto").full
    assert len(_nb_trail.trail_of(5, "new").rows) == 0
    big = _nb_trail.trail_of(_nb_trail.TRAIL_ALL_UP_TO + 1, "auto")
    assert len(big.rows) == _nb_trail.TRAIL_SAMPLE and not big.full
    assert np.all(np.diff(big.rows) > 0)  # distinct and in sheet-row order
    assert big.seed == _nb_trail.TRAIL_SEED


def test_sample_reproducible_for_the_same_seed() -> None:
    a = _nb_trail.trail_of(100_000, "auto", seed=7)
    b = _nb_trail.trail_of(100_000, "auto", seed=7)
    c = _nb_trail.trail_of(100_000, "auto", seed=8)
    assert np.array_equal(a.rows, b.rows)
    assert not np.array_equal(a.rows, c.rows)


def test_sample_follows_the_stated_recipe() -> None:
    """The words on the sheet name the draw; following them gives the rows shown."""
    t = _nb_trail.trail_of(50_000, "auto")
    words = t.words("sf m nbrs")
    m = re.search(r"numpy\.random\.default_rng\((\d+)\)\.choice\((\d+), (\d+), replace=False\)",
                  words)
    assert m is not None, words
    seed, n, size = (int(g) for g in m.groups())
    drawn = np.sort(np.random.default_rng(seed).choice(n, size, replace=False))
    assert np.array_equal(drawn, t.rows)
    assert "simple random sample without replacement" in words
    assert "sheet-row order" in words


# --- the sheets --------------------------------------------------------------------

@pytest.mark.parametrize("vote", [False, True], ids=["mean", "vote"])
def test_sampled_trail_on_the_sheets(tmp_path: Path, small_limits: None, vote: bool) -> None:
    """auto above the limit: the sampled rows have formulas reading the neighbours sheet,
    every other row holds the result's fitted value as a value; the sheets say so."""
    model, fitted, plan = _planned(_book(tmp_path, [], vote))
    res = fitted.result
    trail = _nb_trail.trail_of(res.n_, "auto")
    assert len(trail.rows) == SAMPLE
    shown = _trail_rows(plan)
    assert shown == [model.y.row_of(int(model.used[i])) for i in trail.rows]
    nb = _cells(plan, "nbrs")
    k = res.k_
    for pos, i in enumerate(trail.rows.tolist()):  # the neighbours and distances of the row
        r = FIRST_ROW + pos
        assert [nb[(r, 1 + m)].value for m in range(k)] == \
            [model.y.row_of(int(model.used[j])) for j in res.neighbours_[i]]
        assert [nb[(r, 1 + k + m)].value for m in range(k)] == res.distances_[i].tolist()
        # the figures worked out for the shown rows alone equal the result's own
        if vote:
            assert [nb[(r, 1 + 3 * k + m)].value for m in range(k)] == \
                res.position_votes_[i].tolist()
            assert nb[(r, 2 + 4 * k)].value == int(res.votes_[i])
            assert nb[(r, 3 + 4 * k)].value == float(res.score_[i])
        else:
            assert [nb[(r, 2 + 3 * k + d)].value for d in range(3)] == [
                float(res.nb_min_[i]), float(res.nb_median_[i]), float(res.nb_max_[i])]
    # the new rows follow the sample, with their own header
    assert nb[(FIRST_ROW + SAMPLE + 1, 0)].value == "new row"
    fs = _cells(plan, "fitted")
    fitted_col = 2
    fitted_values = res.fitted_.tolist()
    pos = {i: p for p, i in enumerate(trail.rows.tolist())}
    for i in range(res.n_):
        cell = fs[(FIRST_ROW + i, fitted_col)]
        assert cell.value == fitted_values[i]
        if i in pos:
            assert cell.formula is not None
            pred_col = 1 + (4 if vote else 3) * k  # 0-based, after the row and k-blocks
            assert cell.formula == f"='sf m nbrs'!{col_letter(pred_col + 1)}{FIRST_ROW + pos[i] + 1}"
            assert nb[(FIRST_ROW + pos[i], pred_col)].value == fitted_values[i]
        else:
            assert cell.formula is None
    marks = [(r, c.value) for (r, col), c in fs.items() if col == fitted_col + (2 if vote else 1)
             and r >= FIRST_ROW and c.value is not None]  # a blank is not written
    assert sorted(marks) == [(FIRST_ROW + i, FIRST_ROW + p + 1) for i, p in sorted(pos.items())]
    # the note, on the neighbours sheet and the fitted-value sheet
    for kind in ("nbrs", "fitted"):
        note = " ".join(str(c.value) for (r, _), c in _cells(plan, kind).items() if r == 1)
        assert f"{SAMPLE:,} of the {N:,} data rows" in note
        assert "rows not in the sample show sheetfit's computed value" in note
    summary = _cells(plan, "summary")
    label = next((r, c) for (r, c), cell in summary.items() if cell.value == "audit trail")
    assert summary[(label[0], 1)].value == "auto"
    if not vote:  # the residuals read the fitted-value sheet, row by row
        rs = _cells(plan, "resid")
        assert all(rs[(FIRST_ROW + i, 2)].formula == f"='sf m fitted'!C{FIRST_ROW + i + 1}"
                   for i in range(res.n_))


def test_trail_all_and_new(tmp_path: Path, small_limits: None) -> None:
    """all: every data row has its trail (whatever the size); new: none, values only."""
    _, fitted, plan = _planned(_book(tmp_path, [["trail", "all"]]))
    n = fitted.result.n_
    assert len(_trail_rows(plan)) == n
    fs = _cells(plan, "fitted")
    assert all(fs[(FIRST_ROW + i, 2)].formula for i in range(n))
    _, fitted, plan = _planned(_book(tmp_path, [["trail", "new"]]))
    assert _trail_rows(plan) == []
    fs = _cells(plan, "fitted")
    assert all(fs[(FIRST_ROW + i, 2)].formula is None for i in range(n))
    assert [fs[(FIRST_ROW + i, 2)].value for i in range(n)] == fitted.result.fitted_.tolist()
    note = str(fs[(1, 0)].value)
    assert "shows the new rows only" in note and "written as values" in note


def test_same_book_same_sample(tmp_path: Path, small_limits: None) -> None:
    a = _trail_rows(_planned(_book(tmp_path, []))[2])
    b = _trail_rows(_planned(_book(tmp_path, []))[2])
    assert a == b and len(a) == SAMPLE


def test_below_the_limit_auto_is_the_full_trail(tmp_path: Path, small_limits: None) -> None:
    _, fitted, plan = _planned(_book(tmp_path, [], n=LIMIT))
    assert len(_trail_rows(plan)) == fitted.result.n_ == LIMIT


def test_refuse_unknown_extent(tmp_path: Path) -> None:
    p = _book(tmp_path, [["trail", "some"]])
    with pytest.raises(SettingError, match=r"setting 'trail' must be all, auto .* or new"):
        refresh(p)


@pytest.mark.parametrize("vote", [False, True], ids=["mean", "vote"])
def test_sampled_book_recalculates(engine, tmp_path: Path, small_limits: None,
                                   vote: bool) -> None:
    """LibreOffice recalculates every formula of a sampled book to its cached value."""
    from engine.compare import assert_cached_values_hold

    p = _book(tmp_path, [], vote)
    refresh(p)
    # 1e-9 relative / 1e-12 absolute: two engines summing in different orders
    assert assert_cached_values_hold(p, engine, rel=1e-9, abs_=1e-12) > 200
