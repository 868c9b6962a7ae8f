"""Sheet plans and the renderer, checked in memory (no spreadsheet engine needed)."""

from __future__ import annotations

import importlib
import pkgutil
import re
import zipfile
from pathlib import Path

import pytest
from books import make_book

import sheetfit
from sheetfit.declare.model import find_models
from sheetfit.methods import REGISTRY
from sheetfit.reader.package import open_package
from sheetfit.refresh import _values, fit_model, plan_book
from sheetfit.writer.render import render


def _plan(tmp_path: Path, rows, names):
    p = make_book(tmp_path / "b.xlsx", {"Data": rows}, names)
    pkg = open_package(p)
    (model,) = find_models(pkg, _values(pkg, p), p.name, REGISTRY)
    fitted = fit_model(model)
    plan, _ = plan_book([(model, fitted)], "2026-01-01 00:00:00 UTC")
    return plan, model, fitted.result


def _sheet(plan, title):
    return next(s for s in plan.sheets if s.title == title)


def test_fitted_formula_points_at_coefficients_and_data(tmp_path: Path) -> None:
    """A fitted value is coefficient cells times the user's data cells, cached as computed."""
    rows = [["cost", "units"], [5.0, 1.0], [7.5, 2.0], [8.0, 3.0], [11.0, 4.0]]
    plan, _, res = _plan(tmp_path, rows, {"sf_a_y": "Data!$A$1:$A$5",
                                          "sf_a_x": "Data!$B$1:$B$5"})
    fitted = _sheet(plan, "sf a fitted")
    cells = {c.address: c for c in fitted.cells}
    first = cells["D5"]
    # title, status, the answer block (key figures), a column-note row and the header put
    # the coefficients in B10:B11
    assert first.formula == "='sf a coef'!$B$10+'sf a coef'!$B$11*Data!B2"
    assert first.value == pytest.approx(res.coef_[0] + res.coef_[1] * 1.0, rel=1e-15)
    assert cells["B5"].formula == "=Data!A2"
    resid = {c.address: c for c in _sheet(plan, "sf a resid").cells}
    assert resid["D8"].formula == "=IF(C8=\"\",\"\",B8-C8)"
    names = dict(plan.names)
    assert names["sf_a_coef"] == "'sf a coef'!$B$10:$B$11"
    assert names["sf_a_fitted"] == "'sf a fitted'!$D$5:$D$8"
    assert names["sf_a_resid"] == "'sf a resid'!$D$5:$D$8"


def test_every_plan_formula_has_a_cached_value(tmp_path: Path) -> None:
    """Promise 1: no formula cell is planned without its cached value."""
    rows = [["c", "u", "v"]] + [[float(3 * i + (i % 4)), float(i), float((i * 5) % 7)]
                                for i in range(12)]
    plan, _, _ = _plan(tmp_path, rows, {"sf_m_y": "Data!$A$1:$A$13",
                                        "sf_m_x": "Data!$B$1:$C$13"})
    formulas = [c for s in plan.sheets for c in s.formula_cells()]
    assert len(formulas) > 50
    assert all(c.value is not None and c.value == c.value for c in formulas)


def test_renderer_stores_numbers_with_every_digit(tmp_path: Path) -> None:
    """Coefficients survive the file exactly: xlsxwriter's 16 digits would lose 1/6's last."""
    rows = [["cost", "units"], [0.0, 0.0], [1.0, 6.0], [2.0, 12.0]]  # slope exactly 1/6
    plan, _, res = _plan(tmp_path, rows, {"sf_a_y": "Data!$A$1:$A$4",
                                          "sf_a_x": "Data!$B$1:$B$4"})
    out = render(plan, tmp_path / "owned.xlsx").path
    with zipfile.ZipFile(out) as z:
        names = z.namelist()
        coef_part = next(n for n in names if n.startswith("xl/worksheets/sheet2"))
        xml = z.read(coef_part).decode()
    stored = [float(v) for v in re.findall(r'<c r="B1[01]"[^>]*><v>([^<]+)</v>', xml)]
    assert stored == [float(c) for c in res.coef_]  # exact: bit-for-bit round trip
    assert stored[1] == 1 / 6 and float(f"{1 / 6:.16G}") != 1 / 6


def test_public_lists_name_real_objects() -> None:
    """Each module declares its public names in __all__, and every listed name exists."""
    for info in pkgutil.walk_packages(sheetfit.__path__, "sheetfit."):
        if info.name.split(".")[-1].startswith("_"):
            continue
        mod = importlib.import_module(info.name)
        if info.name.endswith(("__main__", "cli")) and not hasattr(mod, "__all__"):
            continue
        assert hasattr(mod, "__all__"), f"{info.name} has no __all__"
        for name in mod.__all__:
            assert hasattr(mod, name), f"{info.name}.__all__ lists missing {name}"
