"""The JSON shapes of the service's replies, as pydantic models (the OpenAPI schema's source).

Every reply that is not a workbook is an object with a ``status`` word: ``ok``,
``refused`` (exit 2 on the command line: the input cannot be used as it is),
``fault`` (exit 1: an internal fault), ``timeout``, ``too_large``, ``unauthorised``,
``invalid`` (the request itself is malformed), ``busy``, ``not_found``, ``not_ready``.
"""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, Field

__all__ = [
    "XLSX",
    "BookInspection",
    "Cell",
    "FunctionReply",
    "Health",
    "JobStatus",
    "ModelFigures",
    "ModelInspection",
    "Problem",
    "Refreshed",
    "Refusal",
    "SettingShown",
    "Version",
]

#: The media type of an .xlsx workbook.
XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"

#: One cell as a host passes it: a number, text, a logical, or blank (null).
Cell = int | float | str | bool | None


class Problem(BaseModel):
    """A request the service cannot serve: why, in plain words."""

    status: str = Field(description="timeout, too_large, unauthorised, invalid, busy, "
                                    "not_found or not_ready")
    message: str


class Refusal(BaseModel):
    """The book cannot be used as it is (the command line's exit status 2, nothing written)."""

    status: Literal["refused"] = "refused"
    exit: Literal[2] = 2
    message: str = Field(description="what is wrong")
    hint: str | None = Field(description="what to do about it")
    file: str | None
    name: str | None = Field(description="the defined name concerned")
    sheet: str | None
    cell: str | None = Field(description="the cell or range concerned")
    line: str = Field(description="the one line `sheetfit refresh` prints after "
                                  "'sheetfit: refused: '")


class Fault(BaseModel):
    """An internal fault (the command line's exit status 1): please report it."""

    status: Literal["fault"] = "fault"
    exit: Literal[1] = 1
    message: str


class Health(BaseModel):
    status: Literal["ok"] = "ok"


class Version(BaseModel):
    status: Literal["ok"] = "ok"
    sheetfit: str = Field(description="the version of sheetfit serving")
    api: int = Field(description="the version of this HTTP interface")


class ModelFigures(BaseModel):
    """One model after a fit: what the index sheet says about it."""

    model: str
    method: str
    title: str
    response: str
    attributes: list[str]
    rows_used: int
    rows_left_out: int
    new_rows: int
    fingerprint: str = Field(description="short SHA-256 of the values and settings fitted")
    figures: list[str] = Field(description="key figures, as the command line prints them")
    cautions: list[str]
    status: str


class SettingShown(BaseModel):
    name: str
    value: Any = Field(description="the value in force (null: chosen by the method)")
    given: bool = Field(description="set in the book (true) or the default (false)")
    meaning: str


class ModelInspection(ModelFigures):
    settings: list[SettingShown]


class BookInspection(BaseModel):
    status: Literal["ok"] = "ok"
    file: str
    models: list[ModelInspection]


class Refreshed(BaseModel):
    file: str
    refreshed: str = Field(description="the refresh time written on the index sheet")
    models: list[ModelFigures]


class JobStatus(BaseModel):
    """Where a refresh job is; poll until ``state`` is one of the finished states."""

    status: Literal["ok"] = "ok"
    job: str
    file: str
    state: Literal["receiving", "waiting", "working", "refreshed", "refused", "fault",
                   "timeout", "stopped"]
    phase: Literal["read", "fit", "write", "graft"] | None = Field(
        description="the phase under way (the last one reached, once finished)")
    phases: list[str] = ["read", "fit", "write", "graft"]
    outcome: Refreshed | None = Field(description="when refreshed: the models")
    refusal: Refusal | None
    message: str | None = Field(description="for a fault, timeout or stop: what happened")
    expires_in: float | None = Field(description="seconds until a finished job is forgotten")


class FunctionError(BaseModel):
    code: Literal["#VALUE!", "#N/A", "#NUM!"]
    message: str


class FunctionReply(BaseModel):
    """A worksheet function's result: ``result`` is exactly what ``sheetfit.functions``
    returns (a header row, then rows; a refusal is one row ``[code, message]``)."""

    status: Literal["ok"] = "ok"
    function: str
    result: list[list[Cell]]
    error: FunctionError | None = Field(description="the refusal, when result is one")
