"""Session fixtures shared by the whole test suite: the recalculation engine."""

from __future__ import annotations

import os
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import NoReturn

import pytest
from hypothesis import settings

# Property tests draw the same examples on every run (seeded, as all test randomness
# here is), and keep no example database between runs.
settings.register_profile("sheetfit", derandomize=True, database=None)
settings.load_profile("sheetfit")

# The engine helper lives in tests/engine; make it importable as ``engine`` whatever
# pytest's import mode is.
_TESTS = Path(__file__).resolve().parent
if str(_TESTS) not in sys.path:
    sys.path.insert(0, str(_TESTS))

from engine.locate import INSTALL_HINT, find_engine
from engine.process import Engine


def _unavailable(message: str) -> NoReturn:
    """Fail in CI (where the dependency must be installed), skip elsewhere."""
    if os.environ.get("CI") == "true":
        pytest.fail(message, pytrace=False)
    pytest.skip(message)


@pytest.fixture(scope="session")
def engine() -> Iterator[Engine]:
    """One headless LibreOffice (with its UNO worker) for the whole session."""
    info = find_engine()
    if info is None:
        _unavailable(f"LibreOffice Calc is required in CI: {INSTALL_HINT}")
    with Engine(info) as running:
        yield running


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    """Mark every test that uses the engine fixture with ``engine``."""
    for item in items:
        if "engine" in getattr(item, "fixturenames", ()):
            item.add_marker(pytest.mark.engine)
