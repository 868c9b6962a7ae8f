"""The page at ``/`` and its two files, shipped inside the package (``page/``); no token.

The page loads nothing from elsewhere (its Content-Security-Policy allows this service
only), so it works offline. It asks for the token and sends it with each call it makes.
"""

from __future__ import annotations

from importlib import resources

from fastapi import APIRouter
from fastapi.responses import HTMLResponse, JSONResponse, Response

__all__ = ["PAGE_FILES", "page_routes"]

#: The page's files and their media types; nothing else is served from the folder.
PAGE_FILES = {"index.html": "text/html; charset=utf-8",
              "page.css": "text/css; charset=utf-8",
              "page.js": "text/javascript; charset=utf-8"}

_HEADERS = {
    "Content-Security-Policy": "default-src 'self'; img-src 'self' data:; "
                               "object-src 'none'; base-uri 'none'; frame-ancestors 'none'",
    "X-Content-Type-Options": "nosniff",
    "Cache-Control": "no-cache",
}


def _read(name: str) -> bytes:
    return resources.files("sheetfit.serve").joinpath("page", name).read_bytes()


def page_routes() -> APIRouter:
    router = APIRouter(include_in_schema=False)

    @router.get("/")
    async def index() -> Response:
        return HTMLResponse(_read("index.html"), headers=_HEADERS)

    @router.get("/page/{name}")
    async def page_file(name: str) -> Response:
        if name not in PAGE_FILES or name == "index.html":
            return JSONResponse({"status": "not_found", "message": "no such page file"}, 404)
        return Response(_read(name), media_type=PAGE_FILES[name], headers=_HEADERS)

    return router
