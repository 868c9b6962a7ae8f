"""``create_app(config)``: the service's routes, limits and error replies put together.

Every error reply is JSON with a ``status`` word (``replies``): the validation errors
FastAPI would send as 422 are ``invalid`` (400), so 422 means one thing only, a refused
book. The OpenAPI schema says so (``openapi``), and is served at ``/openapi.json`` (with
the token); ``docs/openapi.json`` is its committed copy (``scripts/write_openapi.py``).
"""

from __future__ import annotations

import threading
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from typing import Any

from fastapi import Depends, FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.openapi.utils import get_openapi
from fastapi.responses import JSONResponse
from starlette.exceptions import HTTPException

from .. import __version__
from .api import book_routes, open_routes
from .auth import guard
from .calls import function_routes
from .config import ServeConfig
from .jobs import JobStore
from .limits import BodyLimit, TooLarge
from .page import page_routes
from .replies import Fault, Problem
from .work import Workers

__all__ = ["create_app"]

_STATUS_WORDS = {400: "invalid", 401: "unauthorised", 404: "not_found", 405: "invalid",
                 413: "too_large", 503: "busy"}

DESCRIPTION = """\
sheetfit's local service: refresh a workbook, inspect its declared models, call the
worksheet functions. Every route but /health, /version and the page needs the header
`Authorization: Bearer TOKEN` (the token `sheetfit serve` printed, or SHEETFIT_TOKEN).
A refused book is 422 with the command line's message; an internal fault is 500.
"""


def _problem(code: int, message: str) -> JSONResponse:
    status = _STATUS_WORDS.get(code, "invalid" if code < 500 else "busy")
    return JSONResponse(Problem(status=status, message=message).model_dump(), code,
                        headers={"WWW-Authenticate": "Bearer"} if code == 401 else None)


def _explain(exc: RequestValidationError) -> str:
    parts = []
    for e in exc.errors()[:5]:
        where = ".".join(str(p) for p in e.get("loc", ()) if p != "body")
        parts.append(f"{where or 'the body'}: {e.get('msg', 'not valid')}")
    return "the request is not what this route takes (" + "; ".join(parts) + ")"


def create_app(config: ServeConfig) -> FastAPI:
    """The service as an ASGI app; ``config`` holds its token, limits and (in tests) clock."""
    workers = Workers(config.workers)
    jobs = JobStore(config, workers)

    @asynccontextmanager
    async def lifespan(_app: FastAPI) -> AsyncIterator[None]:
        threading.Thread(target=workers.warm, daemon=True, name="sheetfit warm-up").start()
        yield
        workers.close()  # work under way stops; job folders go
        jobs.close()

    app = FastAPI(title="sheetfit local service", version=__version__, description=DESCRIPTION,
                  openapi_url=None, docs_url=None, redoc_url=None, lifespan=lifespan)
    check = guard(config.token)
    app.include_router(open_routes())
    app.include_router(book_routes(config, workers, jobs, check))
    app.include_router(function_routes(config, workers, check))
    app.include_router(page_routes())
    app.add_middleware(BodyLimit, max_bytes=config.max_bytes)

    @app.exception_handler(TooLarge)
    async def too_large(_request: Request, exc: TooLarge) -> JSONResponse:
        return _problem(413, str(exc))

    @app.exception_handler(RequestValidationError)
    async def invalid(_request: Request, exc: RequestValidationError) -> JSONResponse:
        return _problem(400, _explain(exc))

    @app.exception_handler(HTTPException)
    async def http_problem(_request: Request, exc: HTTPException) -> JSONResponse:
        return _problem(exc.status_code, str(exc.detail))

    @app.exception_handler(Exception)
    async def fault(_request: Request, exc: Exception) -> JSONResponse:
        return JSONResponse(Fault(message=f"internal fault ({type(exc).__name__}); please "
                                  "report this").model_dump(), 500)

    @app.get("/openapi.json", include_in_schema=False, dependencies=[Depends(check)])
    async def schema() -> JSONResponse:
        return JSONResponse(app.openapi())

    app.openapi = lambda: openapi(app)  # type: ignore[method-assign]
    return app


def openapi(app: FastAPI) -> dict[str, Any]:
    """The schema, with FastAPI's 422 validation replies given as our 400 ``invalid``."""
    if app.openapi_schema is None:
        schema = get_openapi(title=app.title, version=app.version,
                             description=app.description, routes=app.routes)
        for path in schema.get("paths", {}).values():
            for op in path.values():
                replies = op.get("responses", {})
                gone = replies.get("422", {})
                if "HTTPValidationError" in str(gone):
                    del replies["422"]
        comps = schema.get("components", {}).get("schemas", {})
        for unused in ("HTTPValidationError", "ValidationError"):
            comps.pop(unused, None)
        app.openapi_schema = schema
    return app.openapi_schema
