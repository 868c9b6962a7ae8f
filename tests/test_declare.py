"""Declarations: reading named ranges into model data, and every refusal of bad input."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest
from books import line_rows, make_book

from sheetfit.declare.model import find_models
from sheetfit.errors import DataError, DeclarationError, SettingError
from sheetfit.methods import REGISTRY
from sheetfit.reader.package import open_package
from sheetfit.refresh import _values, refresh


def _models(path: Path):
    pkg = open_package(path)
    return find_models(pkg, _values(pkg, path), path.name, REGISTRY)


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_header_row_names_columns_and_rows_map_to_cells(tmp_path: Path) -> None:
    """A first row of text is a header; each model row knows its sheet cell."""
    p = make_book(tmp_path / "b.xlsx", {"Data": line_rows(6)},
                  {"sf_a_y": "Data!$A$1:$A$7", "sf_a_x": "Data!$B$1:$B$7"})
    (m,) = _models(p)
    assert m.y.name == "cost" and m.attribute_names == ["units"]
    assert m.n_rows == 6 and list(m.used) == list(range(6))
    assert m.xs[0].cell(0) == "Data!B2" and m.y.cell(5) == "Data!A7"


def test_no_header_uses_column_letters(tmp_path: Path) -> None:
    """Without a text first row, every row is data and columns are named by letter."""
    rows = line_rows(5)[1:]
    p = make_book(tmp_path / "b.xlsx", {"Data": rows},
                  {"sf_a_y": "Data!$A$1:$A$5", "sf_a_x": "Data!$B$1:$B$5"})
    (m,) = _models(p)
    assert m.attribute_names == ["B"] and m.n_rows == 5 and m.xs[0].first_row == 1


def test_whole_columns_follow_appended_rows(tmp_path: Path) -> None:
    """Whole-column references end at the last row holding a value in the model's columns."""
    rows = line_rows(9)
    rows[4][1] = None  # a blank attribute inside the data
    p = make_book(tmp_path / "b.xlsx", {"Data": rows},
                  {"sf_a_y": "Data!$A:$A", "sf_a_x": "Data!$B:$B"})
    (m,) = _models(p)
    assert m.n_rows == 9
    assert len(m.used) == 8
    (lo,) = m.left_out
    assert lo.sheet_row == 5 and "blank" in lo.reason and "Data!B5" in lo.reason


def test_left_out_reasons_name_text_error_and_blank(tmp_path: Path) -> None:
    """Rows with blank, text or error cells are left out and each reason says which."""
    rows = line_rows(8)
    rows[2][0] = "n/a"
    rows[3][1] = None
    p = make_book(tmp_path / "b.xlsx", {"Data": rows},
                  {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"},
                  errors={("Data", "B7"): "=1/0"})
    (m,) = _models(p)
    reasons = {lo.sheet_row: lo.reason for lo in m.left_out}
    assert "text 'n/a' in y (Data!A3)" in reasons[3]
    assert "blank in 'units' (Data!B4)" in reasons[4]
    assert "error #DIV/0! in 'units' (Data!B7)" in reasons[7]
    assert len(m.used) == 5


def test_multi_area_x_and_sheet_scoped_names(tmp_path: Path) -> None:
    """x may be several areas; declarations may be scoped to a sheet."""
    rows = [["cost", "units", "skip", "hours"]] + [
        [10.0 + i * 3 + (i % 3), float(i), "z", float((i * 7) % 5)] for i in range(10)
    ]
    p = make_book(tmp_path / "b.xlsx", {"Data": rows},
                  local_names={("Data", "sf_m_y"): "Data!$A$1:$A$11",
                               ("Data", "sf_m_x"): "Data!$B$1:$B$11,Data!$D$1:$D$11"})
    (m,) = _models(p)
    assert m.attribute_names == ["units", "hours"] and m.X.shape == (10, 2)


def test_settings_are_read(tmp_path: Path) -> None:
    """An opts range of setting/value pairs sets intercept and degree."""
    rows = line_rows(8)
    p = make_book(tmp_path / "b.xlsx", {"Data": rows, "S": [["setting", "value"],
                                                            ["intercept", "no"], ["degree", 2]]},
                  {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9",
                   "sf_a_opts": "S!$A$1:$B$3"})
    (m,) = _models(p)
    assert m.settings["intercept"] is False and m.settings["degree"] == 2


# --- refusals: one plain message naming file, defined name, sheet and cell -------------

def _refused(tmp_path: Path, exc: type[Exception], match: str, **book) -> None:
    sheets = book.pop("sheets", {"Data": line_rows(8)})
    p = make_book(tmp_path / "bad.xlsx", sheets, **book)
    before = _digest(p)
    with pytest.raises(exc, match=match):
        refresh(p)
    assert _digest(p) == before, "a refused refresh must leave the workbook untouched"


def test_refuse_ref_error(tmp_path: Path) -> None:
    """A name pointing at #REF! is refused, naming the file and the name."""
    _refused(tmp_path, DeclarationError, r"bad\.xlsx, name sf_a_x: it points to #REF!",
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "#REF!"})


def test_refuse_other_workbook(tmp_path: Path) -> None:
    """A name pointing into another workbook is refused."""
    _refused(tmp_path, DeclarationError, r"sf_a_y: it points into another workbook",
             names={"sf_a_y": "[1]Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"})


def test_refuse_missing_sheet(tmp_path: Path) -> None:
    """A name pointing at a sheet that does not exist is refused."""
    _refused(tmp_path, DeclarationError, r"sheet 'Nope', which is not in this workbook",
             names={"sf_a_y": "Nope!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"})


def test_refuse_different_lengths(tmp_path: Path) -> None:
    """y and x of different lengths are refused, naming both ranges."""
    _refused(tmp_path, DataError, r"sf_a_x, sheet 'Data' cell B1:B8: x has 8 rows in B1:B8 but y "
             r"has 9 in A1:A9",
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$8"})


def test_refuse_two_column_y(tmp_path: Path) -> None:
    """A response of more than one column is refused."""
    _refused(tmp_path, DataError, r"sf_a_y, sheet 'Data' cell A1:B9: the response must be one "
             "column", names={"sf_a_y": "Data!$A$1:$B$9", "sf_a_x": "Data!$B$1:$B$9"})


def test_refuse_no_numeric_rows(tmp_path: Path) -> None:
    """A model whose rows are all left out is refused."""
    _refused(tmp_path, DataError, r"no rows with numbers in both y and x \(3 rows, all left out\)",
             sheets={"Data": [["cost", "units"], ["a", 1], [None, 2], [3, "b"]]},
             names={"sf_a_y": "Data!$A$1:$A$4", "sf_a_x": "Data!$B$1:$B$4"})


def test_refuse_fewer_rows_than_parameters(tmp_path: Path) -> None:
    """Fewer usable rows than parameters is refused, with both counts."""
    _refused(tmp_path, DataError, r"2 usable rows but the model has 3 parameters",
             sheets={"Data": [["c", "u", "v"], [1, 2, 3], [2, 5, 1]]},
             names={"sf_a_y": "Data!$A$1:$A$3", "sf_a_x": "Data!$B$1:$C$3"})


def test_refuse_unknown_setting(tmp_path: Path) -> None:
    """An unknown setting is refused, naming its cell and listing the known ones."""
    _refused(tmp_path, SettingError, r"sheet 'S' cell B1: unknown setting 'colour' — known "
             r"settings: method",
             sheets={"Data": line_rows(8), "S": [["colour", "blue"]]},
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9",
                    "sf_a_opts": "S!$A$1:$B$1"})


def test_refuse_bad_setting_value(tmp_path: Path) -> None:
    """A setting with a value outside what is allowed is refused: which, allowed, given."""
    _refused(tmp_path, SettingError, r"setting 'degree' must be a whole number from 1 to 10, "
             r"not '2.5'",
             sheets={"Data": line_rows(8), "S": [["degree", 2.5]]},
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9",
                    "sf_a_opts": "S!$A$1:$B$1"})


def test_refuse_duplicate_headers(tmp_path: Path) -> None:
    """Two attribute columns with the same header are refused, naming both cells."""
    rows = [["cost", "units", "Units"]] + [[float(i * 2 + i % 3), float(i), float(i % 4)]
                                            for i in range(8)]
    _refused(tmp_path, DataError, r"two attribute columns are both called 'Units' \(B1 and C1\)",
             sheets={"Data": rows},
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$C$9"})


def test_refuse_constant_column_with_intercept(tmp_path: Path) -> None:
    """A constant attribute with an intercept is refused, naming the column's cells."""
    rows = [["cost", "units", "site"]] + [[float(i * 2 + i % 3), float(i), 7.0] for i in range(8)]
    _refused(tmp_path, DataError, r"cell C2:C9: attribute 'site' has the same value \(7\) in every "
             "used row", sheets={"Data": rows},
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$C$9"})


def test_refuse_collinear_attributes(tmp_path: Path) -> None:
    """Collinear attributes are refused with their names."""
    rows = [["cost", "units", "double"]] + [[float(i * 2 + i % 3), float(i), 2.0 * i]
                                             for i in range(8)]
    _refused(tmp_path, DataError, r"units.*double|double.*units", sheets={"Data": rows},
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$C$9"})


def test_refuse_missing_x(tmp_path: Path) -> None:
    """A model with a response but no attributes is refused."""
    _refused(tmp_path, DeclarationError, r"model 'a' has no x declaration",
             names={"sf_a_y": "Data!$A$1:$A$9"})


def test_refuse_no_models(tmp_path: Path) -> None:
    """A book with no declarations is refused with what to define."""
    _refused(tmp_path, DeclarationError, r"no models are declared — define names sf_<model>_y",
             names={"other": "Data!$A$1"})


def test_refuse_user_name_with_output_role(tmp_path: Path) -> None:
    """A user's name that collides with an output role is refused, not overwritten."""
    _refused(tmp_path, DeclarationError, r"sf_a_coef: 'coef' is a role sheetfit writes",
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9",
                    "sf_a_coef": "Data!$D$1"})


def test_refuse_unknown_role(tmp_path: Path) -> None:
    """A declaration with a mistyped role is refused rather than ignored."""
    _refused(tmp_path, DeclarationError, r"sf_a_ys: unknown role 'ys'",
             names={"sf_a_ys": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"})


def test_refuse_user_sheet_named_like_owned(tmp_path: Path) -> None:
    """A user sheet whose name an owned sheet needs is refused, not overwritten."""
    _refused(tmp_path, DeclarationError, r"sf a coef",
             sheets={"Data": line_rows(8), "sf a coef": [["mine"]]},
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"})


def test_refuse_new_row_with_blank(tmp_path: Path) -> None:
    """A new row with a blank where a number is needed is refused, naming the cell."""
    _refused(tmp_path, DataError, r"sf_a_new, sheet 'P' cell A3: a new row holds blank",
             sheets={"Data": line_rows(8), "P": [["units"], [4.0], [None], [6.0]]},
             names={"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9",
                    "sf_a_new": "P!$A$1:$A$4"})


def test_refuse_not_a_workbook(tmp_path: Path) -> None:
    """A file that is not an xlsx package is refused as input."""
    p = tmp_path / "notes.xlsx"
    p.write_text("not a workbook")
    with pytest.raises(Exception, match="notes.xlsx") as info:
        refresh(p)
    assert type(info.value).__name__ == "PackageError"


def test_output_name_left_at_ref_error_is_replaced(tmp_path: Path) -> None:
    """An output name whose result sheet was deleted by hand (#REF!) is sheetfit's: replaced."""
    p = make_book(tmp_path / "b.xlsx", {"Data": line_rows(8)},
                  {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9",
                   "sf_a_coef": "#REF!"})
    refresh(p)
    names = {d.name: d.text for d in open_package(p).defined_names}
    assert names["sf_a_coef"] == "'sf a coef'!$B$10:$B$11"


def test_identifier_columns_follow_the_rows_they_name(tmp_path: Path) -> None:
    """key and newkey: identifier cells beside the data and new rows, header names them."""
    rows = [["month", "cost", "units"]] + [[f"2026-{m:02d}", 10.0 + 2 * m + (m % 3), float(m)]
                                           for m in range(1, 9)]
    rows[4][1] = None  # a left-out row keeps its identifier
    new = [["units"], [9.0], [10.0]]
    data = [r + [None] + (new[i] if i < 3 else []) for i, r in enumerate(rows)]
    p = make_book(tmp_path / "b.xlsx",
                  {"Data": data, "Plan": [["month"], ["2026-09"], ["2026-10"]]},
                  {"sf_a_y": "Data!$B:$B", "sf_a_x": "Data!$C:$C", "sf_a_key": "Data!$A:$A",
                   "sf_a_new": "Data!$E$1:$E$3", "sf_a_newkey": "Plan!$A$1:$A$3"})
    (m,) = _models(p)
    assert m.keys is not None and [c.name for c in m.keys.columns] == ["month"]
    assert m.keys.columns[0].cell(0) == "Data!A2"
    assert m.keys.values[0] == [f"2026-{k:02d}" for k in range(1, 9)]
    assert 3 not in list(m.used) and m.keys.row(3) == ["2026-04"]
    assert m.new is not None and m.new.keys is not None
    assert m.new.keys.values == [["2026-09", "2026-10"]]


def test_identifiers_must_cover_the_same_rows(tmp_path: Path) -> None:
    p = make_book(tmp_path / "b.xlsx", {"Data": line_rows(6)},
                  {"sf_a_y": "Data!$A$1:$A$7", "sf_a_x": "Data!$B$1:$B$7",
                   "sf_a_key": "Data!$C$2:$C$8"})
    with pytest.raises(DataError, match="do not cover the rows"):
        _models(p)
    p = make_book(tmp_path / "c.xlsx", {"Data": line_rows(6)},
                  {"sf_a_y": "Data!$A$1:$A$7", "sf_a_x": "Data!$B$1:$B$7",
                   "sf_a_newkey": "Data!$C$1:$C$7"})
    with pytest.raises(DeclarationError, match="declares no new rows"):
        _models(p)


def test_rule_declarations_are_checked(tmp_path: Path) -> None:
    """The rule must be numbers, one per term, and only on a least-squares model."""
    base = {"sf_a_y": "Data!$A$1:$A$7", "sf_a_x": "Data!$B$1:$B$7"}
    p = make_book(tmp_path / "a.xlsx", {"Data": line_rows(6), "Rule": [[1.0], [2.0], [3.0]]},
                  {**base, "sf_a_rule": "Rule!$A$1:$A$3"})
    with pytest.raises(DataError, match="the rule has 3 coefficients but the model has 2 terms"):
        _models(p)
    p = make_book(tmp_path / "b.xlsx", {"Data": line_rows(6), "Rule": [[1.0], ["two"]]},
                  {**base, "sf_a_rule": "Rule!$A$1:$A$2"})
    with pytest.raises(DataError, match="text 'two' where a number is needed"):
        _models(p)
    p = make_book(tmp_path / "c.xlsx", {"Data": line_rows(6), "Rule": [[1.0], [2.0]],
                                        "Opts": [["method", "neighbour_mean"]]},
                  {**base, "sf_a_rule": "Rule!$A$1:$A$2", "sf_a_opts": "Opts!$A$1:$B$1"})
    with pytest.raises(DeclarationError, match="no coefficients to compare with a rule"):
        _models(p)
    p = make_book(tmp_path / "d.xlsx", {"Data": line_rows(6), "Rule": [[1.0], [2.0]]},
                  {**base, "sf_a_rule": "Rule!$A$1:$A$2"})
    (m,) = _models(p)
    assert m.rule is not None and m.rule.cells == ["Rule!A1", "Rule!A2"]
