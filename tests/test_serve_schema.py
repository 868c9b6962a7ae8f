"""A bounded property-based run against the served OpenAPI schema (schemathesis): every
operation, with the token, gets generated requests (positive and negative data), and none
may get a 5xx reply; each reply's status code, media type and body must be the ones the
schema documents."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path

import pytest
import schemathesis
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)
from serving import AUTH, serving

#: Generated requests per operation and mode: 15 operations keep the run to seconds.
EXAMPLES = 4
#: The operations, from the committed schema (test_serve.py keeps it equal to the served one).
_SCHEMA = json.loads((Path(__file__).resolve().parents[1] / "docs" / "openapi.json").read_text())
OPERATIONS = [(method.upper(), path) for path, ops in _SCHEMA["paths"].items() for method in ops]
CHECKS = [not_a_server_error, status_code_conformance, content_type_conformance,
          response_schema_conformance]


@pytest.fixture(scope="module")
def served() -> Iterator[tuple[str, schemathesis.BaseSchema]]:
    with serving(time_limit=20) as base:
        yield base, schemathesis.openapi.from_url(base + "/openapi.json", headers=AUTH,
                                                  timeout=30)


@pytest.mark.parametrize(("method", "path"), OPERATIONS)
def test_no_server_errors_and_replies_as_documented(
        served: tuple[str, schemathesis.BaseSchema], method: str, path: str) -> None:
    base, schema = served
    operation = schema[path][method]
    modes = st.sampled_from([schemathesis.GenerationMode.POSITIVE,
                             schemathesis.GenerationMode.NEGATIVE])
    cases = modes.flatmap(lambda mode: operation.as_strategy(generation_mode=mode))

    @given(case=cases)
    @settings(max_examples=EXAMPLES * 2, deadline=None, derandomize=True, database=None,
              suppress_health_check=list(HealthCheck))
    def check(case: schemathesis.Case) -> None:
        case.call_and_validate(base_url=base, headers=AUTH, timeout=30, checks=CHECKS)

    check()
