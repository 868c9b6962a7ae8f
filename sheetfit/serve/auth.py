"""The bearer token: made at start (or read from ``SHEETFIT_TOKEN``) and checked on each call.

Every route but health, version and the page's own files depends on :func:`guard`. The
comparison is ``hmac.compare_digest``, so the time it takes does not tell how much of a
guess was right.
"""

from __future__ import annotations

import hmac
import os
import secrets
from collections.abc import Callable, Coroutine
from typing import Any

from fastapi import Depends, HTTPException
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer

__all__ = ["ENV", "MIN_LENGTH", "guard", "token_from_env"]

#: The environment variable a fixed token is read from.
ENV = "SHEETFIT_TOKEN"
#: Shortest token accepted from the environment (a generated one has 43 characters).
MIN_LENGTH = 16

_bearer = HTTPBearer(auto_error=False, description="the token `sheetfit serve` printed at "
                     "start, or the value of SHEETFIT_TOKEN")


def token_from_env() -> tuple[str, bool]:
    """The token and whether it was generated (``False``: it came from ``SHEETFIT_TOKEN``).

    Raises ValueError for a token in the environment that is too short to be a secret.
    """
    given = os.environ.get(ENV)
    if given is None:
        return secrets.token_urlsafe(32), True
    if len(given.strip()) < MIN_LENGTH:
        raise ValueError(f"{ENV} must hold at least {MIN_LENGTH} characters (it holds "
                         f"{len(given.strip())}); unset it to have a token generated")
    return given.strip(), False


class Unauthorised(HTTPException):
    """No token, or the wrong one: 401 with a ``WWW-Authenticate: Bearer`` header."""

    def __init__(self, message: str) -> None:
        super().__init__(401, message, headers={"WWW-Authenticate": "Bearer"})


def guard(token: str) -> Callable[..., Coroutine[Any, Any, None]]:
    """The dependency that lets a request through only with ``Authorization: Bearer TOKEN``."""
    expected = token.encode()

    async def check(
        credentials: HTTPAuthorizationCredentials | None = Depends(_bearer),  # noqa: B008
    ) -> None:
        if credentials is None:
            raise Unauthorised("this call needs the token: send the header "
                               "'Authorization: Bearer TOKEN'")
        if not hmac.compare_digest(credentials.credentials.encode(), expected):
            raise Unauthorised("the token is not the one this service was started with")

    return check
