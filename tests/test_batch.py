"""Batch refresh: a folder or pattern of books, a pool of workers, the table and report."""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
import shutil
import sys
from pathlib import Path

import books as batch_helpers  # the dying worker's stand-in lives with the book helpers
import pytest
from books import jobs, line_rows, make_book

from sheetfit.batch import Outcome, refresh_one
from sheetfit.batch import local as batch_local
from sheetfit.batch.discover import discover, is_batch
from sheetfit.batch.local import DIED, run_local
from sheetfit.batch.progress import progress
from sheetfit.batch.table import counts, table
from sheetfit.cli import main

NOW = dt.datetime(2026, 6, 30, 12, 0, tzinfo=dt.UTC)
LINE = {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"}
JOBS = {"sf_j_y": "Jobs!$A$1:$A$31", "sf_j_x": "Jobs!$B$1:$C$31"}

#: The books of the month-end folder (relative paths) and what each must come to.
EXPECTED = {
    "held.xlsx": "skipped",
    "invoices/broken.xlsx": "refused",
    "invoices/jobs.xlsx": "refreshed",
    "line.xlsx": "refreshed",
    "notes-only.xlsx": "skipped",
    "regions/north/line.xlsx": "refreshed",
}


def month_end(root: Path) -> Path:
    """A folder of invented books: good ones, a subfolder, a broken one, one without
    declarations, one held open, and the side files discovery must leave alone."""
    (root / "invoices").mkdir(parents=True)
    (root / "regions" / "north").mkdir(parents=True)
    (root / ".hidden").mkdir()
    make_book(root / "line.xlsx", {"Data": line_rows(8)}, LINE)
    make_book(root / "regions" / "north" / "line.xlsx", {"Data": line_rows(8)}, LINE)
    make_book(root / "invoices" / "jobs.xlsx", {"Jobs": jobs(30, seed=3)}, JOBS)
    make_book(root / "notes-only.xlsx", {"Notes": [["just text"]]}, {})
    make_book(root / "held.xlsx", {"Data": line_rows(8)}, LINE)
    (root / ".~lock.held.xlsx#").write_text("someone,host")
    (root / "invoices" / "broken.xlsx").write_bytes(b"this is not a zip archive")
    # side files: none of these is a book of the batch
    shutil.copy(root / "line.xlsx", root / "line.before-refresh.xlsx")
    shutil.copy(root / "line.xlsx", root / "~$closed.xlsx")  # owner file of no book here
    shutil.copy(root / "line.xlsx", root / ".sheetfit-line.xlsx.abcd1234.tmp")
    shutil.copy(root / "line.xlsx", root / ".hidden.xlsx")
    shutil.copy(root / "line.xlsx", root / ".hidden" / "inside.xlsx")
    (root / "readme.txt").write_text("not a workbook")
    return root


def rel(root: Path, outcomes: list[Outcome]) -> dict[str, tuple[str, int, str]]:
    """Outcomes by relative path, without the seconds (which differ from run to run)."""
    out = {}
    for o in outcomes:
        name = Path(o.book).relative_to(root).as_posix()
        out[name] = (o.status, o.models, o.message.replace(str(root) + "/", ""))
    return out


def snapshot(root: Path) -> dict[str, bytes]:
    return {p.relative_to(root).as_posix(): p.read_bytes()
            for p in sorted(root.rglob("*")) if p.is_file()}


def test_discovery_finds_books_and_leaves_side_files(tmp_path: Path) -> None:
    root = month_end(tmp_path / "m")
    found = [p.relative_to(root).as_posix() for p in discover(root)]
    assert found == sorted(EXPECTED)
    assert is_batch(root) and is_batch(str(root / "*.xlsx"))
    assert not is_batch(root / "line.xlsx") and not is_batch(root / "missing.xlsx")
    # an existing file whose name holds pattern characters is one book
    odd = make_book(tmp_path / "q[1].xlsx", {"Data": line_rows(8)}, LINE)
    assert not is_batch(odd)


def test_folder_refresh_statuses_table_and_exit(tmp_path: Path, capsys) -> None:
    root = month_end(tmp_path / "m")
    broken = (root / "invoices" / "broken.xlsx").read_bytes()
    held = (root / "held.xlsx").read_bytes()
    stale = ".sheetfit-line.xlsx.abcd1234.tmp"  # what a killed refresh of line.xlsx left
    side = {n: b for n, b in snapshot(root).items() if n not in EXPECTED and n != stale}
    assert main(["refresh", str(root), "--jobs", "2"]) == 2  # the broken book is refused
    captured = capsys.readouterr()
    assert captured.err == ""  # no progress bar when stderr is not a terminal
    lines = captured.out.splitlines()
    assert lines[0].split() == ["book", "models", "status", "seconds", "message"]
    assert lines[-1] == "6 books: 3 refreshed, 2 skipped, 1 refused, 0 fault"
    rows = {line.split()[0]: line.split()[2] for line in lines[1:-1]}
    assert rows == EXPECTED  # books shown by their path below the folder
    assert all(len(line) <= 100 for line in lines)
    held_row = next(line for line in lines if "held.xlsx" in line)
    assert "open in a spreadsheet program" in held_row
    # the refused, skipped and side files keep their bytes; the good books were rewritten
    assert (root / "invoices" / "broken.xlsx").read_bytes() == broken
    assert (root / "held.xlsx").read_bytes() == held
    after = snapshot(root)
    assert {n: after[n] for n in side} == side
    # no temporary or lock files left: refreshing line.xlsx also cleared the stale one
    assert set(after) == set(side) | set(EXPECTED)


def test_pool_equals_one_process_and_single_refreshes(tmp_path: Path) -> None:
    """--jobs 2 and --jobs 1 give the same outcomes, and every refreshed book is byte for
    byte the book a single-book refresh writes (the same fixed refresh time)."""
    pooled, alone, single = (month_end(tmp_path / n) for n in ("pooled", "alone", "single"))
    options = {"now": NOW}
    by_pool = run_local(discover(pooled), 2, options)
    by_one = run_local(discover(alone), 1, options)
    by_single = [refresh_one(b, now=NOW) for b in discover(single)]
    assert [Path(o.book) for o in by_pool] == discover(pooled)  # in the order of the books
    assert rel(pooled, by_pool) == rel(alone, by_one) == rel(single, by_single)
    assert {n: s for n, (s, _, _) in rel(pooled, by_pool).items()} == EXPECTED
    assert snapshot(pooled) == snapshot(alone) == snapshot(single)
    assert snapshot(pooled)["line.xlsx"] != snapshot(month_end(tmp_path / "fresh"))["line.xlsx"]


def test_report_csv_and_json(tmp_path: Path, capsys) -> None:
    root = month_end(tmp_path / "m")
    assert main(["refresh", str(root), "--jobs", "1", "--report",
                 str(tmp_path / "r.csv")]) == 2
    with open(tmp_path / "r.csv", newline="", encoding="utf-8") as f:
        got = list(csv.DictReader(f))
    assert [r["book"] for r in got] == [str(root / n) for n in EXPECTED]
    assert {Path(r["book"]).relative_to(root).as_posix(): r["status"] for r in got} == EXPECTED
    assert list(got[0]) == ["book", "models", "status", "seconds", "message"]
    held = next(r for r in got if r["book"].endswith("held.xlsx"))
    assert held["message"].endswith("(--force refreshes it anyway)")  # never clipped
    assert main(["refresh", str(root), "--jobs", "1", "--report",
                 str(tmp_path / "r.json")]) == 2
    rows = json.loads((tmp_path / "r.json").read_text(encoding="utf-8"))
    assert [(r["book"], r["status"]) for r in rows] == [(r["book"], r["status"]) for r in got]
    assert {r["models"] for r in rows} == {0, 1}
    assert all(isinstance(r["seconds"], float) for r in rows)
    capsys.readouterr()
    # a report that is neither: refused before any book is touched
    before = snapshot(root)
    assert main(["refresh", str(root), "--report", str(tmp_path / "r.txt")]) == 2
    assert capsys.readouterr().err.strip().endswith("give a path ending in .csv or .json")
    assert snapshot(root) == before


def test_glob_pattern(tmp_path: Path, capsys) -> None:
    root = month_end(tmp_path / "m")
    before = snapshot(root)
    assert main(["refresh", str(root / "**" / "line.xlsx"), "--jobs", "2"]) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[-1] == "2 books: 2 refreshed, 0 skipped, 0 refused, 0 fault"
    after = snapshot(root)
    changed = {n for n in before if before[n] != after.get(n)}
    assert changed == {"line.xlsx", "regions/north/line.xlsx",
                       ".sheetfit-line.xlsx.abcd1234.tmp"}  # (a stale temporary file, cleared)
    assert out.splitlines()[1].split()[0] == "line.xlsx"  # below the deepest common folder
    assert main(["refresh", str(root / "nothing-*.xlsx")]) == 2
    assert "no workbooks found" in capsys.readouterr().err


def test_out_with_a_folder_is_refused_in_one_line(tmp_path: Path, capsys) -> None:
    root = month_end(tmp_path / "m")
    before = snapshot(root)
    assert main(["refresh", str(root), "--out", str(tmp_path / "x.xlsx")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("sheetfit: refused: --out writes one")
    assert snapshot(root) == before and not (tmp_path / "x.xlsx").exists()


def test_report_with_one_book_is_refused(tmp_path: Path, capsys) -> None:
    book = make_book(tmp_path / "one.xlsx", {"Data": line_rows(8)}, LINE)
    before = book.read_bytes()
    assert main(["refresh", str(book), "--report", str(tmp_path / "r.csv")]) == 2
    assert "--report is for a folder or pattern" in capsys.readouterr().err
    assert book.read_bytes() == before


def test_a_dying_worker_faults_its_book_and_the_rest_run(tmp_path: Path, monkeypatch,
                                                          capsys) -> None:
    """A worker that ends its own process on one book: that book is a fault, every other
    book is refreshed (also those the broken pool stopped), and the run ends with exit 1."""
    root = tmp_path / "m"
    root.mkdir()
    for i in range(6):
        make_book(root / f"b{i}.xlsx", {"Data": line_rows(8)}, LINE)
    dies = make_book(root / batch_helpers.DIES, {"Data": line_rows(8)}, LINE)
    before = dies.read_bytes()
    monkeypatch.setattr(batch_local, "_refresh", batch_helpers.die_in_child)
    got = {Path(o.book).name: o for o in run_local(discover(root), 2, {"now": NOW})}
    assert got[batch_helpers.DIES].status == "fault" and got[batch_helpers.DIES].message == DIED
    assert {n: o.status for n, o in got.items() if n != batch_helpers.DIES} == \
        {f"b{i}.xlsx": "refreshed" for i in range(6)}
    assert dies.read_bytes() == before
    assert sorted(p.name for p in root.iterdir()) == sorted(got)  # no leftovers
    # the same through the command line: exit 1 and the count line says so
    assert main(["refresh", str(root), "--jobs", "3"]) == 1
    assert capsys.readouterr().out.splitlines()[-1] == \
        "7 books: 6 refreshed, 0 skipped, 0 refused, 1 fault"
    # in one process the stand-in does not die: the trick is confined to children
    assert run_local([dies], 1, {"now": NOW})[0].status == "refreshed"


def test_table_clips_messages_to_the_width() -> None:
    long = Outcome("a/very/long/folder/name/book.xlsx", "refused", 0, 0.25, "word " * 80)
    short = Outcome("b.xlsx", "refreshed", 3, 1.5, "m: least squares")
    text = table([long, short], width=70)
    assert all(len(line) <= 70 for line in text.splitlines())
    assert text.splitlines()[1].endswith("…") and text.splitlines()[2].endswith("least squares")
    assert counts([long, short]) == "2 books: 1 refreshed, 0 skipped, 1 refused, 0 fault"


def test_progress_bar_only_on_a_terminal(monkeypatch) -> None:
    class Terminal(io.StringIO):
        def isatty(self) -> bool:
            return True

    screen = Terminal()
    monkeypatch.setattr(sys, "stderr", screen)
    with progress(2) as advance:
        advance(Outcome("a.xlsx", "refreshed", 1, 0.1, ""))
        advance(Outcome("b.xlsx", "skipped", 0, 0.1, ""))
    assert "refreshing" in screen.getvalue() and "2/2" in screen.getvalue()
    plain = io.StringIO()
    monkeypatch.setattr(sys, "stderr", plain)
    with progress(1) as advance:
        advance(Outcome("a.xlsx", "refreshed", 1, 0.1, ""))
    assert plain.getvalue() == ""


@pytest.mark.parametrize("bad", ["0", "-2", "two"])
def test_jobs_must_be_a_positive_whole_number(bad: str, tmp_path: Path, capsys) -> None:
    with pytest.raises(SystemExit) as stop:
        main(["refresh", str(tmp_path), "--jobs", bad])
    assert stop.value.code == 2 and "--jobs" in capsys.readouterr().err


def test_sigterm_stops_the_run_cleanly(tmp_path: Path) -> None:
    """SIGTERM mid-run: exit 143 with one line; no book started after it; every book is
    its original or a complete refreshed book; no temporary or lock file left."""
    import os
    import signal
    import subprocess
    import time

    from sheetfit.reader.package import open_package

    root = tmp_path / "m"
    root.mkdir()
    for i in range(40):
        make_book(root / f"b{i:02}.xlsx", {"Jobs": jobs(30, seed=i)}, JOBS)
    before = snapshot(root)
    run = subprocess.Popen([sys.executable, "-m", "sheetfit", "refresh", str(root), "--jobs",
                            "2"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while snapshot_changed(root, before) == 0 and time.monotonic() < deadline:
        time.sleep(0.05)
    run.send_signal(signal.SIGTERM)
    out, err = run.communicate(timeout=120)
    assert run.returncode == 143, (out, err)
    assert err.strip().count("\n") == 0
    assert err.startswith("sheetfit: stopped by SIGTERM after ") and " of 40 books" in err
    after = snapshot(root)
    assert set(after) == set(before)
    changed = [n for n in before if after[n] != before[n]]
    assert 0 < len(changed) < 40
    for name in changed:  # a refreshed book is complete: it opens and carries the index
        assert "sf index" in [s.name for s in open_package(root / name).sheets]
    assert not [n for n in os.listdir(root) if n.startswith(".")]


def snapshot_changed(root: Path, before: dict[str, bytes]) -> int:
    return sum(1 for n, b in before.items() if (root / n).read_bytes() != b)
