"""The fast reader's column store gives exactly the raw values (same values, same types)
as the list of rows python-calamine hands over, for every cell kind, across row blocks."""

from __future__ import annotations

import datetime as dt
import math
import random
import zipfile
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import python_calamine
import xlsxwriter

from sheetfit.reader import _dense, _sheetxml
from sheetfit.reader._dense import Dense, dense_from_rows
from sheetfit.reader._sheetxml import part_bytes
from sheetfit.reader.columns import column_values
from sheetfit.reader.values import _dense_sheet


def _same(a: Any, b: Any) -> bool:
    """Same type and value (a float nan equals a float nan)."""
    if type(a) is not type(b):
        return False
    if isinstance(a, float) and math.isnan(a):
        return math.isnan(b)
    return bool(a == b)


def _ref_raw(rows: list[list[Any]], r: int, c: int) -> Any:
    if r < 1 or c < 1 or r > len(rows) or c > len(rows[r - 1]):
        return ""
    return rows[r - 1][c - 1]


def _ref_last(rows: list[list[Any]], col1: int, col2: int) -> int:
    for i in range(len(rows) - 1, -1, -1):
        if any(v != "" for v in rows[i][col1 - 1:col2]):
            return i + 1
    return 0


def _grid(seed: int, height: int) -> list[list[Any]]:
    """Rows from A1: two empty columns, a number column with a header and a few gaps, a
    mixed column of every raw kind, a mostly-text column, an empty column, a float-nan."""
    rng = random.Random(seed)
    kinds = [
        lambda: rng.uniform(-1e6, 1e6), lambda: "", lambda: "text", lambda: True,
        lambda: False, lambda: 7, lambda: 0, lambda: -0.0, lambda: dt.date(2026, 1, 2),
        lambda: dt.datetime(2026, 1, 2, 3, 4), lambda: dt.time(5, 6),
        lambda: dt.timedelta(hours=30), lambda: float("nan"), lambda: " ",
    ]
    rows = []
    for i in range(height):
        number: Any = "y" if i == 0 else ("" if rng.random() < 0.01 else rng.gauss(0, 1))
        mixed = rng.choice(kinds)()
        texty = f"k{rng.randrange(50)}" if rng.random() < 0.7 else rng.random()
        rows.append(["", "", number, mixed, texty, "", float("nan") if i == 5 else ""])
    return rows


@pytest.mark.parametrize("seed", [1, 2])
def test_column_store_equals_rows(seed: int, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(_dense, "BLOCK", 97)  # many blocks, the last one short
    rows = _grid(seed, 1000)
    # calamine's iterator: all rows from row 1, the cells from the first column holding one
    store = dense_from_rows(([*r[2:]] for r in rows), len(rows), 7)
    assert isinstance(store.others[4], np.ndarray)  # the mostly-text column is an array
    assert store.numbers[0] is None and store.numbers[5] is None
    for r in range(len(rows) + 3):
        for c in range(10):
            assert _same(store.raw(r, c), _ref_raw(rows, r, c)), (r, c)
    rng = random.Random(seed)
    spans = [(1, 1000), (2, 1000), (2, 1200), (0, 5), (990, 1010), (1001, 1005), (500, 500)]
    spans += [tuple(sorted(rng.sample(range(1, 1100), 2))) for _ in range(30)]
    for c in range(10):
        for r1, r2 in spans:
            got = store.column(c, r1, r2)
            want = [_ref_raw(rows, r, c) for r in range(r1, r2 + 1)]
            seq = got.tolist() if isinstance(got, np.ndarray) else got
            assert len(seq) == len(want) and all(map(_same, seq, want)), (c, r1, r2)
    for c1 in range(1, 8):
        for c2 in range(c1, 9):
            assert store.last_row(c1, c2) == _ref_last(rows, c1, c2), (c1, c2)


def test_plain_numbers_come_back_as_a_read_only_array() -> None:
    rows = [["x"]] + [[float(i) / 3] for i in range(200)]
    store = dense_from_rows(rows, len(rows), 1)
    got = store.column(1, 2, 201)
    assert isinstance(got, np.ndarray) and not got.flags.writeable
    assert isinstance(store.column(1, 1, 201), list)  # the header is text
    assert isinstance(store.column(1, 2, 202), list)  # one row beyond the rectangle
    # the array and the list of the same floats classify the same, overrides included
    as_list = [float(v) for v in got]
    errors, unsaved = {(5, 1): "#N/A"}, {(9, 1)}
    a = column_values("S", 1, 2, got, errors, unsaved, False)
    b = column_values("S", 1, 2, as_list, errors, unsaved, False)
    assert np.array_equal(a.kind, b.kind) and a.text == b.text
    assert np.array_equal(a.number, b.number, equal_nan=True)
    assert not np.isnan(store.numbers[0][4])  # type: ignore[index]  # store untouched


def test_a_float_nan_among_numbers_stays_a_float_nan() -> None:
    store = dense_from_rows([[1.0], [float("nan")], [2.0]], 3, 1)
    assert _same(store.raw(2, 1), float("nan"))
    got = store.column(1, 1, 3)
    assert isinstance(got, list) and all(map(_same, got, [1.0, float("nan"), 2.0]))
    assert store.last_row(1, 1) == 3


def test_rows_that_do_not_fill_the_rectangle_are_refused() -> None:
    with pytest.raises(ValueError):
        dense_from_rows([[1.0], [2.0]], 3, 1)
    with pytest.raises(ValueError):
        dense_from_rows([[1.0, 2.0], [3.0]], 2, 2)
    assert Dense(0, [], []).column(1, 1, 3) == ["", "", ""]


def test_a_real_sheet_matches_calamine_rows(tmp_path: Path,
                                            monkeypatch: pytest.MonkeyPatch) -> None:
    """A book with data from C3 and more rows than a block: the store built from
    calamine's row iterator equals calamine's own list of rows from A1, cell by cell."""
    monkeypatch.setattr(_dense, "BLOCK", 64)
    path = tmp_path / "b.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("S")
    day = wb.add_format({"num_format": "yyyy-mm-dd"})
    rng = random.Random(7)  # seeded
    for i in range(300):
        ws.write_number(2 + i, 2, rng.gauss(0, 1))
        if i % 7 == 0:
            ws.write_string(2 + i, 3, f"t{i}")
        if i % 11 == 0:
            ws.write_boolean(2 + i, 4, i % 2 == 0)
        if i % 13 == 0:
            ws.write_datetime(2 + i, 5, dt.datetime(2026, 1, 1) + dt.timedelta(days=i), day)
    wb.close()
    book = python_calamine.load_workbook(str(path))
    rows = book.get_sheet_by_name("S").to_python(skip_empty_area=False)
    store = _dense_sheet(book.get_sheet_by_name("S"))
    book.close()
    assert store.height == len(rows) == 302
    for r in range(len(rows) + 2):
        for c in range(len(rows[0]) + 2):
            assert _same(store.raw(r, c), _ref_raw(rows, r, c)), (r, c)


def test_a_sheet_part_is_read_whole_into_one_buffer(tmp_path: Path,
                                                    monkeypatch: pytest.MonkeyPatch) -> None:
    """The part buffer filled a chunk at a time holds exactly the part's bytes."""
    monkeypatch.setattr(_sheetxml, "_READ_CHUNK", 1000)  # many chunks, the last one short
    path = tmp_path / "b.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("S")
    for i in range(500):
        ws.write_number(i, 0, i / 7)
    wb.close()
    with zipfile.ZipFile(path) as zf:
        for member in zf.namelist():
            assert bytes(part_bytes(zf, member)) == zf.read(member), member
