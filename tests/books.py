"""Test helpers: small user workbooks built with xlsxwriter (an independent writer), invented
demo data, and what a graft changed, read from the packages themselves."""

from __future__ import annotations

import datetime as dt
import math
import multiprocessing
import os
import zipfile
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import xlsxwriter

from sheetfit.batch.outcome import Outcome, refresh_one
from sheetfit.reader.package import open_package

Row = Sequence[Any]


def make_book(
    path: Path,
    sheets: Mapping[str, Sequence[Row]],
    names: Mapping[str, str] | None = None,
    local_names: Mapping[tuple[str, str], str] | None = None,
    errors: Mapping[tuple[str, str], str] | None = None,
) -> Path:
    """Write a book: sheets as rows from A1 (None = blank), workbook- and sheet-scoped names.

    ``errors`` maps (sheet, cell) to an error formula such as "=1/0"; its cached value is
    the matching error text.
    """
    wb = xlsxwriter.Workbook(str(path))
    wb.set_properties({"created": dt.datetime(2026, 1, 1)})
    for title, rows in sheets.items():
        ws = wb.add_worksheet(title)
        for r, row in enumerate(rows):
            for c, v in enumerate(row):
                if v is None:
                    continue
                if isinstance(v, bool):
                    ws.write_boolean(r, c, v)
                elif isinstance(v, (int, float)):
                    ws.write_number(r, c, v)
                else:
                    ws.write_string(r, c, str(v))
    for (title, cell), formula in (errors or {}).items():
        cached = {"=1/0": "#DIV/0!", "=NA()": "#N/A"}.get(formula, "#VALUE!")
        wb.get_worksheet_by_name(title).write_formula(cell, formula, None, cached)
    for name, ref in (names or {}).items():
        wb.define_name(name, ref if ref.startswith("=") else "=" + ref)
    for (title, name), ref in (local_names or {}).items():
        sheet = title if "'" in title or " " not in title else f"'{title}'"
        wb.define_name(f"{sheet}!{name}", ref if ref.startswith("=") else "=" + ref)
    wb.close()
    return path


def line_rows(n: int = 8, header: Sequence[str] = ("cost", "units")) -> list[list[Any]]:
    """A header row and n rows of an exact-ish straight line with a little wobble."""
    rows: list[list[Any]] = [list(header)]
    for i in range(n):
        x = 10.0 + 3 * i
        rows.append([100.0 + 2.5 * x + (1.5 if i % 2 else -1.0), x])
    return rows


def jobs(n: int = 30, seed: int = 7) -> list[list[Any]]:
    """Invented past field jobs (seeded): cost from crew hours and distance driven."""
    import numpy as np

    rng = np.random.default_rng(seed)
    rows: list[list[Any]] = [["cost", "hours", "km"]]
    for _ in range(n):
        h, d = float(rng.integers(2, 40)), float(rng.integers(1, 90))
        rows.append([round(120 + 35 * h + 2.2 * d + float(rng.normal(0, 40)), 2), h, d])
    return rows


def invoices(n: int = 40, seed: int = 11, numeric: bool = False) -> list[list[Any]]:
    """Invented paid invoices (seeded): late or on time, from amount and past delay.

    With ``numeric`` the outcome is a class code 0, 1 or 2 instead.
    """
    import numpy as np

    rng = np.random.default_rng(seed)
    rows: list[list[Any]] = [["outcome", "amount", "past delay"]]
    for _ in range(n):
        amount, delay = float(rng.integers(1, 50)) * 100, float(rng.integers(0, 30))
        if numeric:
            rows.append([float(rng.integers(0, 3)), amount, delay])
        else:
            late = delay + rng.normal(0, 6) > 14
            rows.append(["late" if late else "on time", amount, delay])
    return rows


def soffice_convert(src: Path, outdir: Path, fmt: str = "xlsx") -> Path:
    """Convert (re-save) ``src`` with LibreOffice on a private profile; return the output.

    Skips when LibreOffice is missing, and fails instead under CI=true. The exit code of
    a conversion says nothing (docs/engine-facts.md, E4), so the output file is what is checked.
    """
    import os
    import shutil
    import subprocess
    import tempfile

    import pytest

    exe = shutil.which("soffice")
    if exe is None:
        if os.environ.get("CI") == "true":
            pytest.fail("soffice is not installed", pytrace=False)
        pytest.skip("soffice is not installed")
    outdir.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as profile:
        subprocess.run(
            [exe, "--headless", f"-env:UserInstallation=file://{profile}",
             "--convert-to", fmt, "--outdir", str(outdir), str(src)],
            capture_output=True, timeout=240, check=False,
        )
    ext = fmt.split(":")[0]
    outs = sorted(outdir.glob(f"{src.stem}*.{ext}"))
    assert outs, f"LibreOffice wrote no {src.stem}.{ext}"
    return outs[0]


# --- what a graft changed, read from the source and output packages themselves --------


def entries(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as z:
        return {n: z.read(n) for n in z.namelist()}


def part_changes(src: Path, out: Path) -> tuple[set[str], set[str]]:
    """(removed, added) zip entry names of a graft, read from the source and output packages.

    Removed: entries of the source the output lacks; added: entries of the output the source
    lacks. A sheet part of both whose bytes differ (a new sheet reusing a freed number) counts
    as both removed and added.
    """
    a, b = entries(src), entries(out)
    sheet_parts = {s.part.lower() for p in (src, out) for s in open_package(p).sheets}
    reused = {n for n in a.keys() & b.keys() if n.lower() in sheet_parts and a[n] != b[n]}
    return (a.keys() - b.keys()) | reused, (b.keys() - a.keys()) | reused


def sheet_changes(src: Path, out: Path) -> tuple[list[str], list[str]]:
    """(removed, added) sheet titles of a graft, read from the source and output packages.

    A source sheet is kept when the output has a sheet of the same title in the same part with
    the same bytes; every other source sheet was removed and every other output sheet added.
    """

    def sheets(path: Path) -> list[tuple[str, str, bytes]]:
        data = {n.lower(): d for n, d in entries(path).items()}
        return [(s.name, s.part.lower(), data[s.part.lower()]) for s in open_package(path).sheets]

    old, new = sheets(src), sheets(out)
    return [s[0] for s in old if s not in new], [s[0] for s in new if s not in old]


# --- a refresh that ends its own worker process (the batch tests' dying worker) -----------
# Importable by the batch's worker processes: on the book named DIES it calls os._exit, but
# only in a child process, so the same run in one process refreshes that book as usual.

DIES = "dies.xlsx"


def die_in_child(book: str | Path, **options: Any) -> Outcome:
    if Path(book).name == DIES and multiprocessing.parent_process() is not None:
        os._exit(70)
    return refresh_one(book, **options)


#: The three value readers (``reader/values.py``), in the order a refresh tries them.
READERS = ("columnar", "fast", "stream")


def only_reader(monkeypatch: Any, which: str) -> None:
    """Make ``BookValues`` read every sheet with one reader: our column reader, the fast
    reader (python-calamine) or the streaming parse (each earlier one switched off)."""
    from sheetfit.reader.values import BookValues

    if which in ("fast", "stream"):
        monkeypatch.setattr(BookValues, "_columnar", lambda self, member: None)
    if which == "stream":
        monkeypatch.setattr(BookValues, "_fast", lambda self, name: None)


def every_kind_book(path: Path) -> Path:
    """Numbers, shared and rich strings, booleans, errors, dates, formulas with results."""
    wb = xlsxwriter.Workbook(str(path))
    wb.set_properties({"created": dt.datetime(2026, 1, 1)})
    ws = wb.add_worksheet("Data")
    bold, date = wb.add_format({"bold": True}), wb.add_format({"num_format": "yyyy-mm-dd hh:mm"})
    ws.write_number("A1", 1.5)
    ws.write_number("A2", -2.25e-300)
    ws.write_number("A3", 123456789.123456789)
    ws.write_string("B1", "plain text")
    ws.write_string("B2", "  spaced & <escaped> \"quoted\"  ")
    ws.write_rich_string("B3", "rich ", bold, "text", " end")
    ws.write_boolean("C1", True)
    ws.write_boolean("C2", False)
    ws.write_formula("D1", "=1/0", None, "#DIV/0!")
    ws.write_formula("D2", "=NA()", None, "#N/A")
    ws.write_formula("E1", "=A1*2", None, 3.0)
    ws.write_formula("E2", '="a"&"b"', None, "ab")
    ws.write_formula("E3", '=""', None, "")
    ws.write_datetime("F1", dt.datetime(2024, 2, 29, 13, 45, 30), date)
    ws.write_number("F2", 45000.75, date)
    ws.write_string("G5", "=1+1")
    ws.write_number("Z40", 7.0)
    wb.add_worksheet("Second").write_string("A1", "only text")
    wb.close()
    return path


def same_value(a: Any, b: Any) -> bool:
    """Two Values equal in kind, text and number (nan equal to nan)."""
    return (a.kind, a.text) == (b.kind, b.text) and (
        a.number == b.number or (math.isnan(a.number) and math.isnan(b.number)))
