"""Refresh jobs that a page polls: each in its own temporary folder, bounded in number and age.

A job is made when its upload starts (``reserve``), runs in a thread that watches its
worker process (``start``), reports its phase as the refresh enters it, and ends as
refreshed, refused, fault, timeout or stopped. A finished job (and its folder, with the
refreshed book) is kept ``job_ttl`` seconds, then forgotten; at most ``max_jobs`` are
held: a new one pushes out the oldest finished one, and when every held job is still
at work the new one is turned away (the caller answers 503). Nothing else is shared.
"""

from __future__ import annotations

import datetime as dt
import secrets
import shutil
import tempfile
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .config import ServeConfig
from .work import Outcome, Workers

__all__ = ["FINISHED", "Job", "JobStore", "StoreFull"]

#: States in which a job's work is over.
FINISHED = ("refreshed", "refused", "fault", "timeout", "stopped")


class StoreFull(Exception):
    """Every job the service may hold is still at work."""


def workspace() -> Path:
    """A new private temporary folder for one request's files."""
    return Path(tempfile.mkdtemp(prefix="sheetfit-serve-"))


@dataclass
class Job:
    """One refresh job; ``state``, ``phase`` and the outcome are read by status requests."""

    id: str
    file: str
    folder: Path
    created: float = field(default_factory=time.monotonic)
    state: str = "receiving"
    phase: str | None = None
    finished: float | None = None
    result: dict[str, Any] | None = None
    refusal: dict[str, Any] | None = None
    message: str | None = None
    cancel: threading.Event = field(default_factory=threading.Event)
    dropped: bool = False

    @property
    def upload(self) -> Path:
        return self.folder / "upload" / self.file

    @property
    def book(self) -> Path:
        return self.folder / "result" / self.file


class JobStore:
    """The jobs of one running service."""

    def __init__(self, config: ServeConfig, workers: Workers) -> None:
        self._config = config
        self._workers = workers
        self._jobs: dict[str, Job] = {}
        self._lock = threading.Lock()

    def reserve(self, file: str) -> Job:
        """A new job in its own folder, before its upload is read; StoreFull if none fits."""
        with self._lock:
            self._sweep()
            if len(self._jobs) >= self._config.max_jobs:
                done = [j for j in self._jobs.values() if j.state in FINISHED]
                if not done:
                    raise StoreFull()
                self._forget(min(done, key=lambda j: j.finished or 0.0))
            job = Job(secrets.token_urlsafe(12), file, workspace())
            (job.folder / "upload").mkdir()
            (job.folder / "result").mkdir()
            self._jobs[job.id] = job
            return job

    def start(self, job: Job, now: dt.datetime | None) -> None:
        """Run the refresh of the uploaded book in a thread; its time limit starts now."""
        job.state = "waiting"
        deadline = time.monotonic() + self._config.time_limit
        threading.Thread(target=self._work, args=(job, deadline, now), daemon=True,
                         name=f"sheetfit job {job.id}").start()

    def _work(self, job: Job, deadline: float, now: dt.datetime | None) -> None:
        def on_phase(name: str) -> None:
            job.state, job.phase = "working", name

        try:
            out = self._workers.run(
                "refresh", {"src": job.file, "cwd": str(job.upload.parent),
                            "out": str(job.book), "now": now},
                deadline, on_phase=on_phase, cancelled=job.cancel.is_set)
        except Exception as exc:  # noqa: BLE001 - a job must always finish (and so expire)
            out = Outcome("fault", f"{type(exc).__name__}: {exc}")
        with self._lock:
            if out.kind == "done":
                job.result, job.state = out.payload, "refreshed"
            elif out.kind == "refused":
                job.refusal, job.state = out.payload, "refused"
            elif out.kind == "fault":
                job.message, job.state = out.payload, "fault"
            else:
                job.state = out.kind  # timeout or stopped
            job.finished = time.monotonic()
            if job.dropped:
                shutil.rmtree(job.folder, ignore_errors=True)

    def get(self, job_id: str) -> Job | None:
        with self._lock:
            self._sweep()
            return self._jobs.get(job_id)

    def expires_in(self, job: Job) -> float | None:
        """Seconds until a finished job is forgotten (None while it works)."""
        if job.finished is None:
            return None
        return max(0.0, job.finished + self._config.job_ttl - time.monotonic())

    def drop(self, job_id: str) -> bool:
        """Forget a job (stopping its work); False when there is no such job."""
        with self._lock:
            job = self._jobs.get(job_id)
            if job is None:
                return False
            self._forget(job)
            return True

    def close(self) -> None:
        """Stop all work and remove every job's folder (the service is stopping)."""
        with self._lock:
            for job in list(self._jobs.values()):
                self._forget(job)

    def _sweep(self) -> None:
        now = time.monotonic()
        for job in list(self._jobs.values()):
            if job.finished is not None and now - job.finished > self._config.job_ttl:
                self._forget(job)

    def _forget(self, job: Job) -> None:
        """Under the lock: drop the job; its folder goes now, or when its work has ended."""
        self._jobs.pop(job.id, None)
        job.dropped = True
        job.cancel.set()
        if job.state in FINISHED or job.state == "receiving":
            shutil.rmtree(job.folder, ignore_errors=True)
