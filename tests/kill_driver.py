"""Kill in-place refreshes at random moments; report what each kill left behind (test helper).

Run as a script by ``test_kill_mid_refresh.py``:

    python kill_driver.py BOOK SEED KILLS

It imports sheetfit once, refreshes a copy of BOOK uninterrupted (with a fixed clock, so
the refreshed bytes are known) timing each phase (read and declare, fit, plan, render,
graft and write), then, for each kill: restores the original bytes, forks a child that
refreshes the book in place, and SIGKILLs it after a delay. The delays are KILLS seeded
random moments, one in each of KILLS equal slices of 1.2 times the uninterrupted refresh
time, plus the middle of every phase, so every phase is hit. After each kill it records whether the book
holds the original bytes, the complete refreshed bytes, or anything else. One JSON
object on stdout. The driver runs in a fresh process with no threads, so forking is safe.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import random
import shutil
import signal
import sys
import time
from pathlib import Path

import sheetfit.refresh as core
from sheetfit.refresh import refresh

NOW = dt.datetime(2026, 6, 30, 12, 0, tzinfo=dt.UTC)


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


PHASES = ("find_models", "fit_model", "plan_book", "render", "graft")


def _timed(spans: dict[str, list[float]], t0: list[float]) -> None:
    """Wrap the refresh's phase functions so the first run records when each ran."""
    for name in PHASES:
        fn = getattr(core, name)

        def wrapped(*a, _fn=fn, _name=name, **kw):  # type: ignore[no-untyped-def]
            start = time.perf_counter() - t0[0]
            try:
                return _fn(*a, **kw)
            finally:
                span = spans.setdefault(_name, [start, start])
                span[1] = time.perf_counter() - t0[0]

        setattr(core, name, wrapped)


def main() -> int:
    book, seed, kills = Path(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3])
    work = book.parent / "work"
    work.mkdir(exist_ok=True)
    target = work / book.name
    shutil.copyfile(book, target)
    spans: dict[str, list[float]] = {}
    t0 = [time.perf_counter()]
    _timed(spans, t0)
    refresh(target, now=NOW)
    took = time.perf_counter() - t0[0]
    refreshed = _digest(target)
    shutil.copyfile(target, book.parent / "expected.xlsx")
    original = _digest(book)
    rng = random.Random(seed)
    outcomes: list[str] = []
    delays: list[float] = []
    slice_ = 1.2 * took / kills
    moments = [rng.uniform(k * slice_, (k + 1) * slice_) for k in range(kills)]
    moments += [(a + b) / 2 for a, b in spans.values()]
    moments += [0.0, 3.0 * took]  # surely before the start and (even on a busy machine) after the end
    for delay in moments:
        shutil.copyfile(book, target)
        pid = os.fork()
        if pid == 0:  # the child: refresh in place and leave without cleanup handlers
            try:
                refresh(target, now=NOW)
            finally:
                os._exit(0)
        time.sleep(delay)
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
        got = _digest(target)
        outcomes.append("original" if got == original else
                        "refreshed" if got == refreshed else "other")
        delays.append(delay)
    leftovers = sorted(p.name for p in work.iterdir() if p.name != target.name)
    print(json.dumps({"took": took, "spans": spans, "outcomes": outcomes, "delays": delays,
                      "leftovers": leftovers}))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
