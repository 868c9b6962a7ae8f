"""The request-size limit, enforced while the body arrives, and uploads written as they stream.

:class:`BodyLimit` is ASGI middleware: a request whose ``Content-Length`` exceeds the limit
is answered 413 before any of its body is read; a body without one (chunked) is counted
as it streams in, and the chunk that crosses the limit raises :class:`TooLarge`, which
the app answers 413. So no request ever holds more than the limit in memory or on disk.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

from starlette.requests import Request
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from .config import MB

__all__ = ["BodyLimit", "TooLarge", "safe_name", "save_body", "too_large_message"]


class TooLarge(Exception):
    """The request body went past the limit while it was being read."""


def too_large_message(limit: int) -> str:
    return (f"the request is larger than this service accepts ({limit / MB:g} MB); start it "
            "with a larger --max-mb to send bigger books")


class BodyLimit:
    """ASGI middleware: refuse bodies above ``max_bytes`` (413) without reading past it."""

    def __init__(self, app: ASGIApp, max_bytes: int) -> None:
        self.app = app
        self.max_bytes = max_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        declared = dict(scope.get("headers") or []).get(b"content-length")
        if declared is not None and declared.strip().isdigit() and \
                int(declared) > self.max_bytes:
            await _send_413(send, self.max_bytes)
            return
        seen = 0

        async def counted() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_bytes:
                    raise TooLarge(too_large_message(self.max_bytes))
            return message

        await self.app(scope, counted, send)


async def _send_413(send: Send, limit: int) -> None:
    body = json.dumps({"status": "too_large", "message": too_large_message(limit)}).encode()
    await send({"type": "http.response.start", "status": 413,
                "headers": [(b"content-type", b"application/json"),
                            (b"content-length", str(len(body)).encode()),
                            (b"connection", b"close")]})
    await send({"type": "http.response.body", "body": body})


async def save_body(request: Request, path: Path) -> int:
    """Write the request body to ``path`` as it streams in; returns its size in bytes."""
    size = 0
    with path.open("wb") as f:
        async for chunk in request.stream():
            f.write(chunk)
            size += len(chunk)
    return size


_UNSAFE = re.compile(r"[^\w .,()+\-]", re.ASCII)


def safe_name(name: Any, default: str = "book.xlsx") -> str:
    """A file name to keep an upload under: its last path part, plain characters only.

    The name appears in refusals (as the command line names the file it was given), so
    ``costs.xlsx`` stays ``costs.xlsx``; separators, control and unusual characters become
    ``_``, leading dots go, and the name is cut to 120 characters.
    """
    text = str(name or "").replace("\\", "/").rsplit("/", 1)[-1]
    text = _UNSAFE.sub("_", text).strip().lstrip(".").strip()
    return text[:120] or default
