"""Bounded time and memory: a stray value in the last row of the sheet, and a million styled
blank rows after the data, refresh in a child process under a 1.5 GB address-space cap and
a time limit."""

from __future__ import annotations

import json
import resource
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest
from books import line_rows, make_book

from sheetfit.reader.package import open_package

#: Address space the child may use (RLIMIT_AS), and its wall-clock limit.
MEMORY_CAP = 1536 * 1024 * 1024
TIME_LIMIT = 120.0

_CHILD = """
import json, resource, sys, time
def peak_kib():  # VmHWM: this program's own peak (ru_maxrss also counts the forking parent)
    hwm = [int(l.split()[1]) for l in open("/proc/self/status") if l.startswith("VmHWM:")]
    return hwm[0] if hwm else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t = time.perf_counter()
from sheetfit.cli import main
status = main(["refresh", sys.argv[1], "--out", sys.argv[2]])
print(json.dumps({"status": status, "seconds": time.perf_counter() - t,
                  "peak_mib": peak_kib() / 1024}))
"""


def _cap() -> None:
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_CAP, MEMORY_CAP))


def _refresh_in_child(book: Path, out: Path) -> dict:
    done = subprocess.run([sys.executable, "-c", _CHILD, str(book), str(out)],
                          capture_output=True, text=True, timeout=TIME_LIMIT, preexec_fn=_cap,
                          check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    report: dict = json.loads(done.stdout.strip().splitlines()[-1])
    print(book.name, report)  # the figures, for the record (pytest -s)
    return report


def _with_rows(src: Path, dst: Path, rows: bytes, dimension: bytes | None = None) -> Path:
    with zipfile.ZipFile(src) as zi, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zo:
        for info in zi.infolist():
            data = zi.read(info.filename)
            if info.filename == "xl/worksheets/sheet1.xml":
                data = data.replace(b"</sheetData>", rows + b"</sheetData>")
                if dimension is not None:
                    data = data.replace(b'<dimension ref="A1:B13"/>', dimension)
            zo.writestr(info, data)
    return dst


@pytest.fixture
def line_book(tmp_path: Path) -> Path:
    return make_book(tmp_path / "line.xlsx", {"Data": line_rows(12)},
                     {"sf_m_y": "Data!$A:$A", "sf_m_x": "Data!$B:$B"})


def test_value_in_the_last_cell_of_the_sheet(line_book: Path, tmp_path: Path) -> None:
    """Whole-column y and x; a value at XFD1048576 (the sheet's last cell): the fast reader's
    rectangle would be 17 billion cells, the streaming reader keeps only the cells that hold
    values."""
    book = _with_rows(line_book, tmp_path / "far.xlsx",
                      b'<row r="1048576"><c r="XFD1048576"><v>7</v></c></row>',
                      b'<dimension ref="A1:XFD1048576"/>')
    report = _refresh_in_child(book, tmp_path / "far_out.xlsx")
    assert report["status"] == 0 and report["seconds"] < 30


def test_a_million_styled_blank_rows_after_the_data(line_book: Path, tmp_path: Path) -> None:
    """Whole-column y and x; rows 14..1,048,576 each hold three styled blank cells (a book
    formatted to the bottom): read to the last row holding a value, not beyond."""
    rows = b"".join(
        b'<row r="%d" s="1" customFormat="1"><c r="A%d" s="1"/><c r="B%d" s="1"/>'
        b'<c r="C%d" s="1"/></row>' % (r, r, r, r) for r in range(14, 1_048_577)
    )
    book = _with_rows(line_book, tmp_path / "styled.xlsx", rows, b'<dimension ref="A1:C1048576"/>')
    report = _refresh_in_child(book, tmp_path / "styled_out.xlsx")
    assert report["status"] == 0 and report["seconds"] < 30


def test_a_dimension_that_claims_the_whole_sheet(line_book: Path, tmp_path: Path) -> None:
    """A <dimension> claiming A1:XFD1048576 over 13 rows of data (a writer's lie, or an
    attack on readers that size their table from it): bounded, and the fit is the plain
    book's."""
    book = _with_rows(line_book, tmp_path / "claim.xlsx", b"", b'<dimension ref="A1:XFD1048576"/>')
    assert b"XFD1048576" in zipfile.ZipFile(book).read("xl/worksheets/sheet1.xml")
    report = _refresh_in_child(book, tmp_path / "claim_out.xlsx")
    plain = _refresh_in_child(line_book, tmp_path / "plain_out.xlsx")
    assert report["status"] == 0 and report["seconds"] < 30
    coef = open_package(tmp_path / "plain_out.xlsx").sheet("sf m coef").part
    with zipfile.ZipFile(tmp_path / "claim_out.xlsx") as a, \
            zipfile.ZipFile(tmp_path / "plain_out.xlsx") as b:
        assert a.read(coef) == b.read(coef)  # same coefficients, checks and figures
    assert plain["status"] == 0
