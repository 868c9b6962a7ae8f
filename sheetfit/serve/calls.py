"""One route per worksheet function: ``POST /functions/<name>`` with the arguments as JSON.

The request body names the function's arguments as ``sheetfit.functions`` does
(``{"y": [[...]], "x": [[...]], "k": 3}``); ranges are 2-D arrays of cells (rows of
numbers, text, logicals or null for a blank), settings single cells. The reply's
``result`` is exactly what the function returns; a refusal (``[[code, message]]``) is
also given as ``error``. The request models are made from the functions' own signatures,
so a route cannot drift from its function.
"""

from __future__ import annotations

import functools
import inspect
import math
import time
from collections.abc import Callable
from typing import Any

import anyio
from fastapi import APIRouter, Depends
from fastapi.responses import JSONResponse
from pydantic import BaseModel, ConfigDict, Field, create_model

from .api import _WORK_REPLIES, failure
from .config import ServeConfig
from .replies import Cell, FunctionReply
from .tasks import FUNCTIONS
from .work import Workers

__all__ = ["function_routes", "request_model"]

#: The arguments that are ranges (2-D arrays of cells); every other argument is one cell.
RANGES = ("y", "x", "new_x", "centres", "rows")
_CODES = ("#VALUE!", "#N/A", "#NUM!")
Grid = list[list[Cell]]


def request_model(name: str, fn: Callable[..., Any]) -> type[BaseModel]:
    """The JSON body of ``fn``'s route: its parameters, required where they have no default."""
    fields: dict[str, Any] = {}
    for p in inspect.signature(fn).parameters.values():
        kind: Any = Grid if p.name in RANGES else Cell
        if p.default is inspect.Parameter.empty:
            fields[p.name] = (kind, Field(description="a range: rows of cells"
                                          if p.name in RANGES else "one cell"))
        else:
            fields[p.name] = (kind | None if p.name in RANGES else kind,
                              Field(default=p.default))
    model: type[BaseModel] = create_model(  # type: ignore[call-overload]
        "".join(w.title() for w in name.split("_")) + "Args",
        __config__=ConfigDict(extra="forbid"), **fields)
    return model


def _finite(grid: list[list[Any]]) -> list[list[Any]]:
    """JSON has no NaN or infinity: such a number (never expected) is sent as a blank."""
    return [[None if isinstance(v, float) and not math.isfinite(v) else v for v in row]
            for row in grid]


def _error(grid: list[list[Any]]) -> dict[str, str] | None:
    if len(grid) == 1 and len(grid[0]) == 2 and grid[0][0] in _CODES:
        return {"code": grid[0][0], "message": str(grid[0][1])}
    return None


def function_routes(config: ServeConfig, workers: Workers,
                    guard: Callable[..., Any]) -> APIRouter:
    router = APIRouter(prefix="/functions", tags=["functions"], dependencies=[Depends(guard)])
    for name, fn in FUNCTIONS.items():
        _add(router, name, fn, config, workers)
    return router


def _add(router: APIRouter, name: str, fn: Callable[..., Any], config: ServeConfig,
         workers: Workers) -> None:
    Args = request_model(name, fn)
    doc = inspect.getdoc(fn) or name

    async def call(args: Args) -> Any:  # type: ignore[valid-type]
        deadline = time.monotonic() + config.time_limit
        out = await anyio.to_thread.run_sync(functools.partial(
            workers.run, "function",
            {"name": name, "args": args.model_dump()},  # type: ignore[attr-defined]
            deadline))
        if out.kind != "done":
            return failure(out, config.time_limit)
        grid = _finite(out.payload)
        return JSONResponse(FunctionReply.model_validate(
            {"function": name, "result": grid, "error": _error(grid)}).model_dump())

    # the body's model is made at run time: give it to FastAPI as the parameter's type
    call.__signature__ = inspect.Signature(  # type: ignore[attr-defined]
        [inspect.Parameter("args", inspect.Parameter.POSITIONAL_OR_KEYWORD, annotation=Args)])
    router.add_api_route(f"/{name}", call, methods=["POST"], response_model=FunctionReply,
                         summary=doc.splitlines()[0], description=doc,
                         responses=_WORK_REPLIES, name=name)
