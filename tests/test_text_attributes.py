"""Text attributes in x coded as 0/1 indicators (least squares): reading, fitting, sheets."""

from __future__ import annotations

import warnings
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from books import make_book

from sheetfit.declare.model import find_models
from sheetfit.errors import DataError, FewRowsLevelCaution, SettingError
from sheetfit.fit.inference import coef_table, influence, intervals
from sheetfit.methods import REGISTRY
from sheetfit.owned import sheet_title
from sheetfit.reader.package import open_package
from sheetfit.refresh import _values, fit_model, refresh

REGIONS = ["Harbour", "Hills", "Plain", "Harbour", "Plain", "Harbour"]


def _visits(n: int = 40, seed: int = 17, isles: int = 1) -> list[list[Any]]:
    """Invented service visits (seeded): cost from hours on site and the region served."""
    rng = np.random.default_rng(seed)
    extra = {"Harbour": 0.0, "Hills": 55.0, "Plain": -20.0, "Isles": 140.0}
    rows: list[list[Any]] = [["cost", "hours", "region"]]
    for i in range(n):
        region = REGIONS[i % len(REGIONS)] if i < n - isles else "Isles"
        hours = float(rng.integers(1, 12))
        cost = round(80 + 42 * hours + extra[region] + float(rng.normal(0, 15)), 2)
        rows.append([cost, hours, region])
    return rows


def _book(path: Path, rows: list[list[Any]], opts: list[list[Any]] | None = None,
          new: list[list[Any]] | None = None) -> Path:
    sheets: dict[str, list[list[Any]]] = {"Data": rows}
    names = {"sf_v_y": f"Data!$A$1:$A${len(rows)}", "sf_v_x": f"Data!$B$1:$C${len(rows)}"}
    if opts:
        sheets["Opts"] = opts
        names["sf_v_opts"] = f"Opts!$A$1:$B${len(opts)}"
    if new:
        sheets["Plan"] = new
        names["sf_v_new"] = f"Plan!$A$1:$B${len(new)}"
    return make_book(path, sheets, names)


def _model(path: Path):
    pkg = open_package(path)
    with _values(pkg, path) as values:
        (model,) = find_models(pkg, values, path.name, REGISTRY)
    return model


def test_indicator_columns_baseline_and_counts(tmp_path: Path) -> None:
    """Levels in sheet order, most frequent as baseline, indicators on the source cells."""
    model = _model(_book(tmp_path / "v.xlsx", _visits()))
    assert model.attribute_names == ["hours", "region = Hills", "region = Plain",
                                     "region = Isles"]
    assert model.baselines == {"region": "Harbour"}
    assert model.level_counts == {"region": {"Harbour": 19, "Hills": 7, "Plain": 13,
                                             "Isles": 1}}  # 6 × (3, 1, 2) + (1, 1, 1) + Isles
    hills = model.xs[1]
    assert (hills.level, hills.cell(0), hills.name) == ("Hills", "Data!C2", "region = Hills")
    assert hills.value_ref(0) == 'IF(EXACT(Data!C2,"Hills"),1,0)'
    regions = [r[2] for r in _visits()[1:]]
    np.testing.assert_array_equal(model.X[:, 1], [r == "Hills" for r in regions])
    np.testing.assert_array_equal(model.X[:, 3], [r == "Isles" for r in regions])


def test_baseline_setting_and_refusals(tmp_path: Path) -> None:
    model = _model(_book(tmp_path / "a.xlsx", _visits(), [["baseline", "Plain"]]))
    assert model.baselines == {"region": "Plain"}
    assert model.attribute_names[1:] == ["region = Harbour", "region = Hills", "region = Isles"]
    with pytest.raises(SettingError, match=r"'plain' is not a level of 'region'.*Harbour"):
        _model(_book(tmp_path / "b.xlsx", _visits(), [["baseline", "plain"]]))  # EXACT: case
    with pytest.raises(SettingError, match="names 2 level"):
        _model(_book(tmp_path / "c.xlsx", _visits(), [["baseline", "Plain; Hills"]]))
    only = [r[:2] for r in _visits()]
    sheets = {"Data": only, "Opts": [["baseline", "Plain"]]}
    path = make_book(tmp_path / "d.xlsx", sheets, {
        "sf_v_y": "Data!$A$1:$A$41", "sf_v_x": "Data!$B$1:$B$41", "sf_v_opts": "Opts!$A$1:$B$1"})
    with pytest.raises(SettingError, match="no text attribute"):
        _model(path)


def test_quotes_in_a_level_are_doubled_in_the_formula(tmp_path: Path) -> None:
    rows = _visits()
    for r in rows[1:]:
        if r[2] == "Hills":
            r[2] = 'Hills "north"'
    model = _model(_book(tmp_path / "q.xlsx", rows))
    assert model.xs[1].value_ref(3) == 'IF(EXACT(Data!C5,"Hills ""north"""),1,0)'


def test_blank_and_number_in_a_text_attribute_leave_the_row_out(tmp_path: Path) -> None:
    rows = _visits()
    rows[3][2] = None
    rows[5][2] = 7.0
    model = _model(_book(tmp_path / "r.xlsx", rows))
    assert [(lo.sheet_row, lo.reason) for lo in model.left_out] == [
        (4, "blank in text attribute 'region' (Data!C4)"),
        (6, "the number 7 in text attribute 'region' (Data!C6)"),
    ]
    assert len(model.used) == 38


def test_totals_compare_numeric_attributes_only(tmp_path: Path) -> None:
    """A total row under data with a text attribute is found from y and the numbers."""
    rows = _visits(12)
    rows.append([sum(r[0] for r in rows[1:]), sum(r[1] for r in rows[1:]), "Total"])
    model = _model(_book(tmp_path / "t.xlsx", rows))
    assert [(lo.sheet_row, lo.reason) for lo in model.left_out] == [
        (14, ("looks like the total of rows 2–13 (y and every numeric attribute equal their "
             "sums)"))]
    assert "Total" not in model.level_counts["region"]


def test_single_level_is_refused(tmp_path: Path) -> None:
    rows = [r if i == 0 else [r[0], r[1], "Harbour"] for i, r in enumerate(_visits())]
    with pytest.raises(DataError, match="single level"):
        _model(_book(tmp_path / "s.xlsx", rows))


def test_neighbour_methods_still_leave_text_rows_out(tmp_path: Path) -> None:
    """Only methods whose record says so read text attributes; others refuse a text column."""
    with pytest.raises(DataError, match="holds no numbers"):
        _model(_book(tmp_path / "n.xlsx", _visits(), [["method", "neighbour_mean"]]))


def test_new_rows_coded_and_unknown_levels_refused(tmp_path: Path) -> None:
    new = [["hours", "region"], [3.0, "Plain"], [5.0, "Harbour"], [2.0, "Isles"]]
    model = _model(_book(tmp_path / "p.xlsx", _visits(), new=new))
    assert model.new is not None
    np.testing.assert_array_equal(model.new.X, [[3, 0, 1, 0], [5, 0, 0, 0], [2, 0, 0, 1]])
    assert model.new.columns[2].value_ref(0) == 'IF(EXACT(Plan!B2,"Plain"),1,0)'
    bad = [["hours", "region"], [3.0, "Plain"], [4.0, "Coast"]]
    with pytest.raises(DataError, match=r"'Coast' of 'region' does not occur.*'Harbour'") as exc:
        _model(_book(tmp_path / "u.xlsx", _visits(), new=bad))
    assert exc.value.context.cell == "B3"


def test_few_rows_caution(tmp_path: Path) -> None:
    """Levels with fewer than 5 rows (common practice) are named in a caution."""
    fitted = fit_model(_model(_book(tmp_path / "f.xlsx", _visits())))
    (note,) = [c for c in fitted.cautions if "text attribute" in c]
    assert "'region': level 'Isles' has only 1 row" in note
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        REGISTRY["least_squares"].fit(_model(_book(tmp_path / "g.xlsx", _visits())))
    assert any(issubclass(w.category, FewRowsLevelCaution) for w in caught)


def test_matches_statsmodels_dummy_coding(tmp_path: Path) -> None:
    """Source: statsmodels formula API, C(region, Treatment(reference=...)): its own dummy
    coding gives the same coefficients, standard errors, p-values, intervals, HC3,
    leverages, Cook's distances and predictions (1e-9 relative; see
    test_fit_inference.py for the tolerance)."""
    rows = _visits(60, seed=23, isles=3)  # a one-row level has leverage 1: HC3 undefined
    new = [["hours", "region"], [3.0, "Plain"], [9.0, "Isles"], [6.0, "Harbour"]]
    model = _model(_book(tmp_path / "m.xlsx", rows, [["baseline", "Hills"]], new))
    res = fit_model(model).result
    df = pd.DataFrame(rows[1:], columns=rows[0])
    ref = smf.ols("cost ~ hours + C(region, Treatment(reference='Hills'))", df).fit()
    names = {f"C(region, Treatment(reference='Hills'))[T.{lv}]": f"region = {lv}"
             for lv in ("Harbour", "Plain", "Isles")}
    names |= {"Intercept": "intercept", "hours": "hours"}
    order = [res.terms_.index(names[k]) for k in ref.params.index]
    tab = coef_table(res)
    for ours, theirs in [(res.coef_, ref.params), (tab.se, ref.bse), (tab.p, ref.pvalues),
                         (tab.lo, ref.conf_int()[0]), (tab.hi, ref.conf_int()[1]),
                         (tab.hc3_se, ref.HC3_se)]:
        np.testing.assert_allclose(np.asarray(ours)[order], theirs.to_numpy(), rtol=1e-9)
    inf, got = ref.get_influence(), influence(res)
    np.testing.assert_allclose(got.leverage, inf.hat_matrix_diag, rtol=1e-9)
    np.testing.assert_allclose(got.cooks, inf.cooks_distance[0], rtol=1e-9)
    assert model.new is not None
    frame = ref.get_prediction(pd.DataFrame(new[1:], columns=new[0])).summary_frame()
    iv = intervals(res, model.new.X)
    np.testing.assert_allclose(iv.pred, frame["mean"], rtol=1e-9)
    np.testing.assert_allclose(iv.obs_lo, frame["obs_ci_lower"], rtol=1e-9)
    np.testing.assert_allclose(iv.mean_hi, frame["mean_ci_upper"], rtol=1e-9)


def test_refresh_recalculates_in_libreoffice(engine, tmp_path: Path) -> None:
    """A book with a text attribute and new rows: indicator terms are EXACT formulas on the
    user's text cells, and every formula recalculates to its cached value."""
    from engine.compare import compare_to_cached

    new = [["hours", "region"], [3.0, "Plain"], [9.0, "Isles"], [6.0, "Harbour"]]
    rows = _visits()
    rows[7][2] = 'Hills "north"'
    path = _book(tmp_path / "visits.xlsx", rows, new=new)
    refresh(path)
    from engine.cached import cached_formula_values

    formulas = [c.formula for c in cached_formula_values(path).values()]
    assert any('EXACT(Data!C2,"Hills")' in f for f in formulas)
    assert any('EXACT(Plan!B3,"Isles")' in f for f in formulas)
    assert any('""north""' in f for f in formulas)
    # 1e-9 relative, 1e-12 absolute near 0, as in test_refresh.py
    mismatches = compare_to_cached(path, engine, rel=1e-9, abs_=1e-12)
    assert mismatches.checked > 200
    assert not mismatches, mismatches.report()
    assert sheet_title("v", "coef")
