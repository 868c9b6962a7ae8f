"""The bulk path (column runs streamed into the package at graft time) writes the same cells
as the general path (every cell through xlsxwriter): formula text, cached value and type,
number format and font, on a plan with every kind of run and on every example book."""

from __future__ import annotations

import functools
import shutil
import zipfile
from pathlib import Path
from typing import Any

import numpy as np
import openpyxl
import pytest

import sheetfit.refresh as refresh_mod
from sheetfit.reader.package import open_package
from sheetfit.sheets.columns import template, this_row
from sheetfit.sheets.plan import BookPlan, SheetPlan
from sheetfit.writer import _bulk
from sheetfit.writer.graft import OutputName, graft
from sheetfit.writer.render import render
from tests.books import make_book

EXAMPLES = Path(__file__).resolve().parents[1] / "example_books"
NOW = refresh_mod.dt.datetime(2026, 12, 1, 9, 0, tzinfo=refresh_mod.dt.UTC)


def _cells(path: Path) -> dict[tuple[str, str], tuple[Any, ...]]:
    """Every cell of every sheet: (formula or value, cached value, type, format, bold, italic)."""
    wf = openpyxl.load_workbook(path)
    wv = openpyxl.load_workbook(path, data_only=True)
    out: dict[tuple[str, str], tuple[Any, ...]] = {}
    for ws in wf.worksheets:
        vs = wv[ws.title]
        for row in ws.iter_rows():
            for c in row:
                if c.value is None and not c.has_style:
                    continue
                cached = vs[c.coordinate].value
                out[(ws.title, c.coordinate)] = (
                    c.value, cached, type(cached).__name__, c.number_format, c.font.b, c.font.i)
    return out


def _synthetic(n: int) -> BookPlan:
    s = SheetPlan("sf syn rows")
    s.put(0, 0, "A title & more", style="title")
    s.put(3, 0, "row", style="head")
    s.put(3, 1, "value", style="head")
    rows = np.arange(2, n + 2)
    vals = np.linspace(-1.5, 1e6 / 3, n)
    s.run(0, 4, rows.tolist(), style="row")
    s.run(1, 4, vals, template("=Data!A", rows, "*2+", vals, "-B", this_row), "dec2")
    texts: list[object] = [" lead", "a<b & c>", "tab\tin", "ctl\x01x", "_x0041_", "", None, True]
    k = len(texts)
    s.run(2, 4, [texts[i % k] for i in range(n)], style="flag")
    forms: list[object] = ["", "#N/A", "word", 3.25, False, 7, None, "x&y"]
    s.run(3, 4, [forms[i % k] for i in range(n)],
          template('=IF(B', this_row, '>0,"x&y",T.DIST.2T(1,', rows, '))'), "num")
    s.run(4, 4, [None] * n, style="pct")  # styled blanks
    s.put(4 + min(n - 1, 10), 5, "loose beside a run", style="note")  # inside the runs' rows
    s.put(4 + n + 1, 1, float(vals.sum()), f"=SUM(B5:B{4 + n})", "num")
    s.heights[3] = 30.0
    s.freeze = (4, 1)
    t = SheetPlan("sf syn small")  # no runs: both paths identical by construction
    t.put(0, 0, 1.0, "=1", "num")
    return BookPlan([s, t], [])


# 3 chunks + 3 rows: the middle chunk has no loose cell (one format call per row), the
# first and last merge loose cells into the runs' rows
@pytest.mark.parametrize("n", [1, 7, 3 * _bulk.CHUNK_ROWS + 3])
def test_bulk_and_general_paths_write_the_same_cells(tmp_path: Path, n: int) -> None:
    src = make_book(tmp_path / "src.xlsx", {"Data": [[1.0], [2.0], [3.0]]})
    outs = []
    for bulk in (True, False):
        plan = _synthetic(n)
        rendered = render(plan, tmp_path / f"owned-{bulk}.xlsx", bulk=bulk)
        assert bool(rendered.runs) == bulk
        out = tmp_path / f"out-{bulk}.xlsx"
        graft(open_package(src), rendered, [OutputName("sf_syn_x", "'sf syn rows'!$B$5")], out)
        outs.append(out)
    a, b = _cells(outs[0]), _cells(outs[1])
    assert a == b
    assert a[("sf syn rows", "B5")][0].startswith("=Data!A2*2+")
    # the loose cell inside the runs' rows and the rows after the last chunk are there
    assert a[("sf syn rows", f"F{5 + min(n - 1, 10)}")][0] == "loose beside a run"
    with zipfile.ZipFile(outs[0]) as z:
        xml = next(z.read(i) for i in z.infolist() if i.filename.endswith("sheet2.xml"))
    assert f'<dimension ref="A1:F{6 + n}"/>'.encode() in xml
    assert b"_xlfn.T.DIST.2T(" in xml and b"spans=" not in xml


@pytest.mark.parametrize("book", sorted(p.name for p in EXAMPLES.glob("*.xlsx")))
def test_example_books_same_cells_on_both_paths(tmp_path: Path, book: str,
                                                monkeypatch: pytest.MonkeyPatch) -> None:
    outs = []
    for bulk in (True, False):
        src = tmp_path / f"{bulk}-{book}"
        shutil.copy(EXAMPLES / book, src)
        if not bulk:
            monkeypatch.setattr(refresh_mod, "render",
                                functools.partial(refresh_mod.render, bulk=False))
        refresh_mod.refresh(src, now=NOW)
        outs.append(src)
    assert _cells(outs[0]) == _cells(outs[1])


def test_user_entries_are_copied_compressed_as_they_were(tmp_path: Path) -> None:
    src = EXAMPLES / "delivery_costs.xlsx"
    out = tmp_path / "out.xlsx"
    refresh_mod.refresh(src, out, now=NOW)
    with zipfile.ZipFile(src) as zs, zipfile.ZipFile(out) as zo:
        names = set(zo.namelist())
        kept = [i for i in zs.infolist()
                if i.filename in names and zo.read(i.filename) == zs.read(i)]
        assert any("worksheets/" in i.filename for i in kept)  # the user's data sheets
        for i in kept:  # same bytes → the same compressed stream, not a second deflate
            o = zo.getinfo(i.filename)
            assert (o.CRC, o.compress_size, o.compress_type) == (
                i.CRC, i.compress_size, i.compress_type)
