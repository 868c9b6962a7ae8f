"""sheetfit watch: one refresh per finished save, never on its own write, held and
undeclared books skipped, refusals reported, clean stops on SIGINT and SIGTERM.

The watcher tests use real file events in a temporary folder and a settle interval of
SETTLE seconds. Every wait polls a condition with a deadline (LIMIT seconds) and fails
naming what did not happen; "nothing more happened" is shown by waiting for the
watcher's own count of the event it dismissed (e.g. its own write), never by sleeping.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import IO

import pytest
from books import line_rows, make_book

from sheetfit.batch import Outcome
from sheetfit.reader.package import open_package
from sheetfit.watch import INVALID_TRIES, Watcher, book_of_lock, is_book_name, line

NAMES = {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"}
SETTLE = 0.3
LIMIT = 20.0


def until(cond: Callable[[], bool], what: str, limit: float = LIMIT) -> None:
    """Poll ``cond`` until it holds; fail after ``limit`` seconds naming ``what``."""
    deadline = time.monotonic() + limit
    while not cond():
        if time.monotonic() > deadline:
            pytest.fail(f"not within {limit:g} s: {what}")
        time.sleep(0.02)


def built(path: Path, names: dict[str, str] | None = None) -> bytes:
    """A book's bytes, built beside ``path`` under a name the watcher ignores."""
    part = path.with_name(path.name + ".part")
    make_book(part, {"Data": line_rows(8)}, NAMES if names is None else names)
    data = part.read_bytes()
    part.unlink()
    return data


def save(path: Path, data: bytes) -> None:
    """Save the way applications do: write a temporary file, then rename it over the book."""
    part = path.with_name(f"~{path.name}.{time.monotonic_ns()}.part")
    part.write_bytes(data)
    os.replace(part, path)


def owned_sheets(path: Path) -> list[str]:
    return [s.name for s in open_package(path).sheets if s.name.startswith("sf ")]


def statuses(seen: list[Outcome], status: str) -> list[Outcome]:
    return [o for o in seen if o.status == status]


@contextmanager
def watching(path: Path, settle: float = SETTLE) -> Iterator[tuple[Watcher, list[Outcome]]]:
    """A watcher running in a thread; stopped and joined (within LIMIT s) on the way out."""
    seen: list[Outcome] = []
    w = Watcher(path, settle=settle, emit=seen.append)
    stop = threading.Event()
    failed: list[BaseException] = []

    def run() -> None:
        try:
            w.run(stop)
        except BaseException as exc:  # noqa: BLE001 - reported by the test
            failed.append(exc)

    t = threading.Thread(target=run, daemon=True)
    t.start()
    until(lambda: w.ready.is_set() or bool(failed), "the observer starts")
    try:
        yield w, seen
    finally:
        stop.set()
        t.join(LIMIT)
    assert not t.is_alive(), "the watcher did not stop"
    assert not failed, failed


def settled_after_own_write(w: Watcher, writes: int = 1) -> None:
    until(lambda: w.counts["own write"] >= writes and w.idle(),
          f"the watcher dismisses its own write no. {writes} and goes idle")


# --- real events --------------------------------------------------------------------


def test_a_saved_book_is_refreshed_once_and_its_own_write_does_not_retrigger(
        tmp_path: Path) -> None:
    book = tmp_path / "costs.xlsx"
    with watching(tmp_path) as (w, seen):
        save(book, built(book))
        until(lambda: statuses(seen, "refreshed"), "a refresh")
        settled_after_own_write(w)
        assert [o.status for o in seen] == ["refreshed"]
        assert seen[0].book == str(book) and seen[0].models == 1
        assert w.counts["refreshed"] == 1
        assert "sf a coef" in owned_sheets(book)
        # a second save is a second refresh, and again only one
        save(book, built(book))
        until(lambda: len(statuses(seen, "refreshed")) == 2, "the second refresh")
        settled_after_own_write(w, 2)
        assert w.counts["refreshed"] == 2 and len(seen) == 2


def test_a_burst_of_writes_gives_one_refresh(tmp_path: Path) -> None:
    book = tmp_path / "costs.xlsx"
    data = built(book)
    with watching(tmp_path) as (w, seen):
        # temp file + rename, again, an in-place rewrite in two halves, a touch
        save(book, data)
        save(book, data)
        with open(book, "wb") as f:
            f.write(data[: len(data) // 2])
            f.flush()
            f.write(data[len(data) // 2:])
        os.utime(book)
        until(lambda: statuses(seen, "refreshed"), "a refresh")
        settled_after_own_write(w)
        assert [o.status for o in seen] == ["refreshed"]
        assert w.counts["events"] >= 4  # the burst was seen, and settled into one look


def test_a_book_still_being_written_is_waited_for(tmp_path: Path) -> None:
    """Half a book, unchanged for a settle interval, is not a zip yet: the watcher waits
    (up to INVALID_TRIES more intervals) and refreshes the whole book, without a refusal."""
    settle = 0.5
    book = tmp_path / "costs.xlsx"
    data = built(book)
    with watching(tmp_path, settle) as (w, seen):
        with open(book, "wb") as f:
            f.write(data[: len(data) // 2])
            f.flush()
            until(lambda: w.counts["not a zip yet"] >= 1, "the half book is looked at",
                  limit=LIMIT)
            assert seen == []
            f.write(data[len(data) // 2:])
        until(lambda: statuses(seen, "refreshed"), "a refresh")
        settled_after_own_write(w)
        assert [o.status for o in seen] == ["refreshed"]


def test_a_book_held_open_is_skipped_once_then_refreshed_when_closed(tmp_path: Path) -> None:
    book = tmp_path / "costs.xlsx"
    lock = tmp_path / ".~lock.costs.xlsx#"
    lock.write_text("someone,host,2026")
    with watching(tmp_path) as (w, seen):
        first = built(book)
        save(book, first)
        until(lambda: statuses(seen, "skipped"), "the held book is skipped")
        assert "open in a spreadsheet program" in seen[0].message
        assert lock.name in seen[0].message
        save(book, first)  # saved again while open: not said again
        until(lambda: w.counts["held"] >= 2 and w.idle(), "the second save is looked at")
        assert len(seen) == 1
        assert owned_sheets(book) == []
        lock.unlink()  # closed: it changed meanwhile, so it is refreshed
        until(lambda: statuses(seen, "refreshed"), "the refresh after closing")
        settled_after_own_write(w)
        assert [o.status for o in seen] == ["skipped", "refreshed"]
        assert "sf a coef" in owned_sheets(book)


def test_a_book_without_models_is_looked_at_once_and_left_alone(tmp_path: Path) -> None:
    book = tmp_path / "plain.xlsx"
    data = built(book, names={})
    with watching(tmp_path) as (w, seen):
        save(book, data)
        until(lambda: seen, "the first look")
        assert [(o.status, o.message) for o in seen] == [("skipped", "no models declared")]
        save(book, data)  # changed again, still no models: quiet
        until(lambda: w.counts["skipped"] >= 2 and w.idle(), "the second look")
        assert len(seen) == 1
        assert book.read_bytes() == data
        os.utime(book)
        until(lambda: w.counts["skipped"] >= 3 and w.idle(), "the third look")
        assert len(seen) == 1 and w.counts["refreshed"] == 0


def test_a_broken_book_is_refused_and_the_watcher_keeps_going(tmp_path: Path) -> None:
    broken = tmp_path / "broken.xlsx"
    bad = tmp_path / "bad.xlsx"
    good = tmp_path / "good.xlsx"
    with watching(tmp_path) as (w, seen):
        save(broken, b"this is not a workbook")
        until(lambda: statuses(seen, "refused"), "the broken book's refusal")
        assert w.counts["not a zip yet"] == INVALID_TRIES
        save(bad, built(bad, {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$5"}))
        until(lambda: len(statuses(seen, "refused")) == 2, "the bad declaration's refusal")
        save(good, built(good))
        until(lambda: statuses(seen, "refreshed"), "the good book's refresh")
        settled_after_own_write(w)
        got = {Path(o.book).name: o for o in seen}
        assert set(got) == {"broken.xlsx", "bad.xlsx", "good.xlsx"} and len(seen) == 3
        assert "broken.xlsx" in got["broken.xlsx"].message
        assert "x has 5 rows" in got["bad.xlsx"].message
        assert got["good.xlsx"].status == "refreshed"


def test_sheetfits_own_files_and_other_names_are_not_books(tmp_path: Path) -> None:
    assert is_book_name("costs.xlsx") and is_book_name("Macro.XLSM")
    for name in ["costs.before-refresh.xlsx", ".sheetfit-costs.xlsx.abcdefgh.tmp",
                 ".sheetfit-lock-costs.xlsx", "~$costs.xlsx", ".~lock.costs.xlsx#",
                 "costs.csv", ".hidden.xlsx", "costs.xlsx.part"]:
        assert not is_book_name(name), name
    assert book_of_lock(tmp_path / ".~lock.costs.xlsx#") == tmp_path / "costs.xlsx"
    assert book_of_lock(tmp_path / "~$costs.xlsx") == tmp_path / "costs.xlsx"
    assert book_of_lock(tmp_path / "costs.xlsx") is None


def test_backups_and_books_in_subfolders(tmp_path: Path) -> None:
    """A folder is watched with its subfolders; a backup written beside a book is not a
    book and does not start a refresh of its own."""
    sub = tmp_path / "north" / "2026"
    sub.mkdir(parents=True)
    book = sub / "costs.xlsx"
    with watching(tmp_path) as (w, seen):
        save(book, built(book))
        until(lambda: statuses(seen, "refreshed"), "the refresh in the subfolder")
        settled_after_own_write(w)
        (sub / "costs.before-refresh.xlsx").write_bytes(book.read_bytes())
        save(sub / "~$other.xlsx", b"a lock")
        save(book, built(book))
        until(lambda: len(statuses(seen, "refreshed")) == 2, "the second refresh")
        settled_after_own_write(w, 2)
        assert len(seen) == 2 and {o.book for o in seen} == {str(book)}


def test_watching_one_book_ignores_its_neighbours(tmp_path: Path) -> None:
    book, other = tmp_path / "costs.xlsx", tmp_path / "other.xlsx"
    save(book, built(book))
    with watching(book) as (w, seen):
        save(other, built(other))
        save(book, built(book))
        until(lambda: statuses(seen, "refreshed"), "the watched book's refresh")
        settled_after_own_write(w)
        assert [o.book for o in seen] == [str(book)]
        assert owned_sheets(other) == []


# --- the state machine under a fake clock ----------------------------------------------


class Clock:
    def __init__(self) -> None:
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


def test_debounce_under_a_fake_clock(tmp_path: Path) -> None:
    """Each event moves the look to settle seconds later; a look finds the book changed
    since the last event and waits again; a quiet book is refreshed once."""
    book = tmp_path / "costs.xlsx"
    save(book, built(book))
    clock, calls, seen = Clock(), [], []

    def refresh(path: Path) -> Outcome:
        calls.append(path)
        return Outcome(str(path), "refreshed", 1, 0.01, "a: least squares")

    w = Watcher(tmp_path, settle=1.0, refresh=refresh, emit=seen.append, clock=clock)
    for t in (100.0, 100.5, 100.9):
        clock.now = t
        w.notice("changed", book)
        w.step()
    clock.now = 101.8
    w.step()
    assert calls == []  # 0.9 s after the last event
    os.utime(book, ns=(1, 1))  # written without an event reaching us
    clock.now = 101.9
    w.step()
    assert calls == [] and w.counts["unsettled"] == 1
    clock.now = 102.9
    w.step()
    assert calls == [book] and w.idle()
    w.notice("changed", book)  # the event of our own write
    clock.now = 104.0
    w.step()
    assert calls == [book] and w.counts["own write"] == 1
    assert [o.status for o in seen] == ["refreshed"]


def test_a_slow_writer_pausing_between_chunks_is_not_refreshed_half_written(
        tmp_path: Path) -> None:
    """Each pause of a settle interval costs one of INVALID_TRIES looks; a new write
    starts the count again, so a book written in many slow chunks is refreshed whole."""
    book = tmp_path / "costs.xlsx"
    data = built(book)
    clock, calls = Clock(), []

    def refresh(path: Path) -> Outcome:
        calls.append(path.read_bytes())
        return Outcome(str(path), "refreshed", 1, 0.01, "a: least squares")

    w = Watcher(tmp_path, settle=1.0, refresh=refresh, clock=clock)
    chunks = 8
    size = -(-len(data) // chunks)
    with open(book, "wb") as f:
        for i in range(chunks):
            f.write(data[i * size:(i + 1) * size])
            f.flush()
            w.notice("changed", book)
            for _ in range(INVALID_TRIES):  # a pause of INVALID_TRIES settle intervals
                clock.now += 1.0
                w.step()
    clock.now += 1.0
    w.step()
    assert calls == [data]
    assert w.counts["not a zip yet"] == INVALID_TRIES * (chunks - 1)


def test_a_book_that_never_settles_is_given_up_with_a_line(tmp_path: Path) -> None:
    book = tmp_path / "log.xlsx"
    book.write_bytes(b"x")
    clock, seen = Clock(), []
    w = Watcher(tmp_path, settle=0.5, patience=5.0, emit=seen.append, clock=clock,
                refresh=lambda p: pytest.fail("refreshed a book still changing"))
    for i in range(18):  # an event every 0.3 s for 5.1 s
        clock.now = 100.0 + 0.3 * i
        book.write_bytes(b"x" * (i + 2))
        w.notice("changed", book)
        w.step()
    assert [(o.status, o.message) for o in seen] == [
        ("skipped", "still changing after 5 s; waiting for its next save")]
    assert w.idle()


def test_the_line_has_time_book_status_seconds_message() -> None:
    import datetime as dt

    o = Outcome("/books/costs.xlsx", "refused", 0, 0.125, "costs.xlsx: not a zip")
    assert line(o, dt.datetime(2026, 6, 30, 12, 0, 5)) == \
        "2026-06-30 12:00:05\t/books/costs.xlsx\trefused\t0.12 s\tcosts.xlsx: not a zip"


# --- the command line in a child process ------------------------------------------------


class Child:
    """``sheetfit watch`` in a child process; its stdout and stderr lines read by threads."""

    def __init__(self, args: list[str], code: str | None = None):
        cmd = [sys.executable, "-c", code, *args] if code else \
            [sys.executable, "-m", "sheetfit", "watch", *args]
        self.proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                     text=True)
        self.out: list[str] = []
        self.err: list[str] = []
        self.readers = [threading.Thread(target=self._read, args=(stream, into), daemon=True)
                        for stream, into in ((self.proc.stdout, self.out),
                                             (self.proc.stderr, self.err))]
        for t in self.readers:
            t.start()

    @staticmethod
    def _read(stream: IO[str], into: list[str]) -> None:
        for text in stream:
            into.append(text.rstrip("\n"))

    def wait_line(self, lines: list[str], part: str) -> str:
        try:
            until(lambda: any(part in t for t in lines), f"a line with {part!r}")
        except BaseException:
            self.proc.kill()
            self.finish()
            raise
        return next(t for t in lines if part in t)

    def finish(self) -> int:
        try:
            rc = self.proc.wait(timeout=LIMIT)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            pytest.fail(f"the watcher did not stop within {LIMIT:g} s")
        for t in self.readers:
            t.join(LIMIT)
        for stream in (self.proc.stdout, self.proc.stderr):
            if stream is not None:
                stream.close()
        return rc


@pytest.mark.parametrize(("sig", "status", "name"), [
    (signal.SIGINT, 130, "SIGINT"),
    (signal.SIGTERM, 143, "SIGTERM"),
])
def test_cli_watch_refreshes_and_stops_cleanly(tmp_path: Path, sig: int, status: int,
                                               name: str) -> None:
    book = tmp_path / "costs.xlsx"
    data = built(book)
    child = Child([str(tmp_path), "--settle", "0.2"])
    child.wait_line(child.err, "watching the folder")
    save(book, data)
    fields = child.wait_line(child.out, "refreshed").split("\t")
    assert fields[1:3] == [str(book), "refreshed"] and fields[4] == "a: least squares"
    assert fields[3].endswith(" s")
    child.proc.send_signal(sig)
    assert child.finish() == status
    err = "\n".join(child.err)
    assert "Traceback" not in err
    assert child.err[-1] == f"sheetfit: watch stopped by {name}"
    assert sorted(os.listdir(tmp_path)) == ["costs.xlsx"]
    assert "sf a coef" in owned_sheets(book)


# The refresh pauses inside the real refresh (holding its lock) until it is abandoned.
_SLOW = """
import sys, time
import sheetfit.refresh as r
real = r.plan_book
def slow(*a, **k):
    print("sheetfit-test: planning", file=sys.stderr, flush=True)
    for _ in range(1200):
        time.sleep(0.05)
    return real(*a, **k)
r.plan_book = slow
from sheetfit.cli import main
sys.exit(main(["watch", *sys.argv[1:]]))
"""


def test_cli_watch_second_signal_abandons_the_refresh_in_progress(tmp_path: Path) -> None:
    """The first signal lets the refresh finish; a second abandons it: the book keeps its
    bytes, sheetfit's temporary and lock files are gone, exit 128 + the first signal."""
    book = tmp_path / "costs.xlsx"
    data = built(book)
    child = Child([str(tmp_path), "--settle", "0.2"], code=_SLOW)
    child.wait_line(child.err, "watching the folder")
    save(book, data)
    child.wait_line(child.err, "planning")
    child.proc.send_signal(signal.SIGTERM)
    child.wait_line(child.err, "signal again to abandon it")
    child.proc.send_signal(signal.SIGINT)
    assert child.finish() == 143
    err = "\n".join(child.err)
    assert "Traceback" not in err
    assert child.err[-1] == (f"sheetfit: watch stopped by SIGTERM; the refresh of {book} was "
                             "abandoned: the book is whole (left as it was)")
    assert book.read_bytes() == data
    assert sorted(os.listdir(tmp_path)) == ["costs.xlsx"]


def _watch_once(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "sheetfit", "watch", *args], check=False,
                          capture_output=True, text=True, timeout=LIMIT)


def test_cli_watch_refuses_a_missing_path_and_a_zero_settle(tmp_path: Path) -> None:
    run = _watch_once(str(tmp_path / "nope"))
    assert run.returncode == 2
    assert run.stderr.strip() == f"sheetfit: refused: {tmp_path / 'nope'}: no such book or folder"
    run = _watch_once(str(tmp_path), "--settle", "0")
    assert run.returncode == 2 and "at least 0.05 seconds" in run.stderr
