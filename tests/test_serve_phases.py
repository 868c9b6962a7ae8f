"""Refresh phases: the core reports read, fit, write, graft; the CLI shows them on a terminal."""

from __future__ import annotations

import io
import sys
from pathlib import Path

import pytest
from books import line_rows, make_book

from sheetfit.batch.progress import PHASES
from sheetfit.cli import main
from sheetfit.refresh import refresh


def _book(tmp_path: Path) -> Path:
    return make_book(tmp_path / "book.xlsx", {"Data": line_rows(8)},
                     {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"})


def test_refresh_reports_each_phase_once_in_order(tmp_path: Path) -> None:
    seen: list[str] = []
    refresh(_book(tmp_path), tmp_path / "out.xlsx", on_phase=seen.append)
    assert seen == ["read", "fit", "write", "graft"] == list(PHASES)


def test_a_refused_book_stops_in_the_phase_that_refused_it(tmp_path: Path) -> None:
    book = make_book(tmp_path / "bad.xlsx", {"Data": line_rows(8)},
                     {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$5"})
    seen: list[str] = []
    with pytest.raises(Exception, match="sf_a_x"):
        refresh(book, tmp_path / "out.xlsx", on_phase=seen.append)
    assert seen == ["read"]


@pytest.mark.parametrize("stop_at", PHASES)
def test_a_raising_callback_abandons_the_refresh_and_leaves_the_book(tmp_path: Path,
                                                                    stop_at: str) -> None:
    """The service abandons a refresh this way; the book and the target must be untouched."""
    book = _book(tmp_path)
    before = book.read_bytes()

    class Abandon(Exception):
        pass

    def on_phase(name: str) -> None:
        if name == stop_at:
            raise Abandon(name)

    with pytest.raises(Abandon):
        refresh(book, on_phase=on_phase)
    assert book.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["book.xlsx"]  # no temp, no lock


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_cli_shows_the_phases_on_a_terminal_only(tmp_path: Path, monkeypatch, capsys) -> None:
    book = _book(tmp_path)
    screen = _Terminal()
    monkeypatch.setattr(sys, "stderr", screen)
    assert main(["refresh", str(book), "--out", str(tmp_path / "a.xlsx")]) == 0
    shown = screen.getvalue()
    assert "refreshing book.xlsx" in shown and "graft" in shown
    monkeypatch.setattr(sys, "stderr", io.StringIO())
    assert main(["refresh", str(book), "--out", str(tmp_path / "b.xlsx")]) == 0
    assert sys.stderr.getvalue() == ""
    assert "refreshed" in capsys.readouterr().out
