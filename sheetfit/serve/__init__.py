"""The local HTTP service (``sheetfit serve``): the refresh core, the inspection of a book and
the worksheet functions over HTTP on loopback, with a page for people at ``/``.

One job per module:

* ``config``  — ``ServeConfig``: token, body and time limits, workers, job bounds, clock;
* ``auth``    — the bearer token: made or read from ``SHEETFIT_TOKEN``, checked in
  constant time;
* ``limits``  — the request-size limit (413), enforced while the body streams in, and
  the upload written to a file as it arrives;
* ``tasks``   — what a worker process runs: refresh, inspect, a worksheet function;
* ``work``    — one worker process per request, its phases, its time limit (killed at
  the deadline), a bound on how many run at once;
* ``jobs``    — refresh jobs a page polls: bounded in number and lifetime, each in its
  own temporary folder;
* ``replies`` — the JSON shapes of every reply (pydantic models, so the OpenAPI schema
  describes them);
* ``api``     — the book, job, health and version routes; ``calls`` — one route per
  worksheet function; ``page`` — the page's files;
* ``app``     — ``create_app(config)`` puts them together; ``command`` is ``sheetfit serve``.
"""

from __future__ import annotations

from .app import create_app
from .config import ServeConfig

__all__ = ["ServeConfig", "create_app"]
