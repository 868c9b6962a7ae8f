"""What a running service is configured with; one frozen value, handed to every part."""

from __future__ import annotations

import datetime as dt
import os
from collections.abc import Callable
from dataclasses import dataclass, field

__all__ = ["DEFAULT_MAX_MB", "DEFAULT_TIME_LIMIT", "MB", "ServeConfig"]

#: One megabyte as the limits count it (decimal, as file managers show sizes).
MB = 1_000_000
#: Largest request body by default, in MB (a 20 MB book inflates to about 100 MB).
DEFAULT_MAX_MB = 200
#: Longest a request (or a refresh job) may work by default, in seconds.
DEFAULT_TIME_LIMIT = 300.0


def _cpus() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on every platform
        return max(1, os.cpu_count() or 1)


@dataclass(frozen=True)
class ServeConfig:
    """The service's settings.

    ``clock`` fixes the refresh time written on the index sheet (tests compare books byte
    for byte); ``None`` means the real time of each refresh. ``workers`` bounds how many
    worker processes run at once (requests beyond wait, within their time limit);
    ``max_jobs`` and ``job_ttl`` bound the refresh jobs kept for polling.
    """

    token: str
    max_bytes: int = DEFAULT_MAX_MB * MB
    time_limit: float = DEFAULT_TIME_LIMIT
    workers: int = field(default_factory=_cpus)
    max_jobs: int = 16
    job_ttl: float = 600.0
    clock: Callable[[], dt.datetime] | None = None

    def __post_init__(self) -> None:
        if not self.token:
            raise ValueError("the service needs a token")
        if self.max_bytes < 1 or self.time_limit <= 0 or self.workers < 1 or self.max_jobs < 1:
            raise ValueError("limits must be positive")
