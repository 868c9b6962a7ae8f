"""Mutation fuzz over the example books' zip members and XML bytes: refused or refreshed, never a fault.

Each case takes one example book, mutates one member (flip, insert, delete or truncate
bytes; drop the member; add a copy under a name differing only in case; swap two
members' contents) and runs ``sheetfit refresh BOOK --out OUT`` in-process. Every case
must end in exit 0 (refreshed) or 2 (refused with one line), never exit 1 (internal fault)
and never an exception. The normal run draws 500 cases (derandomized, so the same 500
every run); set ``SHEETFIT_FUZZ_CASES`` for a longer run (DEVELOPERS.md).
"""

from __future__ import annotations

import contextlib
import io
import os
import tempfile
import zipfile
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sheetfit.cli import main

BOOKS = sorted((Path(__file__).resolve().parents[1] / "example_books").glob("*.xlsx"))
CASES = int(os.environ.get("SHEETFIT_FUZZ_CASES", "500"))
_NASTY = [b"<", b">", b"&", b'"', b"\x00", b"<x>", b"]]>", b"&amp;", b"\xff\xfe",
          b"<!DOCTYPE a [<!ENTITY b 'c'>]>", b"&b;", b"</worksheet>", b"\xc3"]


def _members(path: Path) -> list[tuple[str, bytes]]:
    with zipfile.ZipFile(path) as z:
        return [(i.filename, z.read(i)) for i in z.infolist()]


MEMBERS = {p.name: _members(p) for p in BOOKS}


@st.composite
def mutated(draw: st.DrawFn) -> tuple[str, list[tuple[str, bytes]]]:
    book = draw(st.sampled_from(sorted(MEMBERS)))
    members = list(MEMBERS[book])
    i = draw(st.integers(0, len(members) - 1))
    name, data = members[i]
    kind = draw(st.sampled_from(["flip", "insert", "delete", "truncate", "drop", "case",
                                 "swap"]))
    buf = bytearray(data)
    at = draw(st.integers(0, max(len(buf) - 1, 0)))
    if kind == "flip" and buf:
        for _ in range(draw(st.integers(1, 4))):
            buf[draw(st.integers(0, len(buf) - 1))] = draw(st.integers(0, 255))
    elif kind == "insert":
        buf[at:at] = draw(st.sampled_from(_NASTY) | st.binary(min_size=1, max_size=8))
    elif kind == "delete":
        del buf[at:at + draw(st.integers(1, 40))]
    elif kind == "truncate":
        del buf[at:]
    members[i] = (name, bytes(buf))
    if kind == "drop":
        del members[i]
    elif kind == "case":
        other = name.upper() if name != name.upper() else name.lower()
        members.append((other, data))
    elif kind == "swap":
        j = draw(st.integers(0, len(members) - 1))
        members[i], members[j] = (name, members[j][1]), (members[j][0], data)
    return f"{book}:{kind}:{name}", members


@settings(max_examples=CASES, deadline=None, suppress_health_check=list(HealthCheck))
@given(case=mutated())
def test_mutated_books_are_refreshed_or_refused(case: tuple[str, list[tuple[str, bytes]]]):
    label, members = case
    with tempfile.TemporaryDirectory() as tmp:
        book, out = Path(tmp) / "book.xlsx", Path(tmp) / "out.xlsx"
        with zipfile.ZipFile(book, "w", zipfile.ZIP_DEFLATED) as z:
            for name, data in members:
                z.writestr(name, data)
        before = book.read_bytes()
        err = io.StringIO()
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
            code = main(["refresh", str(book), "--out", str(out)])
        message = err.getvalue()
        assert code in (0, 2), f"{label}: exit {code}: {message}"
        assert "Traceback" not in message
        assert book.read_bytes() == before, f"{label}: the input changed"
        if code == 2:
            assert message.count("\n") == 1 and message.startswith("sheetfit: refused:"), \
                f"{label}: {message!r}"
