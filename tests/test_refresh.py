"""End to end: refresh a workbook, recalculate it in LibreOffice, check against references."""

from __future__ import annotations

import re
import zipfile
from pathlib import Path

import numpy as np
import pytest
import python_calamine
from books import line_rows, make_book
from reference.strd import lre, read_strd, strd_files

from sheetfit.owned import sheet_title
from sheetfit.refresh import refresh

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "example_books" / "delivery_costs.xlsx"
STRD = strd_files()


def _strd_book(case, path: Path) -> Path:
    """A user book holding one StRD dataset as its data, declared as a model."""
    cols = ["y"] + list(case.columns)
    rows = [cols] + [[float(v) for v in r] for r in np.column_stack([case.y, case.X])]
    opts = [["intercept", "yes" if case.intercept else "no"], ["degree", case.degree]]
    last = len(rows)
    return make_book(path, {"Data": rows, "Opts": opts}, {
        "sf_strd_y": f"Data!$A$1:$A${last}",
        "sf_strd_x": f"Data!$B$1:${chr(65 + len(case.columns))}${last}",
        "sf_strd_opts": "Opts!$A$1:$B$2",
    })


def _coef_rows(rows: list[list[object]], p: int) -> list[list[object]]:
    """The p rows under the coefficient table's 'term' header."""
    head = next(i for i, r in enumerate(rows) if r and r[0] == "term")
    return rows[head + 1:head + 1 + p]


def _sheet_rows(path: Path, title: str) -> list[list[object]]:
    book = python_calamine.load_workbook(str(path))
    return book.get_sheet_by_name(title).to_python(skip_empty_area=False)


EXAMPLES = sorted((ROOT / "example_books").glob("*.xlsx"))


@pytest.mark.parametrize("book", EXAMPLES, ids=[p.stem for p in EXAMPLES])
def test_example_book_recalculates_to_cached_values(engine, tmp_path: Path, book: Path) -> None:
    """Every formula of each refreshed example holds its cached value after LibreOffice recalc."""
    out = tmp_path / "refreshed.xlsx"
    refresh(book, out)
    mismatches = engine_compare(engine, out)
    assert mismatches.checked > 400
    assert not mismatches, mismatches.report()


def engine_compare(engine, path: Path):
    from engine.compare import compare_to_cached

    # 1e-9 relative, 1e-12 absolute near 0: different summation orders in two engines
    return compare_to_cached(path, engine, rel=1e-9, abs_=1e-12)


@pytest.mark.parametrize("path", STRD, ids=[p.stem for p in STRD])
def test_strd_book_coefficients_certified_and_formulas_hold(
    path: Path, engine, tmp_path: Path
) -> None:
    """StRD data in a workbook: written coefficients LRE >= 13; every formula recalculates."""
    # Source: NIST StRD linear regression datasets, certified values in each file.
    case = read_strd(path)
    out = _strd_book(case, tmp_path / f"{case.name}.xlsx")
    refresh(out)
    rows = _sheet_rows(out, sheet_title("strd", "coef"))
    coef = [float(r[1]) for r in _coef_rows(rows, len(case.coef))]
    worst = min(lre(c, k) if k != 0 else (15.0 if abs(c) < 1e-13 else 0.0)
                for c, k in zip(coef, case.coef))
    assert worst >= 13, f"{case.name}: coefficient LRE {worst:.1f}"
    mismatches = engine_compare(engine, out)
    assert mismatches.checked > 3 * len(case.y)
    assert not mismatches, mismatches.report()
    # The summary formulas work from residuals the spreadsheet computes itself in
    # float64, so they carry the rounding of the fitted-value formula: on Filip the
    # ten polynomial terms cancel (each ~1e2-1e3, sum ~1), leaving residuals good to
    # ~1e-9 relative. Tolerances: 1e-6 relative on the residual SD, 1e-9 absolute on R².
    cells = engine.recalculate(out).sheet(sheet_title("strd", "coef")).cells
    where = {str(r[0]): i + 1 for i, r in enumerate(rows) if r and r[0]}
    sd = cells[f"B{where['residual SD']}"].value
    r2 = cells[f"B{where['R²' if case.intercept else 'R² (uncentred)']}"].value
    assert isinstance(sd, float) and isinstance(r2, float)
    if case.resid_sd == 0:
        assert abs(sd) < 1e-9
    else:
        assert sd == pytest.approx(case.resid_sd, rel=1e-6)
    assert r2 == pytest.approx(case.r2, abs=1e-9)
    # Standard errors as the engine recalculates them on the coefficient sheet (the exact
    # residual SD times √diag (XᵀX)⁻¹ written by sheetfit), against the certified
    # standard deviations of the estimates: LRE >= 12 (0 certified: |SE| < 1e-13 |coef|).
    head = next(i for i, r in enumerate(rows) if r and r[0] == "term") + 1
    se_col = rows[head - 1].index("standard error")
    for k, (want, c) in enumerate(zip(case.coef_sd, case.coef)):
        got = cells[f"{chr(65 + se_col)}{head + 1 + k}"].value
        assert isinstance(got, float)
        if want == 0:
            assert abs(got) <= 1e-13 * max(abs(float(c)), 1.0), (case.name, k, got)
        else:
            assert lre(got, want) >= 12, f"{case.name}: SE of term {k} LRE {lre(got, want):.1f}"


def _set_value(path: Path, part: str, cell: str, value: float) -> None:
    """Edit one number cell in place, the way a user's edit would, without rewriting parts."""
    src = path.read_bytes()
    tmp = path.with_suffix(".edit")
    with zipfile.ZipFile(path) as zin, zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == part:
                pat = re.compile(rb'(<c r="' + cell.encode() + rb'"[^>]*><v>)[^<]*(</v>)')
                data, n = pat.subn(rb"\g<1>" + repr(value).encode() + rb"\g<2>", data)
                assert n == 1
            zout.writestr(info, data)
    assert src != tmp.read_bytes()
    tmp.replace(path)


def test_second_refresh_follows_edited_data_and_touches_nothing_else(tmp_path: Path) -> None:
    """Editing data and refreshing again replaces the result sheets; other parts keep bytes."""
    rows = line_rows(10)
    p = make_book(tmp_path / "b.xlsx", {"Data": rows},
                  {"sf_a_y": "Data!$A$1:$A$11", "sf_a_x": "Data!$B$1:$B$11"})
    refresh(p)
    _set_value(p, "xl/worksheets/sheet1.xml", "A4", 500.0)
    before = {i.filename: z for i, z in _entries(p)}
    refresh(p)
    after = {i.filename: z for i, z in _entries(p)}
    assert after["xl/worksheets/sheet1.xml"] == before["xl/worksheets/sheet1.xml"]
    table = _coef_rows(_sheet_rows(p, sheet_title("a", "coef")), 2)
    assert [r[0] for r in table] == ["intercept", "units"]
    y = np.array([r[0] for r in rows[1:]], dtype=float)
    y[2] = 500.0
    x = np.array([r[1] for r in rows[1:]], dtype=float)
    slope, icept = np.polyfit(x, y, 1)  # numpy as the outside reference
    coef = [float(r[1]) for r in table]
    assert coef == pytest.approx([icept, slope], rel=1e-12)
    with zipfile.ZipFile(p) as z:
        wb = z.read("xl/workbook.xml").decode()
    assert wb.count("name=\"sf a coef\"") == 1


def _entries(path: Path):
    with zipfile.ZipFile(path) as z:
        return [(i, z.read(i)) for i in z.infolist()]


def test_out_leaves_input_untouched(tmp_path: Path) -> None:
    """--out writes elsewhere; the input keeps every byte."""
    p = make_book(tmp_path / "b.xlsx", {"Data": line_rows(8)},
                  {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"})
    before = p.read_bytes()
    refresh(p, tmp_path / "out.xlsx")
    assert p.read_bytes() == before and (tmp_path / "out.xlsx").exists()


def test_output_names_work_from_the_users_own_formulas(engine, tmp_path: Path) -> None:
    """A user's formulas over sf_<model>_coef / _resid / _pred evaluate after a refresh."""
    import xlsxwriter

    p = tmp_path / "mine.xlsx"
    wb = xlsxwriter.Workbook(str(p))
    data = wb.add_worksheet("Data")
    rows = line_rows(8)
    for r, row in enumerate(rows):
        data.write_row(r, 0, row)
    data.write_row(0, 3, ["units"])
    data.write_column(1, 3, [40.0, 41.0])
    mine = wb.add_worksheet("Mine")
    # written before the names exist; cached values deliberately wrong (0)
    mine.write_formula("A1", "=INDEX(sf_a_coef,2)", None, 0)
    mine.write_formula("A2", "=SUMPRODUCT(sf_a_resid,sf_a_resid)", None, 0)
    mine.write_formula("A3", "=INDEX(sf_a_pred,2)", None, 0)
    wb.define_name("sf_a_y", "=Data!$A$1:$A$9")
    wb.define_name("sf_a_x", "=Data!$B$1:$B$9")
    wb.define_name("sf_a_new", "=Data!$D$1:$D$3")
    wb.close()
    refresh(p)
    cells = engine.recalculate(p).sheet("Mine").cells
    x = np.array([r[1] for r in rows[1:]])
    y = np.array([r[0] for r in rows[1:]])
    slope, icept = np.polyfit(x, y, 1)  # numpy as the outside reference
    ssr = float(np.sum((y - (icept + slope * x)) ** 2))
    assert cells["A1"].value == pytest.approx(slope, rel=1e-12)
    assert cells["A2"].value == pytest.approx(ssr, rel=1e-9)
    assert cells["A3"].value == pytest.approx(icept + slope * 41.0, rel=1e-12)


def test_awkward_sheet_names_are_quoted_in_formulas(engine, tmp_path: Path) -> None:
    """Data on a sheet called "Jo's 2026 data (€)" still gives formulas that recalculate."""
    title = "Jo's 2026 data (€)"
    quoted = "'Jo''s 2026 data (€)'"
    p = make_book(tmp_path / "odd.xlsx", {title: line_rows(8)},
                  {"sf_odd_y": f"{quoted}!$A$1:$A$9", "sf_odd_x": f"{quoted}!$B$1:$B$9"})
    refresh(p)
    from engine.cached import cached_formula_values

    formulas = [c.formula for c in cached_formula_values(p).values()]
    assert any(quoted in f for f in formulas)
    mismatches = engine_compare(engine, p)
    assert mismatches.checked > 30 and not mismatches, mismatches.report()
