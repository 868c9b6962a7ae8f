"""Finding the spreadsheet engine: the soffice launcher and a Python that can import uno.

Only looks; starting and talking to the engine is ``process.py``.
"""

from __future__ import annotations

import functools
import os
import shutil
import subprocess
from dataclasses import dataclass

__all__ = ["INSTALL_HINT", "EngineInfo", "find_engine"]

INSTALL_HINT = "apt-get install -y --no-install-recommends libreoffice-calc-nogui python3-uno"


@dataclass(frozen=True)
class EngineInfo:
    """Where the engine lives: the soffice launcher and a Python that can import uno."""

    soffice: str
    python: str


def _python_has_uno(python: str) -> bool:
    try:
        done = subprocess.run(
            [python, "-c", "import uno"],
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            timeout=60,
            check=False,
        )
    except (OSError, subprocess.TimeoutExpired):
        return False
    return done.returncode == 0


@functools.cache
def find_engine() -> EngineInfo | None:
    """Locate soffice and a system Python with UNO; None when either is missing.

    ``SHEETFIT_SOFFICE`` and ``SHEETFIT_UNO_PYTHON`` override the search.
    """
    soffice_candidates = [
        os.environ.get("SHEETFIT_SOFFICE"),
        shutil.which("soffice"),
        shutil.which("libreoffice"),
        "/usr/lib/libreoffice/program/soffice",
    ]
    soffice = next((c for c in soffice_candidates if c and os.access(c, os.X_OK)), None)
    if soffice is None:
        return None
    python_candidates = [
        os.environ.get("SHEETFIT_UNO_PYTHON"),
        "/usr/bin/python3",
        "/usr/lib/libreoffice/program/python",
    ]
    for python in python_candidates:
        if python and os.access(python, os.X_OK) and _python_has_uno(python):
            return EngineInfo(soffice=soffice, python=python)
    return None
