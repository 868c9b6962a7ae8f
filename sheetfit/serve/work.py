"""One worker process per request: its phases, its time limit, how many run at once.

Each piece of work (a refresh, an inspection, a function call) runs in a fresh process
started from a fork server that has imported sheetfit once, so requests share no state
at all: a refresh collects its numerical cautions through ``warnings``, which is
process-wide, and two refreshes in threads of one process could swap them. A process
also makes the time limit real: at the deadline the worker is killed (its temporary
files lie in the request's own folder, which the caller removes), not merely abandoned.

The worker sends ``("phase", name)`` as a refresh enters each phase, then one of
``("done", result)``, ``("refused", refusal)`` or ``("fault", message)``.
"""

from __future__ import annotations

import multiprocessing as mp
import os
import signal
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass
from multiprocessing.connection import Connection
from multiprocessing.context import BaseContext
from typing import Any

__all__ = ["Outcome", "Workers"]


@dataclass(frozen=True)
class Outcome:
    """How a piece of work ended: ``kind`` is done, refused, fault, timeout or stopped."""

    kind: str
    payload: Any = None


def _context() -> BaseContext:
    if "forkserver" in mp.get_all_start_methods():
        ctx = mp.get_context("forkserver")
        ctx.set_forkserver_preload(["sheetfit.serve.tasks"])
        return ctx
    return mp.get_context("spawn")


def _nothing() -> None:
    """A worker that does nothing (``Workers.warm``)."""


def _run(conn: Connection, task: str, args: dict[str, Any]) -> None:
    """In the worker: run the task, report its phases and how it ended.

    With ``cwd`` in ``args`` the worker works in that folder, so a book given by its bare
    name is named in refusals as the command line names a book in the current folder.
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the service decides when work stops
    if "cwd" in args:
        os.chdir(args.pop("cwd"))
    from sheetfit.errors import SheetfitError
    from sheetfit.serve import tasks

    def on_phase(name: str) -> None:
        conn.send(("phase", name))

    try:
        if task == "refresh":
            result: Any = tasks.refresh_book(on_phase=on_phase, **args)
        elif task == "inspect":
            result = tasks.inspect_book(on_phase=on_phase, **args)
        else:
            result = tasks.call_function(args["name"], args["args"])
        conn.send(("done", result))
    except SheetfitError as exc:
        conn.send(("refused", tasks.refusal(exc)))
    except BaseException as exc:  # noqa: BLE001 - reported to the caller as a fault
        conn.send(("fault", f"{type(exc).__name__}: {exc}"))
    finally:
        conn.close()


class Workers:
    """Runs work in worker processes, at most ``limit`` at once."""

    def __init__(self, limit: int) -> None:
        self._ctx = _context()
        self._slots = threading.BoundedSemaphore(limit)
        self._closing = threading.Event()

    def warm(self) -> None:
        """Start the fork server now (it imports sheetfit once), so the first request
        does not wait for it."""
        proc = self._ctx.Process(target=_nothing, daemon=True)  # type: ignore[attr-defined]
        proc.start()
        proc.join()

    def close(self) -> None:
        """Stop every piece of work under way (their workers are killed) and refuse more."""
        self._closing.set()

    def run(self, task: str, args: dict[str, Any], deadline: float,
            on_phase: Callable[[str], None] | None = None,
            cancelled: Callable[[], bool] | None = None) -> Outcome:
        """Run ``task`` in a worker and wait for it until ``deadline`` (``time.monotonic``).

        Waiting for a free worker counts against the deadline. Blocks: call it from a
        thread. ``cancelled`` is asked twice a second; when it says yes, the worker is
        killed and the outcome is ``stopped``.
        """
        if not self._slots.acquire(timeout=max(0.0, deadline - time.monotonic())):
            return Outcome("timeout")
        try:
            return self._watch(task, args, deadline, on_phase, cancelled)
        finally:
            self._slots.release()

    def _watch(self, task: str, args: dict[str, Any], deadline: float,
               on_phase: Callable[[str], None] | None,
               cancelled: Callable[[], bool] | None) -> Outcome:
        ours, theirs = self._ctx.Pipe(duplex=False)
        proc = self._ctx.Process(target=_run, args=(theirs, task, args), daemon=True)  # type: ignore[attr-defined]
        proc.start()
        theirs.close()
        try:
            while True:
                if self._closing.is_set() or (cancelled is not None and cancelled()):
                    return Outcome("stopped")
                left = deadline - time.monotonic()
                if left <= 0:
                    return Outcome("timeout")
                if not ours.poll(min(left, 0.5)):
                    continue
                try:
                    kind, payload = ours.recv()
                except EOFError:
                    proc.join(5)
                    return Outcome("fault", "the worker process stopped without an answer "
                                            f"(exit status {proc.exitcode})")
                if kind == "phase":
                    if on_phase is not None:
                        on_phase(payload)
                    continue
                return Outcome(kind, payload)
        finally:
            if proc.is_alive():
                proc.kill()
            proc.join()
            ours.close()
