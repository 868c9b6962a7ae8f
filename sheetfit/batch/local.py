"""Refresh many books on this machine: a pool of worker processes, or this process alone.

:func:`run_local` runs :func:`~sheetfit.batch.outcome.refresh_one` for every book and
returns the outcomes in the order of the books. One book never stops the others:
``refresh_one`` turns every refusal and fault into an outcome, and a worker process that
dies (a crash in native code, the out-of-memory killer, ``os._exit``) breaks only the
pool, not the run. The pool marks, in shared memory, each book a worker has started;
when the pool breaks, the books that had not started go to a new pool, and the books the
workers held (the one that died, and the others the pool stopped with it) are refreshed
again, each in a pool of its own: the one whose process dies again is a ``fault``, the
rest get their real outcome. Refreshing a book again is safe: a refresh replaces the
file in one rename, so a stopped refresh left it as it was or completely refreshed.

Workers start from a fork server that has imported sheetfit once (a spawned process
where there is none). They ignore SIGINT between books; during a refresh SIGINT and
SIGTERM stop it cleanly (temporary file removed) and end the worker.
"""

from __future__ import annotations

import multiprocessing as mp
import os
import signal
import time
from collections.abc import Callable, Sequence
from concurrent.futures import Future, ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from multiprocessing.context import BaseContext
from pathlib import Path
from typing import Any

from sheetfit.batch.outcome import Outcome, refresh_one
from sheetfit.stopping import Stopped, stop_signals

__all__ = ["default_jobs", "run_local"]

OnDone = Callable[[Outcome], None]

#: What a worker runs for one book; a module global so a test can hand the workers a
#: different (importable) function.
_refresh: Callable[..., Outcome] = refresh_one

#: A dead worker that leaves no books behind still counts; after this many such pools in a
#: row the remaining books are faults rather than retried for ever.
_EMPTY_BREAKS = 3

DIED = ("its worker process stopped while refreshing it (crashed or was killed); the book "
        "is as it was or completely refreshed")
_NEVER_RAN = "worker processes kept stopping before this book started"

_started: Any = None  # in a worker: the pool's shared "started" flags, one byte per book


def default_jobs() -> int:
    """How many workers by default: the CPUs this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on every platform
        return max(1, os.cpu_count() or 1)


def _context() -> BaseContext:
    if "forkserver" in mp.get_all_start_methods():
        ctx = mp.get_context("forkserver")
        ctx.set_forkserver_preload(["sheetfit.batch.local", "sheetfit.refresh"])
        return ctx
    return mp.get_context("spawn")


def _init(started: Any) -> None:
    global _started
    _started = started
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent decides what Ctrl-C stops


def _task(refresh: Callable[..., Outcome], index: int, book: str,
          options: dict[str, Any]) -> Outcome:
    """In a worker: mark the book started, refresh it; a stop signal ends the worker."""
    _started[index] = 1
    try:
        with stop_signals():
            return refresh(book, **options)
    except Stopped as exc:  # the refresh cleaned up on its way out
        os._exit(128 + exc.signum)


def _pool(ctx: BaseContext, workers: int, size: int) -> tuple[ProcessPoolExecutor, Any]:
    started = ctx.RawArray("b", size)  # type: ignore[attr-defined]
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_init,
                               initargs=(started,))
    return pool, started


def _fault(book: Path, since: float, message: str) -> Outcome:
    return Outcome(str(book), "fault", 0, round(time.perf_counter() - since, 3), message)


def _round(books: Sequence[Path], todo: list[int], jobs: int, options: dict[str, Any],
           finish: Callable[[int, Outcome], None],
           ctx: BaseContext) -> tuple[list[int], list[int]]:
    """Run ``todo`` in one pool; return the books it held and those it never started."""
    pool, started = _pool(ctx, min(jobs, len(todo)), len(books))
    futures: dict[Future[Outcome], int] = {}
    unstarted: list[int] = []
    held: list[int] = []
    since = time.perf_counter()
    try:
        for n, i in enumerate(todo):
            try:
                futures[pool.submit(_task, _refresh, i, str(books[i]), options)] = i
            except BrokenProcessPool:  # a worker died while the rest were handed out
                unstarted += todo[n:]
                break
        for future in as_completed(futures):
            i = futures[future]
            try:
                outcome = future.result()
            except BrokenProcessPool:
                (held if started[i] else unstarted).append(i)
                continue
            except Exception as exc:  # noqa: BLE001 - e.g. an outcome that failed to travel
                outcome = _fault(books[i], since, f"internal fault ({type(exc).__name__}: "
                                                  f"{exc})")
            finish(i, outcome)
    except BaseException:
        pool.shutdown(wait=True, cancel_futures=True)
        raise
    pool.shutdown(wait=True)
    return sorted(held), sorted(unstarted)


def _alone(books: Sequence[Path], held: list[int], options: dict[str, Any],
           finish: Callable[[int, Outcome], None], ctx: BaseContext) -> None:
    """Refresh each held book again in a pool of its own; a pool that breaks is a fault."""
    since = time.perf_counter()
    pools = [_pool(ctx, 1, len(books))[0] for _ in held]
    try:
        futures = {p.submit(_task, _refresh, i, str(books[i]), options): i
                   for p, i in zip(pools, held, strict=True)}
        for future in as_completed(futures):
            i = futures[future]
            try:
                outcome = future.result()
            except BrokenProcessPool:
                outcome = _fault(books[i], since, DIED)
            except Exception as exc:  # noqa: BLE001 - as in _round
                outcome = _fault(books[i], since, f"internal fault ({type(exc).__name__}: "
                                                  f"{exc})")
            finish(i, outcome)
    finally:
        for p in pools:
            p.shutdown(wait=True, cancel_futures=True)


def run_local(books: Sequence[Path], jobs: int, options: dict[str, Any],
              on_done: OnDone | None = None) -> list[Outcome]:
    """Refresh ``books`` with ``jobs`` worker processes (1: in this process), in any order;
    return their outcomes in the order of ``books``.

    ``options`` are keyword arguments for ``refresh_one`` (force, backup, wait, now);
    ``on_done`` is called in this thread with each outcome as it arrives.
    """
    books = [Path(b) for b in books]
    results: list[Outcome | None] = [None] * len(books)

    def finish(i: int, outcome: Outcome) -> None:
        results[i] = outcome
        if on_done is not None:
            on_done(outcome)

    if jobs <= 1:
        for i, book in enumerate(books):
            finish(i, _refresh(book, **options))
    elif books:
        ctx = _context()
        todo, empty = list(range(len(books))), 0
        while todo:
            before = len(todo)
            held, todo = _round(books, todo, jobs, options, finish, ctx)
            if held:
                _alone(books, held, options, finish, ctx)
            if held or len(todo) < before:
                empty = 0
            elif todo:  # the pool broke before any book started
                empty += 1
                if empty >= _EMPTY_BREAKS:
                    for i in todo:
                        finish(i, _fault(books[i], time.perf_counter(), _NEVER_RAN))
                    todo = []
    missing = [str(books[i]) for i, o in enumerate(results) if o is None]
    if missing:
        raise RuntimeError(f"no outcome for {missing}")
    return [o for o in results if o is not None]
