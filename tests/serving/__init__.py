"""Test helper: the service on a real uvicorn, on a loopback port the test learns first."""

from __future__ import annotations

import datetime as dt
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import uvicorn

from sheetfit.serve import ServeConfig, create_app
from sheetfit.serve.command import listen

#: The refresh time every test service writes, so books compare byte for byte.
NOW = dt.datetime(2026, 3, 31, 18, 0, tzinfo=dt.UTC)
TOKEN = "test-token-0123456789abcdef"
AUTH = {"Authorization": f"Bearer {TOKEN}"}


@contextmanager
def serving(**options: Any) -> Iterator[str]:
    """Run ``create_app`` on uvicorn in a thread (port chosen by the system); yield its URL.

    The clock is fixed at ``NOW``; ``options`` override other ``ServeConfig`` fields.
    """
    config = ServeConfig(**({"token": TOKEN, "clock": lambda: NOW} | options))
    sock = listen("127.0.0.1", 0)
    port = sock.getsockname()[1]
    server = uvicorn.Server(uvicorn.Config(create_app(config), log_level="warning",
                                           access_log=False))
    thread = threading.Thread(target=server.run, kwargs={"sockets": [sock]}, daemon=True)
    thread.start()
    deadline = time.monotonic() + 20
    while not server.started:
        if time.monotonic() > deadline or not thread.is_alive():
            raise RuntimeError("the test service did not start within 20 s")
        time.sleep(0.02)
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        server.should_exit = True
        thread.join(20)
        sock.close()
