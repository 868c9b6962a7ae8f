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
from sheetfit.sheets.columns import Pieces, Run, Template, template, this_row
from sheetfit.sheets.plan import BookPlan, SheetPlan
from sheetfit.vectors import Lazy
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
                if type(cached) is int:  # a number is a double in the file: "-3" and "-3.0"
                    cached = float(cached)  # are the same cell (openpyxl types them apart)
                out[(ws.title, c.coordinate)] = (
                    c.value, cached, type(cached).__name__, c.number_format, c.font.b, c.font.i)
    return out


def _lazy(v: Any) -> Any:
    """The same vector made a block at a time (as the planners hand long columns over)."""
    if isinstance(v, np.ndarray):
        return Lazy(len(v), lambda a, b: v[a:b].copy(), v.dtype)
    return Lazy(len(v), lambda a, b: list(v[a:b]), None)


def _synthetic(n: int, lazy: bool = False) -> BookPlan:
    s = SheetPlan("sf syn rows")
    if lazy:  # every run's values and vectors lazy; the cells must not change
        plain_run = s.run

        def run(col: int, row0: int, values: Any, formula: Any = None,
                style: str = "text") -> Any:
            if formula is not None:
                formula = Template(formula.text, tuple(
                    None if a is None else _lazy(a) for a in formula.args))
            return plain_run(col, row0, _lazy(values), formula, style)
        s.run = run  # type: ignore[method-assign]
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
    # long formulas moving down row by row: written as shared formulas on the bulk path
    s.run(6, 4, vals * 2, template('=IF(ISNUMBER(B', this_row, '),B', this_row,
                                   '*2+0*Data!$A$1,0)+0*LEN("pad text")'), "num")
    s.run(7, 4, [float(i) if i % 3 else "" for i in range(n)],
          template('=IF(ISNUMBER(Data!A', rows, '),Data!A', rows, '*3,0)&""&"padding"'), "num")
    s.put(4 + n + 1, 1, float(vals.sum()), f"=SUM(B5:B{4 + n})", "num")
    # a row of long texts written a piece at a time, between two loose cells of its row
    s.put(2, 8, "before the span", style="label")
    s.span(2, 9, Pieces("0123456789abcdef&<" * 7, 30))  # 126 characters: 5 cells
    s.put(2, 15, "after the span", style="note")
    s.heights[3] = 30.0
    s.freeze = (4, 1)
    t = SheetPlan("sf syn small")  # no runs: both paths identical by construction
    t.put(0, 0, 1.0, "=1", "num")
    return BookPlan([s, t], [])


# 3 chunks + 3 rows: the middle chunk has no loose cell (one format call per row), the
# first and last merge loose cells into the runs' rows
@pytest.mark.parametrize("lazy", [False, True])
@pytest.mark.parametrize("n", [1, 7, 3 * _bulk.CHUNK_ROWS + 3])
def test_bulk_and_general_paths_write_the_same_cells(tmp_path: Path, n: int, lazy: bool,
                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    """The bulk path (runs merged in chunks) and the general one (every cell through
    xlsxwriter) write the same cells; with ``lazy`` the bulk path's runs are made a block
    at a time (``sheetfit.vectors.Lazy``) and still write those cells."""
    monkeypatch.setattr(_bulk, "_SPAN_BYTES", 40)  # the span's row handed on in pieces
    src = make_book(tmp_path / "src.xlsx", {"Data": [[1.0], [2.0], [3.0]]})
    outs = []
    for bulk in (True, False):
        plan = _synthetic(n, lazy=lazy and bulk)
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
    assert f'<dimension ref="A1:P{6 + n}"/>'.encode() in xml
    assert [a[("sf syn rows", f"{c}3")][0] for c in "IJKLMNP"] == [
        "before the span", *[("0123456789abcdef&<" * 7)[k:k + 30] for k in range(0, 126, 30)],
        "after the span"]
    assert b"_xlfn.T.DIST.2T(" in xml and b"spans=" not in xml
    if n > 1:  # openpyxl translated the shared formulas into the full ones compared above
        assert xml.count(b't="shared" ref=') == 2


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


def test_only_formulas_that_move_down_with_the_row_are_shared() -> None:
    rows = np.arange(7, 12)
    pad = '+0*LEN("a long enough formula text")'

    def run(*parts: object) -> Run:
        return Run(2, 4, np.zeros(5), "num", template(*parts))  # type: ignore[arg-type]

    assert _bulk.shareable(run("=Data!B", rows, "*'sf m coef'!$B$7", pad))
    assert _bulk.shareable(run("=IF(C", this_row, '="","",B', this_row, ")", pad))
    assert not _bulk.shareable(run("=T.DIST.2T(1,", rows, ")", pad))  # a number, not a row
    assert not _bulk.shareable(run("=Data!B", rows, "*B7", pad))  # a relative literal row
    assert not _bulk.shareable(run("=Data!B", rows[[0, 1, 2, 4, 3]], pad))  # not contiguous
    assert not _bulk.shareable(run("=Data!B", rows))  # short: written in full
    assert not _bulk.shareable(run("=Data!B", rows, "*Data!$B$2+LOG10(", this_row, ")", pad))
    # a lazy row vector: its steps are checked across the blocks it is read in
    long = np.arange(3, 3 + 150_000)
    lazy_run = Run(2, 4, np.zeros(len(long)), "num", template(
        "=Data!B", _lazy(long), pad))
    assert _bulk.shareable(lazy_run)
    broken = long.copy()
    broken[1 << 16:] += 1  # a gap exactly at a block boundary
    assert not _bulk.shareable(Run(2, 4, np.zeros(len(long)), "num",
                                   template("=Data!B", _lazy(broken), pad)))


def test_libreoffice_recalculates_bulk_chunks_as_cached(tmp_path: Path, engine: Any,
                                                        monkeypatch: pytest.MonkeyPatch) -> None:
    """Chunks of 64 rows: the row-wise chunks, shared formulas and loose rows merged into
    run rows all occur in a 300-row book; LibreOffice's recalculation equals every cached
    value (least squares with a text attribute and identifiers, neighbour mean, strip)."""
    from engine.compare import assert_cached_values_hold

    from tests.books import jobs

    monkeypatch.setattr(_bulk, "CHUNK_ROWS", 64)
    rows = jobs(300, seed=5)
    rows[0] += ["job", "region"]
    for i, r in enumerate(rows[1:]):
        r += [f"J{i:04d}", ("north", "south", "east")[i % 3]]
    rows[40][1] = None  # a left-out row: the data rows are not contiguous
    book = make_book(tmp_path / "jobs.xlsx", {"Jobs": rows}, {
        "sf_cost_y": "Jobs!$A$2:$A$301", "sf_cost_x": "Jobs!$B$2:$C$301",
        "sf_cost_key": "Jobs!$D$2:$D$301",
        "sf_area_y": "Jobs!$A$2:$A$301", "sf_area_x": "Jobs!$B$2:$B$301,Jobs!$E$2:$E$301",
        "sf_near_y": "Jobs!$A$2:$A$301", "sf_near_x": "Jobs!$B$2:$C$301",
        "sf_near_opts": "Jobs!$G$1:$H$2",
    })
    wb = openpyxl.load_workbook(book)
    wb["Jobs"]["G1"], wb["Jobs"]["H1"] = "method", "neighbour mean"
    wb["Jobs"]["G2"], wb["Jobs"]["H2"] = "k", 5
    wb.save(book)
    refresh_mod.refresh(book, now=NOW)
    with zipfile.ZipFile(book) as z:
        xml = b"".join(z.read(n) for n in z.namelist() if "worksheets/" in n)
    assert b't="shared"' in xml
    assert assert_cached_values_hold(book, engine, min_checked=3000) >= 3000
