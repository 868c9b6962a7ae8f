"""Refreshing a batch of books on a Dask distributed cluster: one task per book.

``run_on_cluster(books, scheduler, options)`` sends each book to a worker as one task
(``refresh_one``, which never raises) and returns one :class:`Outcome` per book, in the
order of ``books``: the same outcomes a local run gives, refusals and faults included.

Losing a worker. The run hands each worker as many books as it has threads and pins
each task to that worker, so the scheduler never moves a book behind the run's back:
when a worker disappears while a book is on it (the process killed, the machine gone),
the run sees the worker missing (or the task failing with ``KilledWorker``, or being
cancelled on the cluster), and sends the book once more, to another worker when there is
one. The book itself is safe meanwhile: a refresh writes a temporary file beside the
book and renames it into place in one step, so a worker that dies mid-book leaves the
book as it was (or, if it died after that last step, completely refreshed). A book whose
worker is lost a second time becomes a ``fault`` naming both workers; it is not tried a
third time, so a book that kills workers takes down two at most.

Every wait is bounded: connecting (:data:`CONNECT_TIMEOUT`), a cluster with no worker
(:data:`NO_WORKER_LIMIT`), a run in which no book finishes (:data:`STALL_LIMIT`), and
closing. A bound that runs out turns the books still out into faults saying so; the run
ends either way.

``distributed`` is imported inside the functions: the core package does not need it
(``pip install 'sheetfit[cluster]'`` adds it).
"""

from __future__ import annotations

import queue
import time
import uuid
from collections import deque
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from sheetfit.batch.outcome import Outcome, refresh_one
from sheetfit.errors import SheetfitError

__all__ = ["ClusterError", "run_on_cluster"]

#: Seconds to reach the scheduler.
CONNECT_TIMEOUT = 30.0
#: Seconds between looks at the cluster's workers (how soon a lost worker is noticed).
POLL = 0.5
#: Seconds to fetch a finished book's outcome from its worker.
RESULT_TIMEOUT = 60.0
#: Seconds the cluster may have no worker at all before the books still out become faults.
NO_WORKER_LIMIT = 120.0
#: Seconds the run may go without any book finishing before the books out become faults.
STALL_LIMIT = 3600.0
#: Seconds to close the connection at the end.
CLOSE_TIMEOUT = 10.0

#: The keyword arguments of ``refresh_one`` a run passes on (the command line's options).
OPTIONS = frozenset({"force", "backup", "wait", "now"})


class ClusterError(SheetfitError, ConnectionError):
    """The cluster cannot be used at all: ``distributed`` missing, or no scheduler there."""


@dataclass
class _Book:
    index: int
    name: str                      # as the caller gave it: the outcome carries this
    path: str                      # absolute: what the workers open
    lost: list[str] = field(default_factory=list)   # workers lost while it ran there
    future: Any = None
    worker: str | None = None
    attempts: int = 0


def _connect(scheduler: str | Any) -> tuple[Any, bool]:
    """A client for ``scheduler`` and whether this run opened it (and so must close it)."""
    try:
        from distributed import Client
    except ImportError:
        raise ClusterError("running on a cluster needs the 'distributed' package",
                           hint="install it with: pip install 'sheetfit[cluster]'") from None
    if isinstance(scheduler, Client):
        return scheduler, False
    if not isinstance(scheduler, str) and not hasattr(scheduler, "scheduler_address"):
        raise TypeError("scheduler must be an address, a distributed.Client or a cluster, "
                        f"not {type(scheduler).__name__}")
    shown = scheduler if isinstance(scheduler, str) else scheduler.scheduler_address
    try:
        client = Client(scheduler, timeout=CONNECT_TIMEOUT, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise ClusterError(f"cannot reach the scheduler at {shown} within "
                           f"{CONNECT_TIMEOUT:g} s ({type(exc).__name__}: {exc})",
                           hint="start one with 'dask scheduler', or check the address") \
            from None
    return client, True


def run_on_cluster(books: Sequence[Path], scheduler: str | Any, options: dict[str, Any],
                   on_done: Callable[[Outcome], None] | None = None) -> list[Outcome]:
    """Refresh ``books`` on the cluster at ``scheduler``; one outcome per book, in order.

    ``scheduler`` is an address (``tcp://host:8786``), a ``distributed.Client`` (left
    open) or a cluster object (a client is opened on it and closed). ``options`` are
    ``refresh_one``'s keyword arguments (force, backup, wait, now). ``on_done`` is called
    with each outcome as its book finishes. Every worker must see the books at the same
    paths as this process. Raises :class:`ClusterError` when no scheduler can be reached.
    """
    unknown = set(options) - OPTIONS
    if unknown:
        raise TypeError(f"unknown refresh options: {', '.join(sorted(unknown))}")
    if not books:
        return []
    client, opened = _connect(scheduler)
    try:
        return _Run(client, books, options, on_done).run()
    finally:
        if opened:
            client.close(timeout=CLOSE_TIMEOUT)


class _Run:
    """One run's bookkeeping: books waiting, books on workers, outcomes."""

    def __init__(self, client: Any, books: Sequence[Path], options: dict[str, Any],
                 on_done: Callable[[Outcome], None] | None) -> None:
        self.client = client
        self.options = options
        self.on_done = on_done
        self.tag = uuid.uuid4().hex[:10]
        self.books = [_Book(i, str(b), str(Path(b).absolute())) for i, b in enumerate(books)]
        self.waiting: deque[_Book] = deque(self.books)
        self.out: list[Outcome | None] = [None] * len(self.books)
        self.left = len(self.books)
        self.running: dict[str, _Book] = {}            # task key -> the book it refreshes
        self.done: queue.Queue[Any] = queue.Queue()   # futures, put by their callbacks

    # --- the loop -------------------------------------------------------------------

    def run(self) -> list[Outcome]:
        last_progress = time.monotonic()
        no_worker_since: float | None = None
        try:
            while self.left:
                workers = self._workers()
                if workers is None:
                    self._give_up("lost the connection to the scheduler")
                    break
                self._notice_lost(workers)
                now = time.monotonic()
                if not workers:
                    no_worker_since = no_worker_since or now
                    if now - no_worker_since > NO_WORKER_LIMIT:
                        self._give_up(f"no worker on the cluster for {NO_WORKER_LIMIT:g} s")
                        break
                else:
                    no_worker_since = None
                    self._dispatch(workers)
                if self._collect(POLL):
                    last_progress = time.monotonic()
                elif time.monotonic() - last_progress > STALL_LIMIT:
                    self._give_up(f"no book finished for {STALL_LIMIT:g} s")
                    break
        finally:
            for book in list(self.running.values()):   # stopped or given up: cancel ours
                self._release(book)
        return [o for o in self.out if o is not None]

    def _workers(self) -> dict[str, int] | None:
        """The live workers and their threads; None when the scheduler is gone."""
        if self.client.status not in ("running", "connecting"):
            return None
        try:
            return dict(self.client.nthreads())
        except (OSError, TimeoutError):
            return None

    def _dispatch(self, workers: dict[str, int]) -> None:
        """Give each worker as many books as it has threads, pinned to it."""
        busy: dict[str, int] = {}
        for book in self.running.values():
            if book.worker is not None:
                busy[book.worker] = busy.get(book.worker, 0) + 1
        free = {w: n - busy.get(w, 0) for w, n in workers.items() if n > busy.get(w, 0)}
        skipped: list[_Book] = []
        while free and self.waiting:
            book = self.waiting.popleft()
            # another worker than the ones lost with this book, if the cluster has one
            fresh = [w for w in free if w not in book.lost]
            if not fresh and any(w not in book.lost for w in workers):
                skipped.append(book)     # a worker it may use is busy: wait for it
                continue
            worker = (fresh or list(free))[0]
            self._submit(book, worker)
            free[worker] -= 1
            if not free[worker]:
                del free[worker]
        self.waiting.extendleft(reversed(skipped))

    def _submit(self, book: _Book, worker: str) -> None:
        book.attempts += 1
        book.worker = worker
        book.future = self.client.submit(
            refresh_one, book.path, **self.options, pure=False,
            key=f"sheetfit-refresh-{self.tag}-{book.index}-{book.attempts}",
            workers=[worker], allow_other_workers=False)
        self.running[book.future.key] = book
        book.future.add_done_callback(self.done.put)

    def _release(self, book: _Book) -> Any:
        """Take ``book`` off its worker (cancelling its task if still out); its future."""
        future, book.future, book.worker = book.future, None, None
        if future is not None:
            self.running.pop(future.key, None)
            if not future.done():
                future.cancel()
        return future

    def _collect(self, timeout: float) -> bool:
        """Handle the futures that finished within ``timeout``; whether any book ended."""
        ended = False
        try:
            first = self.done.get(timeout=timeout)
        except queue.Empty:
            return False
        batch = [first]
        while True:
            try:
                batch.append(self.done.get_nowait())
            except queue.Empty:
                break
        for future in batch:
            book = self.running.get(future.key)
            if book is None or book.future is not future:   # one this run gave up on
                continue
            ended |= self._settle(book, future)
        return ended

    def _settle(self, book: _Book, future: Any) -> bool:
        """What a finished future means for its book; whether the book ended."""
        from distributed import KilledWorker

        worker = book.worker or "?"
        if future.status == "finished":
            try:
                outcome = future.result(timeout=RESULT_TIMEOUT)
            except Exception:  # noqa: BLE001 - the result went with its worker: a loss
                return self._lost(book, worker)
            return self._end(book, replace(outcome, book=book.name))
        if future.status == "cancelled":
            return self._lost(book, worker)
        try:
            exc = future.exception(timeout=RESULT_TIMEOUT)
        except Exception:  # noqa: BLE001 - as above
            return self._lost(book, worker)
        if isinstance(exc, KilledWorker):
            return self._lost(book, worker)
        hint = (" — is sheetfit installed on every worker?"
                if isinstance(exc, ImportError) else "")
        return self._fault(book, f"could not run on the cluster ({type(exc).__name__}: "
                                 f"{exc}){hint}")

    def _notice_lost(self, workers: dict[str, int]) -> None:
        for book in list(self.running.values()):
            if book.worker not in workers and not book.future.done():
                self._lost(book, book.worker or "?")

    def _lost(self, book: _Book, worker: str) -> bool:
        """The worker running ``book`` is gone: send it once more, or make it a fault."""
        self._release(book)
        book.lost.append(worker)
        if len(book.lost) < 2:
            self.waiting.appendleft(book)
            return False
        return self._fault(book, f"its worker was lost twice while refreshing it "
                                 f"({book.lost[0]}, then {book.lost[1]}); not tried again. "
                                 "A refresh is written beside the book and renamed into "
                                 "place in one step, so the book was never partly written")

    def _fault(self, book: _Book, message: str) -> bool:
        return self._end(book, Outcome(book.name, "fault", 0, 0.0, message))

    def _end(self, book: _Book, outcome: Outcome) -> bool:
        self._release(book)
        if self.out[book.index] is None:
            self.out[book.index] = outcome
            self.left -= 1
            if self.on_done is not None:
                self.on_done(outcome)
        return True

    def _give_up(self, why: str) -> None:
        """A bound ran out: every book not yet ended becomes a fault saying which."""
        for book in self.books:
            if self.out[book.index] is None:
                self._fault(book, f"{why}; not refreshed on the cluster (the book is as it "
                                  "was, or completely refreshed if its worker had finished)")
