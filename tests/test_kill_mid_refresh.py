"""SIGKILL at seeded random moments of an in-place refresh: the book is whole either way.

After every kill the book holds either its original bytes or the complete refreshed book
(known exactly: the refresh runs with a fixed clock), never anything else; the complete
book recalculates in LibreOffice; and the next refresh leaves no temporary file behind.
The kills land in every phase of the refresh (read, fit, plan, render, graft and write):
one seeded random moment in each of 50 equal slices of 1.2 times the uninterrupted
refresh time, plus the middle of each phase as timed in that uninterrupted run, plus one
kill at the very start and one well after the end.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from books import jobs, make_book

from sheetfit.cli import main

KILLS = 50
DRIVER = Path(__file__).with_name("kill_driver.py")


def _book(path: Path) -> Path:
    """Invented field jobs: a least-squares and a neighbour-mean model over 300 rows."""
    rows = jobs(300, 5)
    n = len(rows)
    return make_book(path, {
        "Data": rows,
        "Opts": [["method", "neighbour_mean"], ["k", 5]],
        "New": [["hours", "km"], [10.0, 20.0], [30.0, 60.0]],
    }, {
        "sf_ls_y": f"Data!$A$1:$A${n}", "sf_ls_x": f"Data!$B$1:$C${n}",
        "sf_nm_y": f"Data!$A$1:$A${n}", "sf_nm_x": f"Data!$B$1:$C${n}",
        "sf_nm_opts": "Opts!$A$1:$B$2", "sf_nm_new": "New!$A$1:$B$3",
    })


def test_killed_refresh_leaves_original_or_complete_book(engine, tmp_path: Path) -> None:
    from engine.compare import assert_cached_values_hold

    book = _book(tmp_path / "jobs.xlsx")
    run = subprocess.run([sys.executable, str(DRIVER), str(book), "20261202", str(KILLS)],
                         capture_output=True, text=True, timeout=600, check=True)
    report = json.loads(run.stdout)
    outcomes, delays = report["outcomes"], report["delays"]
    assert len(outcomes) >= KILLS + 7
    assert set(outcomes) <= {"original", "refreshed"}, outcomes
    assert {"original", "refreshed"} <= set(outcomes)  # kills before and after the rename
    for phase, (start, end) in report["spans"].items():
        assert any(start <= d <= end for d in delays), f"no kill during {phase}"
    # the complete book is a real workbook: LibreOffice recalculates it to its cached values
    assert assert_cached_values_hold(tmp_path / "expected.xlsx", engine, rel=1e-9,
                                     abs_=1e-12) > 1000
    # the next refresh clears what a kill left behind
    work = tmp_path / "work"
    assert main(["refresh", str(work / book.name)]) == 0
    assert sorted(p.name for p in work.iterdir()) == [book.name]
