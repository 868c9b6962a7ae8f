"""The command line: exit status, messages on stderr, summary on stdout, nothing lost."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

from books import line_rows, make_book

from sheetfit.cli import main


def _book(tmp_path: Path, **names: str) -> Path:
    base = {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"}
    base.update(names)
    return make_book(tmp_path / "book.xlsx", {"Data": line_rows(8)}, base)


def test_refresh_prints_summary_and_exits_0(tmp_path: Path, capsys) -> None:
    """A good book: exit 0, stdout names the written file and each model's fit."""
    p = _book(tmp_path)
    out = tmp_path / "out.xlsx"
    assert main(["refresh", str(p), "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert f"refreshed {out}" in text and "model a: least squares, cost on units" in text
    assert "rows used 8, left out 0" in text


def test_refused_input_exits_2_with_one_line_and_untouched_book(tmp_path: Path, capsys) -> None:
    """Bad input: exit 2, one line on stderr naming file and name, the book keeps its bytes."""
    p = _book(tmp_path, sf_a_x="Data!$B$1:$B$5")
    before = p.read_bytes()
    assert main(["refresh", str(p)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0
    assert err.startswith("sheetfit: refused: book.xlsx, name sf_a_x, sheet 'Data' cell B1:B5")
    assert p.read_bytes() == before


def test_missing_file_is_refused(tmp_path: Path, capsys) -> None:
    """A path that does not exist is an input problem (exit 2), not a traceback."""
    assert main(["refresh", str(tmp_path / "nope.xlsx")]) == 2
    assert "nope.xlsx" in capsys.readouterr().err


def test_internal_fault_exits_1_without_traceback(tmp_path: Path, capsys, monkeypatch) -> None:
    """An unexpected fault: exit 1, a short message, no traceback, the book untouched."""
    p = _book(tmp_path)
    before = p.read_bytes()

    def boom(*args: object, **kwargs: object) -> None:
        raise RuntimeError("disk on fire")

    monkeypatch.setattr("sheetfit.refresh.graft", boom)
    assert main(["refresh", str(p)]) == 1
    err = capsys.readouterr().err
    assert "internal fault (RuntimeError: disk on fire)" in err and "Traceback" not in err
    assert p.read_bytes() == before


def test_console_script_runs_as_a_module(tmp_path: Path) -> None:
    """`python -m sheetfit refresh` works in a fresh process (the installed entry point)."""
    p = _book(tmp_path)
    run = subprocess.run([sys.executable, "-m", "sheetfit", "refresh", str(p)],
                         capture_output=True, text=True, timeout=120, check=False)
    assert run.returncode == 0, run.stderr
    assert "model a:" in run.stdout
