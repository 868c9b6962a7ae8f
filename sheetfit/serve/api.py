"""Routes for books and jobs, health and version.

``POST /books/refresh`` and ``POST /books/inspect`` take the workbook as the request body
(the bytes of the .xlsx file) and its file name as ``?name=``; ``POST /jobs`` starts a
refresh that ``GET /jobs/{job}`` reports on and ``GET /jobs/{job}/book`` hands back.
Every piece of work runs in a worker process (``work.Workers``) in its own temporary
folder, removed when the reply has been sent (for a job: when the job is forgotten).
"""

from __future__ import annotations

import functools
import shutil
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import anyio
from fastapi import APIRouter, Depends, Query, Request, Response
from fastapi import Path as PathParam
from fastapi.responses import FileResponse, JSONResponse
from starlette.background import BackgroundTask

from .. import __version__
from .config import ServeConfig
from .jobs import FINISHED, Job, JobStore, StoreFull, workspace
from .limits import safe_name, save_body
from .replies import (
    XLSX,
    BookInspection,
    Fault,
    Health,
    JobStatus,
    Problem,
    Refusal,
    Version,
)
from .work import Outcome, Workers

__all__ = ["API_VERSION", "book_routes", "download_name", "open_routes"]

#: The version of this HTTP interface (``GET /version``); raised when a route changes.
API_VERSION = 1

_BINARY = {"type": "string", "format": "binary"}
_BOOK_BODY: dict[str, Any] = {"requestBody": {
    "required": True,
    "description": "the workbook: the bytes of the .xlsx file, as they are on disk",
    "content": {XLSX: {"schema": _BINARY}, "application/octet-stream": {"schema": _BINARY}},
}}
_NAME = Query("book.xlsx", max_length=255,
              description="the workbook's file name, used in refusals and for the download "
                          "(its last path part; unusual characters become _)")
_JOB = PathParam(max_length=64, description="the job's id, as POST /jobs gave it")

#: Replies every route that does work may give besides its own.
_WORK_REPLIES: dict[int | str, dict[str, Any]] = {
    400: {"model": Problem, "description": "the request is malformed (status invalid)"},
    401: {"model": Problem, "description": "no token, or the wrong one"},
    413: {"model": Problem, "description": "the request is larger than --max-mb"},
    500: {"model": Fault, "description": "an internal fault (the command line's exit 1)"},
    503: {"model": Problem, "description": "the service is stopping, or holds as many jobs "
                                           "as it may, all still at work (status busy)"},
    504: {"model": Problem, "description": "the work took longer than --time-limit "
                                           "(status timeout)"},
}
_REFUSED: dict[int | str, dict[str, Any]] = {422: {"model": Refusal, "description": "the book is refused (the command line's "
                                                   "exit 2): nothing was written"}}
_BOOK_REPLY: dict[int | str, dict[str, Any]] = {200: {"description": "the refreshed workbook",
                     "content": {XLSX: {"schema": _BINARY}}}}


def download_name(file: str) -> str:
    """The refreshed book's file name: ``costs.xlsx`` → ``costs-refreshed.xlsx``."""
    p = Path(file)
    return f"{p.stem}-refreshed{p.suffix or '.xlsx'}"


def _problem(code: int, status: str, message: str) -> JSONResponse:
    return JSONResponse(Problem(status=status, message=message).model_dump(), code)


def _timeout(limit: float) -> JSONResponse:
    return _problem(504, "timeout", f"the work took longer than the time limit of {limit:g} s "
                    "and was stopped; nothing was kept (start the service with a larger "
                    "--time-limit for bigger books)")


def failure(out: Outcome, limit: float) -> JSONResponse:
    """The reply for work that did not succeed."""
    if out.kind == "refused":
        return JSONResponse(out.payload, 422)
    if out.kind == "fault":
        return JSONResponse(Fault(message=f"internal fault ({out.payload}); nothing was "
                                  "written. Please report this with the file if you can.")
                            .model_dump(), 500)
    if out.kind == "timeout":
        return _timeout(limit)
    return _problem(503, "busy", "the service is stopping; the work was not finished")


def open_routes() -> APIRouter:
    """Health and version: no token needed."""
    router = APIRouter(tags=["service"])

    @router.get("/health", response_model=Health, summary="Is the service up?")
    async def health() -> Health:
        return Health()

    @router.get("/version", response_model=Version, summary="Versions of sheetfit and the API")
    async def version() -> Version:
        return Version(sheetfit=__version__, api=API_VERSION)

    return router


def book_routes(config: ServeConfig, workers: Workers, jobs: JobStore,
                guard: Callable[..., Any]) -> APIRouter:
    """The routes that take a workbook: refresh, inspect, and refresh jobs."""
    router = APIRouter(dependencies=[Depends(guard)])
    limit = config.time_limit

    def now() -> Any:
        return config.clock() if config.clock is not None else None

    async def receive(request: Request, folder: Path, file: str, deadline: float) -> None:
        (folder / "upload").mkdir(exist_ok=True)
        (folder / "result").mkdir(exist_ok=True)
        with anyio.fail_after(max(0.0, deadline - time.monotonic())):
            await save_body(request, folder / "upload" / file)

    async def run(task: str, args: dict[str, Any], deadline: float) -> Outcome:
        return await anyio.to_thread.run_sync(functools.partial(workers.run, task, args,
                                                                deadline))

    @router.post("/books/refresh", tags=["books"], response_class=Response,
                 summary="Refresh a workbook; the refreshed workbook comes back",
                 responses={**_BOOK_REPLY, **_REFUSED, **_WORK_REPLIES},
                 openapi_extra=_BOOK_BODY)
    async def refresh_book(request: Request, name: str = _NAME) -> Response:
        """Fit every declared model and write its result sheets, as `sheetfit refresh BOOK
        --out NEW` does; the reply is NEW. A refusal is JSON (422) with the command line's
        message; the refresh time on the index sheet is the time of the request."""
        file, folder = safe_name(name), workspace()
        deadline = time.monotonic() + limit
        try:
            await receive(request, folder, file, deadline)
            out = await run("refresh", {"src": file, "cwd": str(folder / "upload"),
                                        "out": str(folder / "result" / file), "now": now()},
                            deadline)
        except TimeoutError:
            shutil.rmtree(folder, ignore_errors=True)
            return _timeout(limit)
        except BaseException:
            shutil.rmtree(folder, ignore_errors=True)
            raise
        if out.kind != "done":
            shutil.rmtree(folder, ignore_errors=True)
            return failure(out, limit)
        return FileResponse(folder / "result" / file, media_type=XLSX,
                            filename=download_name(file),
                            background=BackgroundTask(shutil.rmtree, folder, True))

    @router.post("/books/inspect", tags=["books"], response_model=BookInspection,
                 summary="The declared models of a workbook, fitted, with nothing written",
                 responses={**_REFUSED, **_WORK_REPLIES}, openapi_extra=_BOOK_BODY)
    async def inspect_book(request: Request, name: str = _NAME) -> Any:
        """Each declared model with its method, settings, key figures and cautions: the
        numbers a refresh would write, from the same fit. A refusal is JSON (422)."""
        file, folder = safe_name(name), workspace()
        deadline = time.monotonic() + limit
        try:
            await receive(request, folder, file, deadline)
            out = await run("inspect", {"src": file, "cwd": str(folder / "upload"),
                                        "now": now()}, deadline)
        except TimeoutError:
            return _timeout(limit)
        finally:
            shutil.rmtree(folder, ignore_errors=True)
        return out.payload | {"status": "ok"} if out.kind == "done" else failure(out, limit)

    def status(job: Job) -> JobStatus:
        return JobStatus.model_validate({
            "job": job.id, "file": job.file, "state": job.state, "phase": job.phase,
            "outcome": job.result, "refusal": job.refusal, "message": _job_message(job),
            "expires_in": jobs.expires_in(job)})

    def _job_message(job: Job) -> str | None:
        if job.state == "fault":
            return f"internal fault ({job.message}); please report this with the file"
        if job.state == "timeout":
            return f"the refresh took longer than the time limit of {limit:g} s and was stopped"
        if job.state == "stopped":
            return "the refresh was stopped before it finished"
        return None

    def missing(job_id: str) -> JSONResponse:
        return _problem(404, "not_found", f"no job {job_id[:64]!r}: it never existed, or it "
                        f"finished more than {config.job_ttl:g} s ago and was forgotten")

    @router.post("/jobs", tags=["jobs"], status_code=202, response_model=JobStatus,
                 summary="Start refreshing a workbook; poll the job for its phase",
                 responses={404: {"model": Problem}, **_WORK_REPLIES},
                 openapi_extra=_BOOK_BODY)
    async def start_job(request: Request, name: str = _NAME) -> Any:
        """The refresh of `POST /books/refresh`, as a job: the reply (202) gives its id;
        `GET /jobs/{job}` says its state and phase, `GET /jobs/{job}/book` gives the
        refreshed book. The time limit counts from here."""
        try:
            job = jobs.reserve(safe_name(name))
        except StoreFull:
            return _problem(503, "busy", f"this service already holds {config.max_jobs} "
                            "jobs, all at work; try again when one has finished")
        deadline = time.monotonic() + limit
        try:
            with anyio.fail_after(max(0.0, deadline - time.monotonic())):
                await save_body(request, job.upload)
        except TimeoutError:
            jobs.drop(job.id)
            return _timeout(limit)
        except BaseException:
            jobs.drop(job.id)
            raise
        jobs.start(job, now())
        return JSONResponse(status(job).model_dump(), 202)

    @router.get("/jobs/{job}", tags=["jobs"], response_model=JobStatus,
                summary="Where a refresh job is", responses={404: {"model": Problem},
                                                             **_WORK_REPLIES})
    async def job_status(job: str = _JOB) -> Any:
        found = jobs.get(job)
        return missing(job) if found is None else status(found)

    @router.get("/jobs/{job}/book", tags=["jobs"], response_class=Response,
                summary="The book a finished refresh job wrote",
                responses={**_BOOK_REPLY, 404: {"model": Problem},
                           409: {"model": Problem, "description": "the job has not "
                                 "refreshed the book (yet): status not_ready"},
                           **_WORK_REPLIES})
    async def job_book(job: str = _JOB) -> Response:
        found = jobs.get(job)
        if found is None:
            return missing(job)
        if found.state != "refreshed" or not found.book.is_file():
            said = "is still at work" if found.state not in FINISHED else \
                f"ended {found.state}, without a book"
            return _problem(409, "not_ready", f"job {found.id} {said}")
        return FileResponse(found.book, media_type=XLSX, filename=download_name(found.file))

    @router.delete("/jobs/{job}", tags=["jobs"], status_code=204, response_class=Response,
                   summary="Forget a job (its work is stopped, its files removed)",
                   responses={404: {"model": Problem}, **_WORK_REPLIES})
    async def drop_job(job: str = _JOB) -> Response:
        return Response(status_code=204) if jobs.drop(job) else missing(job)

    return router
