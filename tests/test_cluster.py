"""A batch on a Dask cluster: the same outcomes and bytes as in-process refreshes, and a
book whose worker is killed mid-refresh left untouched, retried once, then a fault.

One local cluster (2 worker processes of one thread, each under a nanny that restarts it
when it is killed) serves the module. A worker plugin holds any refresh of a book whose
name starts with ``hold`` just before its finished temporary file is renamed into place:
it writes ``started-PID`` beside the book and waits (at most 60 s) for a ``release``
file. The test kills the worker process whose pid it reads there, so the kill lands
at a moment the test controls, after the whole new file was written and before the
rename. Every wait here is bounded.
"""

from __future__ import annotations

import datetime as dt
import os
import shutil
import signal
import threading
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import distributed
import pytest
from books import jobs, line_rows, make_book

from sheetfit.batch import Outcome, refresh_one
from sheetfit.batch import cluster as cluster_mod
from sheetfit.batch.cluster import ClusterError, run_on_cluster
from sheetfit.cli import main

EXAMPLES = Path(__file__).resolve().parent.parent / "example_books"
NOW = dt.datetime(2026, 1, 31, 18, 0, tzinfo=dt.UTC)
OPTIONS: dict[str, Any] = {"now": NOW}
LINE = {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"}
HOLD_LIMIT = 60.0


class HoldBeforeRename(distributed.WorkerPlugin):
    """In a worker: hold a refresh of ``hold*.xlsx`` just before its rename (see above)."""

    name = "sheetfit-test-hold"

    def setup(self, worker: Any) -> None:
        from sheetfit.writer import target

        original = target._swap_in
        if getattr(original, "held", False):
            return

        def swap_in(tmp: Path, dest: Any) -> None:
            if dest.path.name.startswith("hold"):
                (dest.folder / f"started-{os.getpid()}").write_text(str(tmp))
                deadline = time.monotonic() + HOLD_LIMIT
                while not (dest.folder / "release").exists() and time.monotonic() < deadline:
                    time.sleep(0.02)
            original(tmp, dest)

        swap_in.held = True  # type: ignore[attr-defined]
        target._swap_in = swap_in


@pytest.fixture(scope="module")
def cluster() -> Iterator[distributed.LocalCluster]:
    with distributed.LocalCluster(processes=True, n_workers=2, threads_per_worker=1,
                                  dashboard_address=":0", death_timeout=30) as running, \
            distributed.Client(running, timeout=60, set_as_default=False) as client:
        client.register_plugin(HoldBeforeRename())
        yield running


@pytest.fixture()
def client(cluster: distributed.LocalCluster) -> Iterator[distributed.Client]:
    """A client on the module's cluster, once both workers are up (a killed one restarts)."""
    with distributed.Client(cluster, timeout=60, set_as_default=False) as c:
        c.wait_for_workers(2, timeout=60)
        yield c


def _until(what: str, check: Callable[[], Any], limit: float = 60.0) -> Any:
    deadline = time.monotonic() + limit
    while time.monotonic() < deadline:
        got = check()
        if got:
            return got
        time.sleep(0.05)
    raise AssertionError(f"waited {limit:g} s for {what}")


def _same(a: Outcome, b: Outcome) -> bool:
    """The same outcome, but for how long it took and the folder the book is in."""
    return (Path(a.book).name, a.status, a.models, a.message) == \
        (Path(b.book).name, b.status, b.models, b.message)


def _books(folder: Path) -> list[Path]:
    folder.mkdir()
    books = [Path(shutil.copy(p, folder)) for p in sorted(EXAMPLES.glob("*.xlsx"))]
    books.append(make_book(folder / "jobs.xlsx", {"Data": jobs(30)},
                           {"sf_job_y": "Data!$A:$A", "sf_job_x": "Data!$B:$C"}))
    books.append(make_book(folder / "refused.xlsx", {"Data": line_rows(8)},
                           {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$5"}))
    books.append(make_book(folder / "none.xlsx", {"Data": line_rows(8)}, {}))
    return books


def test_same_outcomes_and_bytes_as_in_process(tmp_path: Path,
                                               client: distributed.Client) -> None:
    here, there = _books(tmp_path / "here"), _books(tmp_path / "there")
    expected = [refresh_one(b, **OPTIONS) for b in here]
    seen: list[Outcome] = []
    got = run_on_cluster(there, client, OPTIONS, on_done=seen.append)

    assert [o.book for o in got] == [str(b) for b in there]      # in the order given
    assert all(_same(e, g) for e, g in zip(expected, got, strict=True)), (expected, got)
    assert sorted(o.book for o in seen) == sorted(o.book for o in got)
    status = {Path(o.book).name: o.status for o in got}
    assert status == {"delivery_costs.xlsx": "refreshed", "field_jobs.xlsx": "refreshed",
                      "open_invoices.xlsx": "refreshed", "jobs.xlsx": "refreshed",
                      "refused.xlsx": "refused", "none.xlsx": "skipped"}
    assert "x has 5 rows" in got[-2].message and got[-1].message == "no models declared"
    for a, b in zip(here, there, strict=True):
        assert a.read_bytes() == b.read_bytes(), b.name


def _hold_run(tmp_path: Path, client: distributed.Client
              ) -> tuple[Path, bytes, list[Outcome], threading.Thread]:
    """Start a run of hold.xlsx and one plain book in a thread; (book, its bytes, outcomes)."""
    folder = tmp_path / "run"
    folder.mkdir()
    hold = make_book(folder / "hold.xlsx", {"Data": line_rows(8)}, LINE)
    plain = make_book(folder / "plain.xlsx", {"Data": line_rows(8)}, LINE)
    outcomes: list[Outcome] = []
    run = threading.Thread(target=lambda: outcomes.extend(
        run_on_cluster([hold, plain], client, OPTIONS)), daemon=True)
    run.start()
    return hold, hold.read_bytes(), outcomes, run


def _started(folder: Path) -> list[int]:
    return sorted(int(p.name.split("-")[1]) for p in folder.glob("started-*"))


def _kill_holder(folder: Path, book: Path, before: bytes, killed: list[int]) -> None:
    """Wait until a worker not yet killed holds ``book`` before its rename, check the book
    is untouched and the new file written beside it, and kill that worker process."""
    pid = _until("a worker to hold the book",
                 lambda: [p for p in _started(folder) if p not in killed])[0]
    assert book.read_bytes() == before
    temps = list(folder.glob(".sheetfit-hold.xlsx.*.tmp"))
    assert len(temps) == 1 and temps[0].stat().st_size > len(before)
    os.kill(pid, signal.SIGKILL)
    killed.append(pid)


def test_worker_killed_mid_book_retries_it_on_another(tmp_path: Path,
                                                      client: distributed.Client) -> None:
    hold, before, outcomes, run = _hold_run(tmp_path, client)
    folder, killed = hold.parent, []
    _kill_holder(folder, hold, before, killed)
    # the retry holds on another worker process: the book is still untouched
    second = _until("the retry to hold the book",
                    lambda: [p for p in _started(folder) if p not in killed])[0]
    assert second != killed[0] and hold.read_bytes() == before
    (folder / "release").touch()
    run.join(timeout=120)
    assert not run.is_alive()

    assert [(Path(o.book).name, o.status) for o in outcomes] == \
        [("hold.xlsx", "refreshed"), ("plain.xlsx", "refreshed")]
    reference = tmp_path / "reference"
    reference.mkdir()
    ref = make_book(reference / "hold.xlsx", {"Data": line_rows(8)}, LINE)
    assert ref.read_bytes() == before
    assert refresh_one(ref, **OPTIONS).status == "refreshed"
    assert hold.read_bytes() == ref.read_bytes()
    assert not list(folder.glob(".sheetfit-*"))     # the stale temporary file removed


def test_second_loss_of_a_book_is_a_fault(tmp_path: Path,
                                          client: distributed.Client) -> None:
    hold, before, outcomes, run = _hold_run(tmp_path, client)
    folder, killed = hold.parent, []
    _kill_holder(folder, hold, before, killed)
    _kill_holder(folder, hold, before, killed)
    run.join(timeout=120)
    assert not run.is_alive()

    by_name = {Path(o.book).name: o for o in outcomes}
    assert by_name["plain.xlsx"].status == "refreshed"
    fault = by_name["hold.xlsx"]
    assert fault.status == "fault" and "lost twice" in fault.message
    assert hold.read_bytes() == before
    assert len(_started(folder)) == 2            # not tried a third time


def test_cli_runs_a_folder_on_the_cluster(tmp_path: Path, cluster: distributed.LocalCluster,
                                          client: distributed.Client,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    folder = tmp_path / "books"
    folder.mkdir()
    make_book(folder / "a.xlsx", {"Data": line_rows(8)}, LINE)
    make_book(folder / "b.xlsx", {"Data": line_rows(8)}, {})
    assert main(["refresh", str(folder), "--scheduler", cluster.scheduler_address]) == 0
    out = capsys.readouterr().out
    assert "refreshed" in out and "no models declared" in out
    assert out.strip().endswith("2 books: 1 refreshed, 1 skipped, 0 refused, 0 fault")
    make_book(folder / "c.xlsx", {"Data": line_rows(8)},
              {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$5"})
    assert main(["refresh", str(folder), "--scheduler", cluster.scheduler_address]) == 2


def test_unreachable_scheduler_is_a_refusal(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    monkeypatch.setattr(cluster_mod, "CONNECT_TIMEOUT", 2.0)
    book = make_book(tmp_path / "a.xlsx", {"Data": line_rows(8)}, LINE)
    before = book.read_bytes()
    start = time.monotonic()
    with pytest.raises(ClusterError, match="cannot reach the scheduler"):
        run_on_cluster([book], "tcp://127.0.0.1:9", OPTIONS)
    assert main(["refresh", str(book), "--scheduler", "tcp://127.0.0.1:9"]) == 2
    assert "cannot reach the scheduler" in capsys.readouterr().err
    assert time.monotonic() - start < 30 and book.read_bytes() == before


def test_unknown_options_are_refused_before_connecting() -> None:
    with pytest.raises(TypeError, match="unknown refresh options: out"):
        run_on_cluster([Path("a.xlsx")], "tcp://127.0.0.1:9", {"out": "b.xlsx"})
    assert run_on_cluster([], "tcp://127.0.0.1:9", {}) == []


def test_killed_worker_reported_by_the_scheduler_counts_as_a_loss(tmp_path: Path) -> None:
    """A scheduler that allows no failures reports the loss as KilledWorker on the task:
    the run retries once and faults the second loss all the same."""
    import dask

    with dask.config.set({"distributed.scheduler.allowed-failures": 0}), \
            distributed.LocalCluster(processes=True, n_workers=2, threads_per_worker=1,
                                     dashboard_address=":0", death_timeout=30) as cluster, \
            distributed.Client(cluster, timeout=60, set_as_default=False) as client:
        client.register_plugin(HoldBeforeRename())
        hold, before, outcomes, run = _hold_run(tmp_path, client)
        killed: list[int] = []
        _kill_holder(hold.parent, hold, before, killed)
        _kill_holder(hold.parent, hold, before, killed)
        run.join(timeout=120)
        assert not run.is_alive()
    by_name = {Path(o.book).name: o for o in outcomes}
    assert by_name["hold.xlsx"].status == "fault" and "lost twice" in by_name["hold.xlsx"].message
    assert by_name["plain.xlsx"].status == "refreshed" and hold.read_bytes() == before
