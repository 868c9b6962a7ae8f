"""``sheetfit serve [--host H] [--port N] [--max-mb M] [--time-limit S]``: run the service.

Binds 127.0.0.1 by default (``--port 0`` takes a free port); prints the address and the
token once on stdout, then serves until SIGINT (Ctrl-C) or SIGTERM, which end it with
exit status 130 or 143 after the work under way has been stopped and every temporary
folder removed.
"""

from __future__ import annotations

import ipaddress
import socket
import sys

from ..stopping import Stopped, stop_signals
from .auth import ENV, token_from_env
from .config import MB, ServeConfig

__all__ = ["command", "listen"]


def listen(host: str, port: int) -> socket.socket:
    """A listening socket on host:port (port 0: a free one); OSError when it cannot be had."""
    family = socket.AF_INET6 if ":" in host else socket.AF_INET
    sock = socket.socket(family, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    try:
        sock.bind((host, port))
        sock.listen(128)
    except OSError:
        sock.close()
        raise
    sock.set_inheritable(True)
    return sock


def _loopback(host: str) -> bool:
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return host == "localhost"


def command(host: str, port: int, max_mb: float, time_limit: float) -> int:
    """Serve until stopped; the exit status (2 when the address or token cannot be used)."""
    try:
        token, generated = token_from_env()
    except ValueError as exc:
        print(f"sheetfit: refused: {exc}", file=sys.stderr)
        return 2
    try:
        sock = listen(host, port)
    except OSError as exc:
        print(f"sheetfit: refused: cannot listen on {host}:{port} ({exc.strerror or exc}) — "
              "choose another --port, or --port 0 for a free one", file=sys.stderr)
        return 2
    import uvicorn  # only now: a refusal above need not wait for the web stack to load

    from .app import create_app

    bound = sock.getsockname()[1]
    where = f"[{host}]" if ":" in host else host
    config = ServeConfig(token=token, max_bytes=int(max_mb * MB), time_limit=time_limit)
    print(f"sheetfit serve: http://{where}:{bound}/ (requests up to {max_mb:g} MB, "
          f"{time_limit:g} s each; stop with Ctrl-C)")
    print(f"token: {token}" if generated else f"token: the value of {ENV}")
    if not _loopback(host):
        print(f"sheetfit serve: listening on {host}, not only this machine: anyone who can "
              "reach it and has the token can send books", file=sys.stderr)
    sys.stdout.flush()
    server = uvicorn.Server(uvicorn.Config(create_app(config), log_level="warning",
                                           access_log=False, timeout_graceful_shutdown=5))
    try:
        with stop_signals():
            server.run(sockets=[sock])
    except (Stopped, KeyboardInterrupt) as exc:
        return 128 + (exc.signum if isinstance(exc, Stopped) else 2)
    finally:
        sock.close()
    return 0
