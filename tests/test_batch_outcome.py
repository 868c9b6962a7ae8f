"""One book's outcome: refreshed, skipped (no models / held open), refused, or fault."""

from __future__ import annotations

import pickle
from pathlib import Path

from books import line_rows, make_book

from sheetfit.batch import Outcome, refresh_one, worst_exit

NAMES = {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"}


def test_each_status(tmp_path: Path) -> None:
    good = make_book(tmp_path / "good.xlsx", {"Data": line_rows(8)}, NAMES)
    none = make_book(tmp_path / "none.xlsx", {"Data": line_rows(8)}, {})
    bad = make_book(tmp_path / "bad.xlsx", {"Data": line_rows(8)},
                    {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$5"})
    held = make_book(tmp_path / "held.xlsx", {"Data": line_rows(8)}, NAMES)
    (tmp_path / ".~lock.held.xlsx#").write_text("someone")
    broken = tmp_path / "broken.xlsx"
    broken.write_bytes(b"not a zip")
    got = {Path(o.book).name: o for o in map(refresh_one, [good, none, bad, held, broken])}
    assert got["good.xlsx"].status == "refreshed" and got["good.xlsx"].models == 1
    assert got["none.xlsx"].status == "skipped"
    assert got["none.xlsx"].message == "no models declared"
    assert got["bad.xlsx"].status == "refused" and "x has 5 rows" in got["bad.xlsx"].message
    assert got["held.xlsx"].status == "skipped" and "open in a spreadsheet program" in \
        got["held.xlsx"].message
    assert got["broken.xlsx"].status == "refused"
    assert worst_exit(got.values()) == 2
    assert worst_exit([got["good.xlsx"], got["none.xlsx"]]) == 0
    # outcomes cross process boundaries (a pool, a cluster)
    assert pickle.loads(pickle.dumps(got["good.xlsx"])) == got["good.xlsx"]


def test_a_fault_is_an_outcome_not_an_exception(tmp_path: Path, monkeypatch) -> None:
    good = make_book(tmp_path / "good.xlsx", {"Data": line_rows(8)}, NAMES)
    before = good.read_bytes()

    def boom(*args: object, **kwargs: object) -> None:
        raise RuntimeError("simulated")

    monkeypatch.setattr("sheetfit.refresh.plan_book", boom)
    out = refresh_one(good)
    assert isinstance(out, Outcome) and out.status == "fault" and "simulated" in out.message
    assert worst_exit([out]) == 1
    assert good.read_bytes() == before
