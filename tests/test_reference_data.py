"""The reference data are the published files, unchanged (hashes in tests/reference/README.md)."""

from __future__ import annotations

import hashlib
import re

import pytest
from reference.strd import REFERENCE_DIR

_LISTED = re.findall(r"^([0-9a-f]{64})  (\S+)$",
                     (REFERENCE_DIR / "README.md").read_text(encoding="utf-8"), re.MULTILINE)


def test_every_reference_file_is_listed() -> None:
    """Each data file in the folder has a hash line, and each hash line a file."""
    on_disk = {p.relative_to(REFERENCE_DIR).as_posix()
               for p in REFERENCE_DIR.rglob("*") if p.suffix in (".dat", ".csv")}
    assert on_disk == {name for _, name in _LISTED}
    assert len(on_disk) == 12  # 11 StRD files and Anscombe's quartet


@pytest.mark.parametrize("digest,name", _LISTED, ids=[n for _, n in _LISTED])
def test_reference_file_has_its_published_bytes(digest: str, name: str) -> None:
    """A checkout that converted line ends or edited a value would change the hash."""
    assert hashlib.sha256((REFERENCE_DIR / name).read_bytes()).hexdigest() == digest
