"""Running the spreadsheet engine: one headless LibreOffice and its UNO worker.

:class:`Engine` starts soffice with a private profile and its own pipe, plus a
long-lived worker under the system Python (``uno_worker.py``) that talks UNO to it;
the two speak JSON lines. :meth:`Engine.recalculate` loads a copy of a book, forces
``calculateAll()`` and returns every formula cell's fresh value in full double
precision. Timeouts and crashes kill both processes and raise with both logs' tails;
the next request starts a fresh pair.
"""

from __future__ import annotations

import json
import os
import queue
import shutil
import signal
import subprocess
import tempfile
import threading
import time
import uuid
import weakref
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO, Any, NoReturn, Self

from .locate import INSTALL_HINT, EngineInfo, find_engine
from .recalculated import RecalcBook, RecalcCell, RecalcSheet

__all__ = ["Engine", "EngineCrashed", "EngineError", "EngineTimeout"]

WORKER_SCRIPT = Path(__file__).with_name("uno_worker.py")
DEFAULT_TIMEOUT = 120.0
_TAIL_CHARS = 3000


class EngineError(RuntimeError):
    """The engine could not do what was asked (load failure, worker error, start failure)."""


class EngineTimeout(EngineError):
    """A request to the engine did not finish in time; the processes were killed."""


class EngineCrashed(EngineError):
    """The worker or soffice exited while a request was outstanding."""


def _tail(path: Path | None, limit: int = _TAIL_CHARS) -> str:
    if path is None or not path.exists():
        return "(none)"
    data = path.read_bytes()[-limit:].decode("utf-8", "replace").strip()
    return data or "(empty)"


def _kill_group(proc: subprocess.Popen[Any] | None) -> None:
    """SIGKILL the process group we created for proc (catches soffice.bin behind oosplash)."""
    if proc is None:
        return
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError):
        pass


@dataclass
class _Running:
    """The live processes of one engine start, and what is needed to tear them down."""

    soffice: subprocess.Popen[bytes]
    worker: subprocess.Popen[str]
    soffice_log: IO[bytes]
    worker_log: IO[bytes]
    soffice_log_path: Path
    worker_log_path: Path
    profile: Path
    replies: queue.Queue[str | None]
    reader: threading.Thread
    pipe: str
    next_id: int = 1
    start_seconds: float = 0.0
    closed: bool = field(default=False)


def _read_lines(stream: IO[str], sink: queue.Queue[str | None]) -> None:
    try:
        for line in stream:
            sink.put(line)
    except (OSError, ValueError):
        pass
    finally:
        sink.put(None)


class Engine:
    """One headless LibreOffice plus its UNO worker; recalculates workbooks on request.

    Use as a context manager (or call :meth:`close`). Starting costs about a second, so
    share one instance per test session. After a timeout or crash the processes are
    killed and the next request starts a fresh pair.
    """

    def __init__(
        self,
        info: EngineInfo | None = None,
        *,
        timeout: float = DEFAULT_TIMEOUT,
        start_timeout: float = DEFAULT_TIMEOUT,
        profile_template: Path | None = None,
        env: Mapping[str, str] | None = None,
    ) -> None:
        """``profile_template``: a LibreOffice user profile (the folder passed as
        ``-env:UserInstallation``) copied afresh for every start, e.g. one with an extension
        installed by ``unopkg``; ``env``: variables added to soffice's environment."""
        found = info if info is not None else find_engine()
        if found is None:
            raise EngineError(f"LibreOffice Calc with python3-uno not found: {INSTALL_HINT}")
        self.info = found
        self.timeout = timeout
        self.start_timeout = start_timeout
        self.profile_template = profile_template
        self.env = dict(env or {})
        self._base = Path(tempfile.mkdtemp(prefix="sheetfit-engine-"))
        self._run: _Running | None = None
        self._starts = 0
        self.last_start_seconds: float | None = None
        self._finalizer = weakref.finalize(self, Engine._cleanup, self._base, [None])

    # -- lifecycle -------------------------------------------------------------------

    def __enter__(self) -> Self:
        self.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    def running(self) -> bool:
        return self._run is not None

    @property
    def worker_pid(self) -> int | None:
        return self._run.worker.pid if self._run else None

    def start(self) -> None:
        """Start soffice and the worker unless they are already running."""
        if self._run is not None:
            return
        if not self._base.exists():
            raise EngineError("this Engine was closed")
        self._starts += 1
        t0 = time.monotonic()
        profile = self._base / f"profile-{self._starts}"
        workdir = self._base / "work"
        workdir.mkdir(exist_ok=True)
        pipe = f"sheetfit_{os.getpid()}_{uuid.uuid4().hex[:12]}"
        soffice_log_path = self._base / f"soffice-{self._starts}.log"
        worker_log_path = self._base / f"worker-{self._starts}.log"
        soffice_log = open(soffice_log_path, "wb")  # noqa: SIM115 - closed in _stop
        worker_log = open(worker_log_path, "wb")  # noqa: SIM115 - closed in _stop
        if self.profile_template is not None:
            shutil.copytree(self.profile_template, profile, symlinks=True)
        env = {**os.environ, **self.env}
        env.setdefault("SAL_USE_VCLPLUGIN", "svp")  # no display needed
        soffice = subprocess.Popen(
            [
                self.info.soffice,
                f"-env:UserInstallation={profile.as_uri()}",
                "--headless",
                "--invisible",
                "--norestore",
                "--nolockcheck",
                "--nodefault",
                "--nologo",
                f"--accept=pipe,name={pipe};urp;",
            ],
            stdin=subprocess.DEVNULL,
            stdout=soffice_log,
            stderr=subprocess.STDOUT,
            env=env,
            start_new_session=True,
        )
        worker = subprocess.Popen(
            [
                self.info.python,
                str(WORKER_SCRIPT),
                "--pipe",
                pipe,
                "--workdir",
                str(workdir),
                "--connect-timeout",
                str(self.start_timeout),
            ],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=worker_log,
            text=True,
            encoding="utf-8",
            start_new_session=True,
        )
        if worker.stdout is None:  # stdout=PIPE above; never None unless Popen broke
            for proc in (worker, soffice):
                _kill_group(proc)
            soffice_log.close()
            worker_log.close()
            raise EngineError("the UNO worker was started without a reply pipe")
        replies: queue.Queue[str | None] = queue.Queue()
        reader = threading.Thread(
            target=_read_lines, args=(worker.stdout, replies), daemon=True, name="uno-reply"
        )
        reader.start()
        self._run = _Running(
            soffice=soffice,
            worker=worker,
            soffice_log=soffice_log,
            worker_log=worker_log,
            soffice_log_path=soffice_log_path,
            worker_log_path=worker_log_path,
            profile=profile,
            replies=replies,
            reader=reader,
            pipe=pipe,
        )
        self._finalizer.detach()
        self._finalizer = weakref.finalize(self, Engine._cleanup, self._base, [self._run])
        try:
            self._await(0, "start", self.start_timeout + 5.0, time.monotonic())
        except EngineError:
            self._stop(graceful=False)
            raise
        self._run.start_seconds = time.monotonic() - t0
        self.last_start_seconds = self._run.start_seconds

    def close(self) -> None:
        """Stop both processes and remove the private profile and scratch files."""
        if self._run is not None:
            self._stop(graceful=True)
        self._finalizer()

    @staticmethod
    def _cleanup(base: Path, holder: list[_Running | None]) -> None:
        run = holder[0]
        if run is not None and not run.closed:
            _hard_stop(run)
        shutil.rmtree(base, ignore_errors=True)

    def _stop(self, *, graceful: bool) -> None:
        run, self._run = self._run, None
        if run is None:
            return
        if graceful and run.worker.poll() is None:
            try:
                self._send(run, {"op": "shutdown"})
                self._await_run(run, run.next_id - 1, "shutdown", 30.0, time.monotonic())
            except EngineError:
                pass
            for proc in (run.worker, run.soffice):
                try:
                    proc.wait(timeout=30)
                except subprocess.TimeoutExpired:
                    pass
        _hard_stop(run)
        shutil.rmtree(run.profile, ignore_errors=True)

    # -- requests --------------------------------------------------------------------

    def ping(self, *, timeout: float | None = None) -> dict[str, Any]:
        """Round-trip a no-op request; returns the worker's reply."""
        return self._request({"op": "ping"}, timeout)

    def recalculate(
        self, path: str | os.PathLike[str], *, timeout: float | None = None
    ) -> RecalcBook:
        """Load a copy of the book, force a full recalculation and read every formula cell."""
        source = Path(path).resolve()
        if not source.is_file():
            raise FileNotFoundError(f"no such workbook: {source}")
        t0 = time.monotonic()
        reply = self._request({"op": "recalculate", "path": str(source)}, timeout, what=source)
        sheets = []
        for sheet in reply["sheets"]:
            name = sheet["name"]
            cells = {
                address: RecalcCell(name, address, value, error, code, formula)
                for address, value, error, code, formula in sheet["cells"]
            }
            sheets.append(RecalcSheet(name, cells))
        seconds = {**reply["seconds"], "total": time.monotonic() - t0}
        return RecalcBook(path=source, sheets=tuple(sheets), seconds=seconds)

    def run_command(
        self,
        path: str | os.PathLike[str] | None,
        url: str,
        *,
        active: str | None = None,
        edits: Sequence[tuple[str, str, float]] = (),
        read: Sequence[str] = (),
        timeout: float | None = None,
    ) -> dict[str, Any]:
        """Open the book itself (the command under test writes it; None: a new, never saved
        spreadsheet), apply ``edits`` (sheet, cell, number), make ``active`` the active
        sheet, dispatch ``url`` in the document's window through a DispatchHelper, then read
        the used area (from A1) of the ``read`` sheets from whatever document that window
        shows afterwards, and close it.

        Returns ``state`` and ``result`` (the DispatchResultEvent's, when the command
        reports one), ``active`` and ``sheets`` (names) after the command, and ``values``:
        sheet name -> rows of cell values (numbers as floats, text, '' for empty).
        """
        source = None if path is None else str(Path(path).resolve())
        message = {
            "op": "run_command",
            "path": source,
            "url": url,
            "active": active,
            "edits": [list(e) for e in edits],
            "read": list(read),
        }
        return self._request(message, timeout, what=url)

    def set_setting(
        self, nodepath: str, name: str, value: str, *, timeout: float | None = None
    ) -> None:
        """Write one string setting in the running engine's configuration (and commit it)."""
        self._request(
            {"op": "set_setting", "nodepath": nodepath, "name": name, "value": value},
            timeout,
            what=f"{nodepath}/{name}",
        )

    def _request(
        self, message: dict[str, Any], timeout: float | None, what: object = None
    ) -> dict[str, Any]:
        self.start()
        run = self._live()
        limit = self.timeout if timeout is None else timeout
        label = str(message["op"]) + (f" {what}" if what is not None else "")
        t0 = time.monotonic()
        req_id = self._send(run, message, label)
        return self._await(req_id, label, limit, t0)

    def _send(self, run: _Running, message: dict[str, Any], label: str = "") -> int:
        req_id = run.next_id
        run.next_id += 1
        stdin = run.worker.stdin
        if stdin is None:  # stdin=PIPE at start; never None unless Popen broke
            self._fail(run, EngineError, f"{label or message['op']}: worker has no stdin", 0.0)
        try:
            stdin.write(json.dumps({**message, "id": req_id}) + "\n")
            stdin.flush()
        except (BrokenPipeError, OSError, ValueError):
            self._fail(run, EngineCrashed, f"{label or message['op']}: worker is gone", 0.0)
        return req_id

    def _live(self) -> _Running:
        """The running process pair; an explicit error when there is none."""
        if self._run is None:
            raise EngineError("the engine is not running")
        return self._run

    def _await(self, req_id: int, label: str, limit: float, t0: float) -> dict[str, Any]:
        return self._await_run(self._live(), req_id, label, limit, t0)

    def _await_run(
        self, run: _Running, req_id: int, label: str, limit: float, t0: float
    ) -> dict[str, Any]:
        deadline = t0 + limit
        while True:
            remaining = deadline - time.monotonic()
            if remaining <= 0:
                self._fail(run, EngineTimeout, f"{label}: no reply within {limit:g} s", limit)
            try:
                line = run.replies.get(timeout=min(remaining, 0.2))
            except queue.Empty:
                if run.soffice.poll() is not None:
                    self._fail(
                        run,
                        EngineCrashed,
                        f"{label}: soffice exited with code {run.soffice.returncode}",
                        time.monotonic() - t0,
                    )
                continue
            if line is None:
                code = run.worker.wait(timeout=30)
                self._fail(
                    run,
                    EngineCrashed,
                    f"{label}: the UNO worker exited with code {code}",
                    time.monotonic() - t0,
                )
            try:
                reply = json.loads(line)
            except json.JSONDecodeError:
                self._fail(
                    run,
                    EngineError,
                    f"{label}: garbled reply {line[:200]!r}",
                    time.monotonic() - t0,
                )
            if reply.get("id") != req_id:
                continue  # a late reply to an earlier request
            if not reply.get("ok"):
                message = f"{label}: {reply.get('error')}\n{reply.get('traceback', '')}"
                if req_id == 0:  # start failed
                    self._fail(run, EngineError, message, time.monotonic() - t0)
                raise EngineError(message + self._diagnostics(run))
            return dict(reply)

    def _diagnostics(self, run: _Running) -> str:
        run.soffice_log.flush()
        run.worker_log.flush()
        return (
            f"\n--- soffice ({self.info.soffice}) output, tail ---\n{_tail(run.soffice_log_path)}"
            f"\n--- worker ({self.info.python} {WORKER_SCRIPT.name}) stderr, tail ---\n"
            f"{_tail(run.worker_log_path)}"
        )

    def _fail(
        self, run: _Running, kind: type[EngineError], message: str, elapsed: float
    ) -> NoReturn:
        """Kill the pair (the next request restarts it) and raise with both logs' tails."""
        _hard_stop(run, close_logs=False)
        details = self._diagnostics(run)
        _close_logs(run)
        if self._run is run:
            self._run = None
            shutil.rmtree(run.profile, ignore_errors=True)
        raise kind(
            f"LibreOffice engine failed: {message} (after {elapsed:.1f} s; processes killed, "
            f"the next request starts a fresh engine){details}"
        )


def _close_logs(run: _Running) -> None:
    for log in (run.soffice_log, run.worker_log):
        if not log.closed:
            log.close()


def _hard_stop(run: _Running, *, close_logs: bool = True) -> None:
    """Kill whatever is left of both processes, reap them and close every handle."""
    if run.closed:
        if close_logs:
            _close_logs(run)
        return
    run.closed = True
    for proc in (run.worker, run.soffice):
        if proc.poll() is None:
            _kill_group(proc)
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            pass
    _kill_group(run.soffice)  # soffice.bin may outlive the launcher
    if run.worker.stdin is not None:
        try:
            run.worker.stdin.close()
        except OSError:
            pass
    run.reader.join(timeout=10)
    if run.worker.stdout is not None:
        run.worker.stdout.close()
    if close_logs:
        _close_logs(run)
