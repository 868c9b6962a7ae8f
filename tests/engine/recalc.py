"""Recalculate workbooks in a real spreadsheet engine and check their cached values.

The project's promise is that a spreadsheet engine recalculating a written book
reproduces every cached formula value. This module proves it in tests:

* :class:`Engine` runs one headless LibreOffice (private profile, own pipe) and a
  long-lived worker under the system Python that talks UNO to it
  (``uno_worker.py``); :meth:`Engine.recalculate` forces ``calculateAll()`` and
  returns every formula cell's fresh value in full double precision.
* :func:`cached_formula_values` reads the cached values straight from the package
  XML (not through the library that wrote it).
* :func:`compare_to_cached` / :func:`assert_cached_values_hold` put the two together.
"""

from __future__ import annotations

import functools
import json
import math
import os
import posixpath
import queue
import re
import shutil
import signal
import subprocess
import tempfile
import threading
import time
import uuid
import weakref
import zipfile
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO, Any, Literal, NoReturn, Self

from defusedxml import ElementTree as SafeET

__all__ = [
    "CachedCell",
    "Engine",
    "EngineCrashed",
    "EngineError",
    "EngineInfo",
    "EngineTimeout",
    "Mismatch",
    "MismatchList",
    "RecalcBook",
    "RecalcCell",
    "RecalcSheet",
    "assert_cached_values_hold",
    "cached_formula_values",
    "compare_books",
    "compare_to_cached",
    "find_engine",
]

WORKER_SCRIPT = Path(__file__).with_name("uno_worker.py")
INSTALL_HINT = "apt-get install -y --no-install-recommends libreoffice-calc-nogui python3-uno"
DEFAULT_TIMEOUT = 120.0
_TAIL_CHARS = 3000

# --------------------------------------------------------------------------------------
# Finding the engine
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class EngineInfo:
    """Where the engine lives: the soffice launcher and a Python that can import uno."""

    soffice: str
    python: str


def _python_has_uno(python: str) -> bool:
    try:
        done = subprocess.run(
            [python, "-c", "import uno"],
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            timeout=60,
            check=False,
        )
    except (OSError, subprocess.TimeoutExpired):
        return False
    return done.returncode == 0


@functools.cache
def find_engine() -> EngineInfo | None:
    """Locate soffice and a system Python with UNO; None when either is missing.

    ``SHEETFIT_SOFFICE`` and ``SHEETFIT_UNO_PYTHON`` override the search.
    """
    soffice_candidates = [
        os.environ.get("SHEETFIT_SOFFICE"),
        shutil.which("soffice"),
        shutil.which("libreoffice"),
        "/usr/lib/libreoffice/program/soffice",
    ]
    soffice = next((c for c in soffice_candidates if c and os.access(c, os.X_OK)), None)
    if soffice is None:
        return None
    python_candidates = [
        os.environ.get("SHEETFIT_UNO_PYTHON"),
        "/usr/bin/python3",
        "/usr/lib/libreoffice/program/python",
    ]
    for python in python_candidates:
        if python and os.access(python, os.X_OK) and _python_has_uno(python):
            return EngineInfo(soffice=soffice, python=python)
    return None


# --------------------------------------------------------------------------------------
# Engine results
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class RecalcCell:
    """One formula cell after recalculation: its value, or the error it shows."""

    sheet: str
    address: str
    value: float | str | None
    error: str | None  # e.g. "#DIV/0!" or "Err:502"; None when the cell is not an error
    error_code: int  # the engine's numeric error code, 0 when not an error
    formula: str  # in the engine's notation, e.g. "=SUM(A1:A3)" or "{=LINEST(...)}"

    @property
    def is_error(self) -> bool:
        return self.error is not None


@dataclass(frozen=True)
class RecalcSheet:
    """The recalculated formula cells of one sheet, by address."""

    name: str
    cells: dict[str, RecalcCell]


@dataclass(frozen=True)
class RecalcBook:
    """Every formula cell of a workbook after a full recalculation."""

    path: Path
    sheets: tuple[RecalcSheet, ...]
    seconds: dict[str, float]  # load / calculate / read inside the worker, total round trip

    @property
    def cells(self) -> dict[tuple[str, str], RecalcCell]:
        return {(s.name, a): c for s in self.sheets for a, c in s.cells.items()}

    def sheet(self, name: str) -> RecalcSheet:
        for s in self.sheets:
            if s.name == name:
                return s
        raise KeyError(f"no sheet {name!r}; sheets: {[s.name for s in self.sheets]}")


# --------------------------------------------------------------------------------------
# The engine process pair
# --------------------------------------------------------------------------------------


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
    ) -> None:
        found = info if info is not None else find_engine()
        if found is None:
            raise EngineError(f"LibreOffice Calc with python3-uno not found: {INSTALL_HINT}")
        self.info = found
        self.timeout = timeout
        self.start_timeout = start_timeout
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
        env = dict(os.environ)
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
        replies: queue.Queue[str | None] = queue.Queue()
        assert worker.stdout is not None
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

    def _request(
        self, message: dict[str, Any], timeout: float | None, what: object = None
    ) -> dict[str, Any]:
        self.start()
        run = self._run
        assert run is not None
        limit = self.timeout if timeout is None else timeout
        label = str(message["op"]) + (f" {what}" if what is not None else "")
        t0 = time.monotonic()
        req_id = self._send(run, message, label)
        return self._await(req_id, label, limit, t0)

    def _send(self, run: _Running, message: dict[str, Any], label: str = "") -> int:
        req_id = run.next_id
        run.next_id += 1
        assert run.worker.stdin is not None
        try:
            run.worker.stdin.write(json.dumps({**message, "id": req_id}) + "\n")
            run.worker.stdin.flush()
        except (BrokenPipeError, OSError, ValueError):
            self._fail(run, EngineCrashed, f"{label or message['op']}: worker is gone", 0.0)
        return req_id

    def _await(self, req_id: int, label: str, limit: float, t0: float) -> dict[str, Any]:
        run = self._run
        assert run is not None
        return self._await_run(run, req_id, label, limit, t0)

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


# --------------------------------------------------------------------------------------
# Cached values from the package XML
# --------------------------------------------------------------------------------------

CachedKind = Literal["n", "s", "b", "e", "none"]


@dataclass(frozen=True)
class CachedCell:
    """A formula cell as stored in the file: its formula text and cached value."""

    sheet: str
    address: str
    formula: str  # without "=", as stored; for shared/array members see ``note``
    kind: CachedKind  # number, string, boolean, error, or no cached value
    value: float | str | bool | None
    note: str = ""  # e.g. "shared si=0 from C2" or "array E1:F2"


_REL_OFFICE_DOC = "/officeDocument"
_REL_WORKSHEET = "/worksheet"
_REL_SHARED_STRINGS = "/sharedStrings"
_CELL_RE = re.compile(r"^\$?([A-Za-z]{1,3})\$?(\d+)$")
_REF_RE = re.compile(r"(?<![A-Za-z0-9_.!$])(\$?)([A-Z]{1,3})(\$?)(\d+)(?![A-Za-z0-9_(!])")
_QUOTED_RE = re.compile(r"(\"(?:[^\"]|\"\")*\"|'(?:[^']|'')*')")


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def column_index(letters: str) -> int:
    """0-based column index for spreadsheet column letters."""
    n = 0
    for ch in letters.upper():
        n = n * 26 + ord(ch) - 64
    return n - 1


def column_letters(index: int) -> str:
    """Spreadsheet column letters for a 0-based column index."""
    letters = ""
    index += 1
    while index:
        index, rem = divmod(index - 1, 26)
        letters = chr(65 + rem) + letters
    return letters


def _split_address(address: str) -> tuple[int, int]:
    m = _CELL_RE.match(address)
    if m is None:
        raise ValueError(f"not a cell address: {address!r}")
    return column_index(m.group(1)), int(m.group(2)) - 1


def _split_range(ref: str) -> tuple[int, int, int, int]:
    first, _, last = ref.partition(":")
    c0, r0 = _split_address(first)
    c1, r1 = _split_address(last or first)
    return min(c0, c1), min(r0, r1), max(c0, c1), max(r0, r1)


def _shift_formula(text: str, dcol: int, drow: int) -> str:
    """Move the relative A1 references of a shared formula's master text by an offset."""

    def shift(m: re.Match[str]) -> str:
        cabs, col, rabs, row = m.groups()
        c = column_index(col) if cabs else column_index(col) + dcol
        r = int(row) if rabs else int(row) + drow
        if c < 0 or r < 1:
            return "#REF!"
        return f"{cabs}{column_letters(c)}{rabs}{r}"

    parts = _QUOTED_RE.split(text)
    return "".join(p if i % 2 else _REF_RE.sub(shift, p) for i, p in enumerate(parts))


def _resolve_target(base_part: str, target: str) -> str:
    if target.startswith("/"):
        return target.lstrip("/")
    return posixpath.normpath(posixpath.join(posixpath.dirname(base_part), target))


def _rels_path(part: str) -> str:
    folder, name = posixpath.split(part)
    return posixpath.join(folder, "_rels", name + ".rels")


def _read_rels(zf: zipfile.ZipFile, part: str) -> dict[str, tuple[str, str]]:
    """rId -> (type, resolved part name) for one part's relationships."""
    name = _rels_path(part)
    if name not in zf.namelist():
        return {}
    root = SafeET.fromstring(zf.read(name))
    rels: dict[str, tuple[str, str]] = {}
    for rel in root:
        if _local(rel.tag) != "Relationship" or rel.get("TargetMode") == "External":
            continue
        rels[rel.get("Id", "")] = (
            rel.get("Type", ""),
            _resolve_target(part, rel.get("Target", "")),
        )
    return rels


def _text_of(elem: Any) -> str:
    """Concatenated <t> text of a string item (plain or rich text runs)."""
    return "".join(t.text or "" for t in elem.iter() if _local(t.tag) == "t")


def _worksheet_parts(zf: zipfile.ZipFile) -> tuple[list[tuple[str, str]], str | None]:
    root_rels = _read_rels(zf, "")
    book_part = next(
        (target for kind, target in root_rels.values() if kind.endswith(_REL_OFFICE_DOC)), None
    )
    if book_part is None:
        raise ValueError("no workbook part in the package (_rels/.rels)")
    book_rels = _read_rels(zf, book_part)
    book = SafeET.fromstring(zf.read(book_part))
    sheets: list[tuple[str, str]] = []
    for elem in book.iter():
        if _local(elem.tag) != "sheet":
            continue
        rid = next((v for k, v in elem.attrib.items() if _local(k) == "id"), None)
        rel = book_rels.get(rid or "")
        if rel is not None and rel[0].endswith(_REL_WORKSHEET):
            sheets.append((elem.get("name", ""), rel[1]))
    strings = next((t for k, t in book_rels.values() if k.endswith(_REL_SHARED_STRINGS)), None)
    return sheets, strings


def _shared_strings(zf: zipfile.ZipFile, part: str | None) -> list[str]:
    if part is None or part not in zf.namelist():
        return []
    root = SafeET.fromstring(zf.read(part))
    return [_text_of(si) for si in root if _local(si.tag) == "si"]


def _cached_value(
    cell: Any, v: Any, strings: Callable[[], list[str]]
) -> tuple[CachedKind, float | str | bool | None]:
    kind = cell.get("t", "n")
    if kind == "inlineStr":
        is_ = next((ch for ch in cell if _local(ch.tag) == "is"), None)
        return ("s", _text_of(is_)) if is_ is not None else ("none", None)
    if v is None:
        return ("s", "") if kind == "str" else ("none", None)
    text = v.text or ""
    if kind in ("n", ""):
        return "n", float(text)
    if kind == "str":
        return "s", text
    if kind == "b":
        return "b", text.strip() in ("1", "true")
    if kind == "e":
        return "e", text
    if kind == "s":
        return "s", strings()[int(text)]
    return "s", text  # "d" (ISO date text) and anything unknown: compare as text


def _sheet_cells(
    sheet: str, stream: IO[bytes], strings: Callable[[], list[str]]
) -> dict[str, CachedCell]:
    found: dict[str, CachedCell] = {}
    shared: dict[str, tuple[str, int, int]] = {}  # si -> (master text, col, row)
    arrays: list[tuple[int, int, int, int, str, str]] = []  # open array ranges, text, ref
    all_arrays: list[tuple[int, int, int, int, str, str]] = []
    row_index = -1
    # Whole rows are handled at their end event: cheaper than per-cell events, and the
    # row number is known for cells that omit their own reference.
    for _, row in SafeET.iterparse(stream, events=("end",)):
        if _local(row.tag) != "row":
            continue
        r = row.get("r")
        row_index = int(r) - 1 if r else row_index + 1
        if arrays:
            arrays[:] = [a for a in arrays if a[3] >= row_index]
        col_index = -1
        for elem in row:
            if _local(elem.tag) != "c":
                continue
            ref = elem.get("r")
            col_index = _split_address(ref)[0] if ref else col_index + 1
            f = v = None
            for child in elem:
                name = _local(child.tag)
                if name == "f":
                    f = child
                elif name == "v":
                    v = child
            if f is None and not arrays:
                continue
            address = f"{column_letters(col_index)}{row_index + 1}"
            if f is None:
                for c0, r0, c1, r1, text, aref in arrays:
                    if c0 <= col_index <= c1 and r0 <= row_index <= r1:
                        kind, value = _cached_value(elem, v, strings)
                        found[address] = CachedCell(
                            sheet, address, text, kind, value, f"array {aref}"
                        )
                        break
                continue
            ftype = f.get("t", "normal")
            text = f.text or ""
            note = ""
            if ftype == "shared":
                si = f.get("si", "")
                if text:
                    shared[si] = (text, col_index, row_index)
                elif si in shared:
                    master, mcol, mrow = shared[si]
                    text = _shift_formula(master, col_index - mcol, row_index - mrow)
                    note = f"shared si={si} from {column_letters(mcol)}{mrow + 1}"
                else:
                    note = f"shared si={si}, master not found"
            elif ftype == "array":
                aref = f.get("ref") or address
                box = (*_split_range(aref), text, aref)
                arrays.append(box)
                all_arrays.append(box)
                note = f"array {aref}"
            kind, value = _cached_value(elem, v, strings)
            found[address] = CachedCell(sheet, address, text, kind, value, note)
        row.clear()
    # Array members with no <c> element at all still show a value in the engine.
    for c0, r0, c1, r1, text, aref in all_arrays:
        for r in range(r0, r1 + 1):
            for c in range(c0, c1 + 1):
                address = f"{column_letters(c)}{r + 1}"
                if address not in found:
                    found[address] = CachedCell(sheet, address, text, "none", None, f"array {aref}")
    return found


def cached_formula_values(path: str | os.PathLike[str]) -> dict[tuple[str, str], CachedCell]:
    """Every formula cell's cached value, read from the package XML: (sheet, address) -> cell.

    Members of an array formula's range count as formula cells (the engine reports
    them so); shared-formula members get the master's text moved to their position.
    """
    out: dict[tuple[str, str], CachedCell] = {}
    with zipfile.ZipFile(path) as zf:
        sheets, strings_part = _worksheet_parts(zf)
        strings = functools.cache(lambda: _shared_strings(zf, strings_part))
        for name, part in sheets:
            with zf.open(part) as stream:
                for address, cell in _sheet_cells(name, stream, strings).items():
                    out[(name, address)] = cell
    return out


# --------------------------------------------------------------------------------------
# Comparison
# --------------------------------------------------------------------------------------

# Engine error codes without a spreadsheet error literal, and the literals a file may
# carry for them (LibreOffice reports e.g. SQRT(-1) and VALUE("x") both as Err:502).
_ERROR_EQUIVALENTS: dict[int, frozenset[str]] = {
    502: frozenset({"#VALUE!", "#NUM!"}),
    503: frozenset({"#NUM!"}),
    504: frozenset({"#VALUE!"}),
    519: frozenset({"#VALUE!"}),
    521: frozenset({"#NULL!"}),
    523: frozenset({"#NUM!"}),
    532: frozenset({"#DIV/0!"}),
    32767: frozenset({"#N/A"}),
}


@dataclass(frozen=True)
class Mismatch:
    """A formula cell whose cached value the engine does not reproduce."""

    sheet: str
    address: str
    formula: str
    cached: object
    recalculated: object
    reason: str

    def __str__(self) -> str:
        return (
            f"'{self.sheet}'!{self.address}: {self.reason}; formula {self.formula!r}, "
            f"cached {self.cached!r}, recalculated {self.recalculated!r}"
        )


class MismatchList(list[Mismatch]):
    """The mismatches of one check, plus how many formula cells were checked."""

    def __init__(self, items: list[Mismatch], checked: int) -> None:
        super().__init__(items)
        self.checked = checked

    def report(self, limit: int = 20) -> str:
        lines = [f"{len(self)} of {self.checked} formula cells do not hold their cached value:"]
        lines += [f"  {m}" for m in self[:limit]]
        if len(self) > limit:
            lines.append(f"  ... and {len(self) - limit} more")
        return "\n".join(lines)


def _compare_cell(cached: CachedCell, fresh: RecalcCell, rel: float, abs_: float) -> str | None:
    """Why the fresh value does not reproduce the cached one, or None when it does."""
    if fresh.is_error:
        if cached.kind == "e" and (
            cached.value == fresh.error
            or cached.value in _ERROR_EQUIVALENTS.get(fresh.error_code, frozenset())
        ):
            return None
        return "the engine shows an error"
    if cached.kind == "none":
        return "no cached value in the file"
    if cached.kind == "e":
        return "cached an error, the engine computes a value"
    got = fresh.value
    if cached.kind == "s":
        if not isinstance(got, str):
            return "cached text, the engine computes a number"
        return None if got == cached.value else "text differs"
    if not isinstance(got, float):
        return "cached a number, the engine computes text"
    want = float(cached.value)  # type: ignore[arg-type]
    if not (math.isfinite(want) and abs(want - got) <= max(rel * abs(got), abs_)):
        return f"numbers differ by {abs(want - got):.3g}"
    return None


def compare_books(
    cached: Mapping[tuple[str, str], CachedCell],
    fresh: Mapping[tuple[str, str], RecalcCell],
    *,
    rel: float = 1e-9,
    abs_: float = 1e-12,
) -> MismatchList:
    """Compare cached and recalculated formula cells; either side missing is a mismatch."""
    out: list[Mismatch] = []
    for key, cell in cached.items():
        now = fresh.get(key)
        if now is None:
            out.append(
                Mismatch(*key, cell.formula, cell.value, None, "the engine reports no formula here")
            )
            continue
        reason = _compare_cell(cell, now, rel, abs_)
        if reason is not None:
            formula = cell.formula + (f" [{cell.note}]" if cell.note else "")
            shown = now.error if now.is_error else now.value
            out.append(Mismatch(*key, formula, cell.value, shown, reason))
    for key, now in fresh.items():
        if key not in cached:
            shown = now.error if now.is_error else now.value
            out.append(
                Mismatch(*key, now.formula, None, shown, "formula cell missing from the file")
            )
    return MismatchList(out, checked=len(cached.keys() | fresh.keys()))


def compare_to_cached(
    path: str | os.PathLike[str], engine: Engine, rel: float = 1e-9, abs_: float = 1e-12
) -> MismatchList:
    """Recalculate the book and list every formula cell whose cached value does not hold.

    Numbers match when |cached - recalculated| <= max(rel * |recalculated|, abs_);
    text must be equal; an engine error matches only the same cached error. The
    returned list carries ``.checked``, the number of formula cells compared.
    """
    fresh = engine.recalculate(path)
    return compare_books(cached_formula_values(path), fresh.cells, rel=rel, abs_=abs_)


def assert_cached_values_hold(
    path: str | os.PathLike[str],
    engine: Engine,
    rel: float = 1e-9,
    abs_: float = 1e-12,
    *,
    min_checked: int = 1,
) -> int:
    """Fail with a readable list unless every cached formula value holds; return the count.

    Also fails when fewer than ``min_checked`` formula cells were found, so a book
    without formulas cannot pass by accident.
    """
    mismatches = compare_to_cached(path, engine, rel=rel, abs_=abs_)
    if mismatches:
        raise AssertionError(f"{path}: {mismatches.report()}")
    if mismatches.checked < min_checked:
        raise AssertionError(
            f"{path}: only {mismatches.checked} formula cells found, expected >= {min_checked}"
        )
    return mismatches.checked
