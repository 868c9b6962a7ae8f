"""Watch a book or a folder and refresh a declared book each time it is saved.

One job: turn file-system events into one refresh per finished save.

- **Events.** A watchdog observer thread reports created, modified, moved-in, closed
  after writing and attribute-changed events for workbooks (``.xlsx``, ``.xlsm``) and
  deleted events for a spreadsheet program's lock files. It only puts paths on a queue;
  everything else happens in the thread that calls :meth:`Watcher.run`, so the state
  below needs no locks.
- **Debounce.** Each event for a book (re)sets its due time to *settle* seconds later and
  notes the book's size, modification time and inode. When the due time comes and the
  book still has that signature (nothing was written for a whole settle interval), the
  save is finished; otherwise the book waits another settle interval. A burst of events
  (temporary file, rename, touch) therefore gives one look at the book.
- **Finished writing.** The settled book must also open as a zip (its central directory
  is written last). If it does not, it is looked at again after each of
  :data:`INVALID_TRIES` more settle intervals, then refreshed anyway (so a broken book
  gets its refusal line). A book still changing after *patience* seconds is left until
  its next save, with a line saying so.
- **Held open.** A book with a spreadsheet program's lock file beside it is skipped with
  one line; when the lock file goes away the book is looked at again and refreshed if it
  changed meanwhile.
- **Own writes.** After a refresh the watcher notes the signature of the file sheetfit
  put in place; later events whose book still has it are dismissed. sheetfit's own
  files (``.sheetfit-*``) and backups (``*.before-refresh.xlsx``) are never books.
- **Books without models** are reported once and then ignored until they change (and
  quietly after that while they still declare none).

:func:`command` is the command line's ``sheetfit watch``: it prints one line per book
looked at and stops on SIGINT or SIGTERM (a refresh in progress finishes; a second
signal abandons it, and the graft's rename keeps the book whole either way).
"""

from __future__ import annotations

import datetime as dt
import os
import queue
import signal
import sys
import threading
import time
import zipfile
from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from types import FrameType

from watchdog.events import FileSystemEvent, FileSystemEventHandler
from watchdog.observers import Observer

from sheetfit.batch.outcome import Outcome, refresh_one
from sheetfit.stopping import Stopped
from sheetfit.writer.target import DEFAULT_WAIT, app_lock_files

__all__ = ["DEFAULT_SETTLE", "INVALID_TRIES", "Watcher", "command", "line"]

#: Seconds a book must stay unchanged before it is refreshed.
DEFAULT_SETTLE = 1.0
#: Extra settle intervals a settled book that is not (yet) a zip is waited for.
INVALID_TRIES = 3
#: Seconds (at least; ten settle intervals if longer) a book may keep changing.
DEFAULT_PATIENCE = 60.0
#: Longest the run loop sleeps before it looks at the stop flag again.
_TICK = 0.1
_SUFFIXES = (".xlsx", ".xlsm")
_BACKUP_INFIX = ".before-refresh"
_NO_MODELS = "no models declared"

#: size, modification time (ns) and inode: what tells one version of a file from another.
Signature = tuple[int, int, int]


def _signature(path: Path) -> Signature | None:
    try:
        st = os.stat(path)
    except OSError:
        return None
    return (st.st_size, st.st_mtime_ns, st.st_ino)


def is_book_name(name: str) -> bool:
    """A workbook sheetfit would refresh: not hidden, not a lock file, not a backup."""
    low = name.lower()
    if name.startswith((".", "~")) or not low.endswith(_SUFFIXES):
        return False
    return not low.rsplit(".", 1)[0].endswith(_BACKUP_INFIX)


def book_of_lock(path: Path) -> Path | None:
    """The book a spreadsheet program's lock file stands for (``.~lock.NAME#``, ``~$NAME``)."""
    name = path.name
    if name.startswith(".~lock.") and name.endswith("#") and len(name) > 8:
        return path.with_name(name[len(".~lock."):-1])
    if name.startswith("~$") and len(name) > 2:
        return path.with_name(name[2:])
    return None


def _held(book: Path) -> Path | None:
    for lock in app_lock_files(book):
        if os.path.lexists(lock):
            return lock
    return None


def _is_zip(path: Path) -> bool:
    try:
        with zipfile.ZipFile(path):
            return True
    except (zipfile.BadZipFile, OSError, ValueError):
        return False


@dataclass
class _Pending:
    first: float
    due: float
    sig: Signature | None
    invalid: int = 0


def line(outcome: Outcome, when: dt.datetime | None = None) -> str:
    """One stdout line: local time, book, status, seconds, message (tab-separated)."""
    stamp = (when or dt.datetime.now()).strftime("%Y-%m-%d %H:%M:%S")
    return f"{stamp}\t{outcome.book}\t{outcome.status}\t{outcome.seconds:.2f} s\t{outcome.message}"


class Watcher:
    """Refresh the declared books under ``path`` (a book or a folder, recursively) on save.

    ``refresh`` refreshes one book and never raises (default
    :func:`~sheetfit.batch.outcome.refresh_one`); ``emit`` receives one outcome per book
    looked at that is worth a line; ``clock`` gives monotonic seconds. Tests drive the
    state machine with :meth:`notice` and :meth:`step` under a fake clock, or the whole
    thing with :meth:`run` in a thread.
    """

    def __init__(self, path: str | Path, *, settle: float = DEFAULT_SETTLE,
                 patience: float | None = None,
                 refresh: Callable[[Path], Outcome] = refresh_one,
                 emit: Callable[[Outcome], None] = lambda o: None,
                 clock: Callable[[], float] = time.monotonic):
        if settle <= 0:
            raise ValueError("settle must be positive")
        self.root = Path(os.path.abspath(path))
        self.single = not self.root.is_dir()
        self.settle = settle
        self.patience = patience if patience is not None else max(DEFAULT_PATIENCE, 10 * settle)
        self.refresh = refresh
        self.emit = emit
        self.clock = clock
        #: set once the observer is watching (events after this are seen)
        self.ready = threading.Event()
        #: the book being refreshed right now, if any
        self.busy: Path | None = None
        #: that book's signature when its refresh began
        self.busy_from: Signature | None = None
        #: what happened to events and books, by kind (for tests and curiosity)
        self.counts: Counter[str] = Counter()
        self._events: queue.SimpleQueue[tuple[str, Path]] = queue.SimpleQueue()
        self._pending: dict[Path, _Pending] = {}
        self._handled: dict[Path, Signature] = {}
        self._wrote: dict[Path, Signature] = {}
        self._held: set[Path] = set()
        self._undeclared: set[Path] = set()

    # -- events -------------------------------------------------------------------------

    def _mine(self, book: Path) -> bool:
        if self.single:
            return book == self.root
        return is_book_name(book.name)

    def post(self, kind: str, path: str | bytes | Path) -> None:
        """Queue an event (thread-safe; the observer's handler calls this)."""
        self._events.put((kind, Path(os.fsdecode(path))))

    def notice(self, kind: str, path: Path) -> None:
        """Take one event into account: a book changed (``kind`` "changed") or a lock file
        went away ("released")."""
        if kind == "released":
            book = book_of_lock(path)
            if book is None or book not in self._held:
                return
            self.counts["released"] += 1
        else:
            if not self._mine(path):
                return
            book = path
        now = self.clock()
        entry = self._pending.get(book)
        sig = _signature(book)
        if entry is None:
            self._pending[book] = _Pending(now, now + self.settle, sig)
        else:  # still being written: wait afresh, and for a zip afresh
            entry.due, entry.sig, entry.invalid = now + self.settle, sig, 0
        self.counts["events"] += 1

    def drain(self, timeout: float = 0.0) -> None:
        """Take the queued events (waiting up to ``timeout`` seconds for the first)."""
        try:
            kind, path = self._events.get(timeout=timeout) if timeout > 0 else \
                self._events.get_nowait()
        except queue.Empty:
            return
        self.notice(kind, path)
        while True:
            try:
                kind, path = self._events.get_nowait()
            except queue.Empty:
                return
            self.notice(kind, path)

    def idle(self) -> bool:
        """Nothing queued, nothing waiting to settle, nothing being refreshed."""
        return self._events.empty() and not self._pending and self.busy is None

    # -- the state machine --------------------------------------------------------------

    def step(self) -> None:
        """Look at every book whose settle interval is over; refresh those that are ready."""
        now = self.clock()
        for book in [b for b, e in self._pending.items() if e.due <= now]:
            self._look(book, self._pending[book], now)
        for book, entry in list(self._pending.items()):
            if book in self._pending and now - entry.first >= self.patience:
                del self._pending[book]
                self.counts["gave up"] += 1
                self.emit(Outcome(str(book), "skipped", 0, 0.0,
                                  f"still changing after {self.patience:g} s; "
                                  "waiting for its next save"))

    def _look(self, book: Path, entry: _Pending, now: float) -> None:
        sig = _signature(book)
        if sig is None:
            del self._pending[book]
            self.counts["gone"] += 1
            return
        if sig != entry.sig:  # written during the settle interval: wait for quiet
            entry.sig, entry.due = sig, now + self.settle
            self.counts["unsettled"] += 1
            return
        if sig == self._wrote.get(book) or sig == self._handled.get(book):
            del self._pending[book]
            self.counts["own write" if sig == self._wrote.get(book) else "unchanged"] += 1
            if _held(book) is None:
                self._held.discard(book)
            return
        lock = _held(book)
        if lock is not None:
            del self._pending[book]
            self.counts["held"] += 1
            if book not in self._held:
                self._held.add(book)
                self.emit(Outcome(str(book), "skipped", 0, 0.0,
                                  f"open in a spreadsheet program (its lock file {lock.name} "
                                  "is there); refreshing when it is closed, if it changed"))
            return
        self._held.discard(book)
        if not _is_zip(book) and entry.invalid < INVALID_TRIES:
            entry.invalid += 1
            entry.due = now + self.settle
            self.counts["not a zip yet"] += 1
            return
        del self._pending[book]
        self._refresh(book, sig)

    def _refresh(self, book: Path, sig: Signature) -> None:
        self.busy, self.busy_from = book, sig
        try:
            outcome = self.refresh(book)
        finally:
            self.busy = None
        self.counts[outcome.status] += 1
        if outcome.status == "refreshed":
            after = _signature(book)
            if after is not None:
                self._wrote[book] = self._handled[book] = after
            self._undeclared.discard(book)
        elif outcome.status == "skipped" and outcome.message == _NO_MODELS:
            self._handled[book] = sig
            if book in self._undeclared:
                return  # quiet after the first look
            self._undeclared.add(book)
        elif outcome.status == "skipped":
            lock = _held(book)
            if lock is not None:  # opened between our look and the refresh's
                if book in self._held:
                    return
                self._held.add(book)
        else:  # refused or fault: not again until the book changes
            self._handled[book] = sig
            self._undeclared.discard(book)
        self.emit(outcome)

    # -- the loop -----------------------------------------------------------------------

    def _wait(self) -> float:
        if not self._pending:
            return _TICK
        soonest = min(e.due for e in self._pending.values()) - self.clock()
        return min(_TICK, max(soonest, 0.0))

    def run(self, stop: threading.Event, on_ready: Callable[[], None] | None = None) -> None:
        """Watch until ``stop`` is set; the observer is stopped and joined on the way out.

        ``on_ready`` is called once the observer is watching.

        Raises OSError when the path cannot be watched (e.g. the system's limit of
        watches is reached).
        """
        observer = Observer()
        folder = self.root.parent if self.single else self.root
        observer.schedule(_Handler(self), str(folder), recursive=not self.single)
        observer.start()
        try:
            self.ready.set()
            if on_ready is not None:
                on_ready()
            while not stop.is_set():
                self.drain(self._wait())
                if not stop.is_set():
                    self.step()
        finally:
            observer.stop()
            observer.join(timeout=10)


class _Handler(FileSystemEventHandler):
    """Runs in the observer's thread: puts the paths that matter on the watcher's queue."""

    _CHANGED = frozenset({"created", "modified", "closed", "attrib"})

    def __init__(self, watcher: Watcher):
        super().__init__()
        self.watcher = watcher

    def dispatch(self, event: FileSystemEvent) -> None:
        if event.is_directory:
            return
        kind = event.event_type
        if kind in self._CHANGED:
            self.watcher.post("changed", event.src_path)
        elif kind == "moved":
            self.watcher.post("changed", event.dest_path)
            self.watcher.post("released", event.src_path)
        elif kind == "deleted":
            self.watcher.post("released", event.src_path)


def command(path: str, *, settle: float = DEFAULT_SETTLE, backup: bool = False,
            wait: float = DEFAULT_WAIT) -> int:
    """``sheetfit watch PATH``: watch until SIGINT or SIGTERM; returns the exit status.

    Returns 128 + the signal number when stopped (130 for SIGINT, 143 for SIGTERM), 2 when
    PATH cannot be watched.
    """
    if not os.path.exists(path):
        print(f"sheetfit: refused: {path}: no such book or folder", file=sys.stderr)
        return 2

    def refresh(book: Path) -> Outcome:
        return refresh_one(book, backup=backup, wait=wait)

    def emit(outcome: Outcome) -> None:
        print(line(outcome), flush=True)

    def announce() -> None:
        what = "book" if watcher.single else "folder"
        print(f"sheetfit: watching the {what} {watcher.root} (settle {settle:g} s); "
              "Ctrl-C to stop", file=sys.stderr, flush=True)

    watcher = Watcher(path, settle=settle, refresh=refresh, emit=emit)
    stop = threading.Event()
    got: list[int] = []
    abandoned: list[tuple[Path, Signature | None]] = []

    def on_signal(signum: int, _frame: FrameType | None) -> None:
        if got and watcher.busy is not None:  # a second signal abandons the refresh
            abandoned.append((watcher.busy, watcher.busy_from))
            raise Stopped(signum)
        got.append(signum)
        stop.set()
        if watcher.busy is not None:
            try:
                print(f"sheetfit: stopping after the refresh of {watcher.busy} "
                      "(signal again to abandon it)", file=sys.stderr, flush=True)
            except (OSError, RuntimeError):  # stderr closed, or busy in this thread
                pass

    previous = {s: signal.signal(s, on_signal) for s in (signal.SIGINT, signal.SIGTERM)}
    try:
        watcher.run(stop, on_ready=announce)
    except Stopped:
        pass  # the refresh cleaned up after itself; the observer is stopped and joined
    except OSError as exc:
        print(f"sheetfit: refused: cannot watch {path} ({exc.strerror or exc})",
              file=sys.stderr)
        return 2
    finally:
        for s, h in previous.items():
            signal.signal(s, h)
    signum = got[0] if got else signal.SIGINT
    said = f"sheetfit: watch stopped by {signal.Signals(signum).name}"
    if abandoned:
        book, before = abandoned[0]
        kept = "left as it was" if _signature(book) == before else "refreshed"
        said += f"; the refresh of {book} was abandoned: the book is whole ({kept})"
    print(said, file=sys.stderr)
    return 128 + signum
