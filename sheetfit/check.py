"""``sheetfit check BOOK``: is each model's result still the fit of the book's current inputs?

Reads the book (never writes), reads every declaration again as a refresh would, and
compares per model:

- the input record (``declare/fingerprint.py``) with the one the last refresh stored on
  ``sf inputs``: a range whose digest differs is named, with the cells that changed,
  were added or removed (cells compared by address);
- when the inputs are unchanged and the book was refreshed by this version: the model's
  result sheets with a fresh plan of them, cell by cell — a formula replaced by a
  constant, a value that differs, a cell sheetfit did not write;
- always: the cached value of every owned formula that is a plain reference to a user's
  cell (``=Data!B5``) against that cell — a difference means the data changed and the book
  was saved without recalculating — and owned formulas stored without a result.

Status per model: ``current``, ``stale`` (inputs changed), ``edited`` (results changed by
hand, or not recalculated), ``never refreshed``. Refusals are the refresh's own.
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from . import __version__
from .a1 import cell_ref, quote_sheet
from .carry import read_kept
from .declare.fingerprint import InputRecord, RangeRecord, cell_addresses
from .declare.model import ModelData, find_models
from .declare.refs import RefError, parse_areas
from .errors import SheetfitError
from .history._grid import read_rows
from .history.inputs import read_inputs
from .methods import REGISTRY
from .owned import INDEX_SHEET, INPUTS_SHEET
from .reader.columns import CODE
from .reader.formulas import CellKind, SheetKinds, read_cell_kinds
from .reader.package import Package, open_package
from .reader.values import BLANK, ERROR, NUMBER, OTHER, TEXT, UNSAVED, BookValues, Value
from .sheets.columns import Run
from .sheets.plan import SheetPlan
from .vectors import blocks, is_numeric

__all__ = ["CURRENT", "EDITED", "MISSING", "STALE", "BookCheck", "ModelCheck", "check"]

CURRENT, STALE, EDITED, MISSING = "current", "stale", "edited", "never refreshed"
#: Exit status of ``sheetfit check`` when any model is not current.
EXIT_NOT_CURRENT = 3
#: Cached numbers agree when within 1e-9 relative or 1e-12 absolute: the tolerance the
#: engine tests use between LibreOffice and sheetfit (different summation orders); a
#: book re-saved by LibreOffice keeps 15 significant digits (docs/engine-facts.md, E4).
REL, ABS = 1e-9, 1e-12
#: Findings listed per kind before the rest are only counted.
LISTED = 5
#: Cells of a run of texts whose formulas are made and compared at a time.
_RUN_BLOCK = 1 << 14


@dataclass
class RangeChange:
    """A declared range whose values differ from the last refresh's."""

    role: str
    name: str
    range: str
    changed: int
    added: int
    removed: int
    cells: list[str] = field(default_factory=list)

    def text(self) -> str:
        counts = [(n, w) for n, w in ((self.changed, "changed"), (self.added, "added"),
                                      (self.removed, "removed")) if n]
        if counts:
            (n, w), rest = counts[0], counts[1:]
            what = ", ".join([f"{n} {'cell' if n == 1 else 'cells'} {w}"]
                             + [f"{m} {v}" for m, v in rest])
        else:
            what = "the range moved"
        more = ", …" if self.changed + self.added > len(self.cells) else ""
        where = f" ({', '.join(self.cells)}{more})" if self.cells else ""
        return f"{self.name} ({self.range}): {what}{where}"


@dataclass
class Edit:
    """A cell of an owned sheet that no longer holds what sheetfit wrote."""

    sheet: str
    cell: str
    what: str

    def text(self) -> str:
        where = quote_sheet(self.sheet) + (f"!{self.cell}" if self.cell else "")
        return f"{where}: {self.what}"


@dataclass
class ModelCheck:
    """What ``check`` found for one model."""

    model: str
    status: str
    fingerprint: str | None = None
    recorded: str | None = None
    refreshed: str | None = None
    version: str | None = None
    changes: list[RangeChange] = field(default_factory=list)
    edits: list[Edit] = field(default_factory=list)
    edits_total: int = 0
    notes: list[str] = field(default_factory=list)

    def text(self) -> str:
        head = f"  {self.model}: {self.status}"
        if self.status == CURRENT:
            head += f" (fingerprint {self.fingerprint}, refreshed {self.refreshed})"
        lines = [head]
        lines += [f"    inputs changed: {c.text()}" for c in self.changes]
        lines += [f"    result edited: {e.text()}" for e in self.edits]
        if self.edits_total > len(self.edits):
            lines.append(f"    … {self.edits_total - len(self.edits)} more result cells")
        lines += [f"    note: {n}" for n in self.notes]
        return "\n".join(lines)


@dataclass
class BookCheck:
    """The check of one book: a status per model, the exit status."""

    book: str
    models: list[ModelCheck]

    @property
    def exit_status(self) -> int:
        return 0 if all(m.status == CURRENT for m in self.models) else EXIT_NOT_CURRENT

    def text(self) -> str:
        worst = "all current" if self.exit_status == 0 else "not all current"
        lines = [f"check {self.book}: {worst}"] + [m.text() for m in self.models]
        if self.exit_status:
            lines.append("refresh the book to bring every model up to date")
        return "\n".join(lines)

    def as_json(self) -> str:
        return json.dumps({"book": self.book, "exit_status": self.exit_status,
                           "models": [asdict(m) for m in self.models]}, indent=2,
                          ensure_ascii=False)


def _values(pkg: Package, path: Path) -> BookValues:
    parts = {s.name: s.part for s in pkg.sheets if s.is_worksheet}
    return BookValues(path, parts, pkg.date1904, pkg.workbook_part)


def check(book: str | Path) -> BookCheck:
    """Check every declared model of ``book``; never writes. SheetfitError when refused."""
    source = Path(book)
    file = source.name
    try:
        pkg = open_package(source)
        with _values(pkg, source) as values:
            models = find_models(pkg, values, file, REGISTRY)
            for m in models:  # notes people typed on owned sheets belong in the fresh plan
                m.kept = read_kept(values, m.tag)
            owned = {s.name: s.part for s in pkg.owned_sheets() if s.is_worksheet}
            stored = read_inputs(values) if INPUTS_SHEET in owned else {}
            index = _read_index(values) if INDEX_SHEET in owned else {}
            kinds = _Kinds(source, owned)
            plans = _BookPlans(models)
            plans.all_current = all(
                m.record is not None and m.tag.casefold() in stored
                and stored[m.tag.casefold()][0].fingerprint == m.record.fingerprint
                for m in models)
            out = [_check_model(m, stored, index, owned, kinds, values, plans) for m in models]
            declared = {m.tag.casefold() for m in models}
            for key, (rec, _) in stored.items():
                if key not in declared:
                    out.append(ModelCheck(rec.tag, STALE, notes=[
                        ("its results are in the book but the model is no longer declared; "
                         "the next refresh removes them")]))
    except SheetfitError as exc:
        raise exc.with_file(file) from None
    return BookCheck(file, out)


def _read_index(values: BookValues) -> dict[str, tuple[str, str, str]]:
    """Model (case-folded) -> (refreshed, tool version, fingerprint) from the index sheet,
    its columns found by their headers (the first row whose column A reads "model")."""
    out: dict[str, tuple[str, str, str]] = {}
    rows = read_rows(values, INDEX_SHEET, 1, 30)
    at = next((i for i, r in enumerate(rows) if r[0] == "model"), None)
    if at is None:
        return out
    head = [str(h or "") for h in rows[at]]
    want = ("refreshed (UTC)", "tool version", "input fingerprint")
    if not all(w in head for w in want):
        return out
    cols = [head.index(w) for w in want]
    for row in rows[at + 1:]:
        if not isinstance(row[0], str) or not row[0]:
            break
        got = [str(row[c] or "") for c in cols]
        out[row[0].casefold()] = (got[0], got[1], got[2])
    return out


class _Kinds:
    """The owned sheets' cell kinds (``reader.formulas``), read when first asked for and
    let go with ``drop`` once the sheet is checked."""

    def __init__(self, source: Path, owned: dict[str, str]) -> None:
        self.source = source
        self.parts = owned
        #: The owned sheets' names, case-folded.
        self.owned = {t.casefold() for t in owned}
        self._read: dict[str, SheetKinds] = {}

    def __getitem__(self, title: str) -> SheetKinds:
        if title not in self._read:
            self._read[title] = read_cell_kinds(self.source, self.parts[title])
        return self._read[title]

    def drop(self, title: str) -> None:
        self._read.pop(title, None)


class _BookPlans:
    """Fresh plans of the models' sheets, made as the refresh makes them, on first need.

    Some sheets show figures of every model (a comparison block): the book is planned
    once with every model, and each model alone; a cell whose plan differs between the
    two depends on other models and is compared only when every model is current.
    """

    def __init__(self, models: list[ModelData]) -> None:
        self.models = models
        self.all_current = True
        self._fits: dict[str, Any] = {}
        self._sheets: dict[str, SheetPlan] | None = None

    def _plan(self, models: list[ModelData]) -> dict[str, SheetPlan]:
        from .refresh import fit_model, plan_book

        fits = []
        for m in models:
            if m.tag not in self._fits:
                self._fits[m.tag] = fit_model(m)
            fits.append((m, self._fits[m.tag]))
        book, _ = plan_book(fits, "")
        return {s.title.casefold(): s for s in book.sheets[1:]}

    def of(self, model: ModelData) -> list[tuple[SheetPlan, set[tuple[int, int]]]]:
        """The model's sheets, each with the cells that depend on other models."""
        if self._sheets is None:
            self._sheets = self._plan(self.models)
        alone = {} if self.all_current else self._plan([model])  # needed only then
        prefix = f"sf {model.tag} ".casefold()
        out = []
        for t, s in self._sheets.items():
            if not t.startswith(prefix):
                continue
            shared = set() if self.all_current else _differing(s, alone.get(t))
            out.append((s, shared))
        return out


def _same_run(a: Run, b: Run) -> bool:
    """Whether two runs plan the same cells (values, formula template and vectors)."""
    if (a.col, a.row0, a.n, a.style) != (b.col, b.row0, b.n, b.style):
        return False
    if (a.formula is None) != (b.formula is None):
        return False
    pairs: list[tuple[Any, Any]] = [(a.values, b.values)]
    if a.formula is not None and b.formula is not None:
        if a.formula.text != b.formula.text or len(a.formula.args) != len(b.formula.args):
            return False
        pairs += list(zip(a.formula.args, b.formula.args, strict=True))
    for x, y in pairs:
        if x is None or y is None:
            if x is not y:
                return False
        elif len(x) != len(y) or not all(
                np.array_equal(np.asarray(u, dtype=object), np.asarray(w, dtype=object))
                for u, w in zip(blocks(x), blocks(y), strict=True)):
            return False
    return True


def _differing(whole: SheetPlan, alone: SheetPlan | None) -> set[tuple[int, int]]:
    """Cells (1-based) the plan of every model gives differently from the plan of this model
    alone: those depend on the other models. Runs equal in both are skipped whole."""
    theirs = {(u.col, u.row0): u for u in alone.runs} if alone is not None else {}
    same = {(u.col, u.row0) for u in whole.runs
            if (o := theirs.get((u.col, u.row0))) is not None and _same_run(u, o)}
    mine = SheetPlan(whole.title, loose=whole.loose,
                     runs=[u for u in whole.runs if (u.col, u.row0) not in same])
    own: dict[tuple[int, int], tuple[Any, str | None]] = {}
    if alone is not None:
        other = SheetPlan(alone.title, loose=alone.loose,
                          runs=[u for u in alone.runs if (u.col, u.row0) not in same])
        own = {(c.row, c.col): (c.value, c.formula) for c in other.cells}
    return {(c.row + 1, c.col + 1) for c in mine.cells
            if own.get((c.row, c.col)) != (c.value, c.formula)}


def _check_model(model: ModelData, stored: dict[str, tuple[InputRecord, str]],
                 index: dict[str, tuple[str, str, str]], owned: dict[str, str],
                 kinds: _Kinds, values: BookValues, plans: _BookPlans) -> ModelCheck:
    now = model.record
    if now is None:
        raise ValueError(f"model {model.tag} was read without its input record")
    key = model.tag.casefold()
    found = ModelCheck(model.tag, CURRENT, fingerprint=now.fingerprint)
    if key not in stored:
        found.status = MISSING
        if key in index:  # refreshed, but by a sheetfit that kept no input record
            found.status = STALE
            found.refreshed, found.version = index[key][0] or None, index[key][1] or None
            found.notes.append("refreshed without an input record (an earlier sheetfit): "
                               "refresh once so that changes can be traced")
        return found
    rec, written_fp = stored[key]
    refreshed, version, index_fp = index.get(key, ("", "", ""))
    found.recorded, found.refreshed, found.version = written_fp, refreshed or None, version or None
    if rec.fingerprint != written_fp or (index_fp and index_fp != written_fp):
        found.edits.append(Edit(INPUTS_SHEET if rec.fingerprint != written_fp else INDEX_SHEET,
                                "", "the recorded fingerprint was changed by hand"))
    if rec.fingerprint != now.fingerprint:
        found.status = STALE
        found.changes = _range_changes(rec, now)
        if rec.settings != now.settings:
            found.notes.append(f"settings as used were {rec.settings}; now {now.settings}")
    sheets = {t: p for t, p in owned.items() if t.casefold().startswith(
        f"sf {model.tag} ".casefold())}
    planned: list[tuple[SheetPlan, set[tuple[int, int]]]] = []
    if found.status == CURRENT:
        if version and version != __version__:
            found.notes.append(f"refreshed by sheetfit {version}, this is {__version__}: the "
                               "result cells were not compared with a fresh plan")
        else:
            planned = plans.of(model)
    by_title = {plan.title.casefold(): (plan, skip) for plan, skip in planned}
    data_edits: dict[str, list[Edit]] = {}
    plan_edits: dict[str, list[Edit]] = {}
    for title in sheets:  # one sheet at a time, its cells let go before the next
        k = kinds[title]
        data_edits[title] = _data_side(title, k, kinds.owned, values)
        got = by_title.get(title.casefold())
        if got is not None:
            plan_edits[title.casefold()] = _compare_sheet(got[0], title, k, values, got[1])
        kinds.drop(title)
        values.forget(title)
    edits = [e for title in sheets for e in data_edits[title]]
    for plan, _ in planned:
        edits += plan_edits.get(plan.title.casefold(),
                                [Edit(plan.title, "", "the sheet is missing")])
    found.edits_total = len(edits) + len(found.edits)
    found.edits = (found.edits + edits)[:LISTED]
    if found.edits and found.status == CURRENT:
        found.status = EDITED
    return found


def _range_changes(old: InputRecord, now: InputRecord) -> list[RangeChange]:
    out = []
    roles = [r.role for r in now.ranges] + [r.role for r in old.ranges
                                           if now.range(r.role) is None]
    for role in roles:
        a, b = old.range(role), now.range(role)
        if a is not None and b is not None and a.digest == b.digest:
            continue
        out.append(_diff(role, a, b))
    return out


def _cells_of(rr: RangeRecord | None) -> dict[str, str]:
    if rr is None:
        return {}
    try:
        areas = parse_areas(rr.ref)
    except RefError:
        return {}
    out = {}
    for i, (sheet, r, c) in enumerate(cell_addresses(areas)):
        out[f"{quote_sheet(sheet)}!{cell_ref(r, c)}"] = rr.cell(i)
    return out


def _diff(role: str, a: RangeRecord | None, b: RangeRecord | None) -> RangeChange:
    old, new = _cells_of(a), _cells_of(b)
    changed = [k for k in new if k in old and old[k] != new[k]]
    added = [k for k in new if k not in old]
    removed = [k for k in old if k not in new]
    rr = b or a
    name = rr.name if rr is not None else role
    ref = (b.ref if b is not None else "no longer declared") if a is None or b is None \
        or a.ref == b.ref else f"{a.ref} → {b.ref}"
    return RangeChange(role, name, ref, len(changed), len(added), len(removed),
                       (changed + added)[:LISTED])


def _same(planned: Any, v: Value) -> bool:
    """Whether a book cell's value is what the plan put there (numbers within REL/ABS)."""
    if planned is None or planned == "":
        return v.kind == BLANK or (v.kind == TEXT and v.text == "")
    if isinstance(planned, bool):
        return (v.kind == OTHER and v.text == ("TRUE" if planned else "FALSE")) or (
            v.kind == NUMBER and v.number == float(planned))
    if isinstance(planned, (int, float)):
        return v.kind == NUMBER and _close(float(planned), v.number)
    if v.kind == ERROR:
        return str(planned) == v.text
    return v.kind == TEXT and v.text == str(planned)


def _close(a: float, b: float) -> bool:
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    return abs(a - b) <= max(ABS, REL * max(abs(a), abs(b)))


def _shown(v: Value) -> str:
    if v.kind == NUMBER:
        return f"{v.number:.10g}"
    if v.kind == BLANK:
        return "a blank"
    return repr(v.text[:30])


def _compare_sheet(plan: SheetPlan, title: str, kinds: SheetKinds,
                   values: BookValues, skip: set[tuple[int, int]]) -> list[Edit]:
    sv = values.sheet(title)
    edits = []
    seen: set[tuple[int, int]] = set(skip)

    def compare(row: int, col: int, value: Any, formula: str | None) -> None:
        pos = (row + 1, col + 1)
        if pos in skip:
            return
        seen.add(pos)
        what = _cell_edit(value, formula, kinds.get(pos), sv.get(*pos))
        if what:
            edits.append(Edit(title, cell_ref(*pos), what))

    for c in plan.loose:
        compare(c.row, c.col, c.value, c.formula)
    spans: dict[int, list[tuple[int, int]]] = {}  # column -> 1-based row spans of the runs
    for run in plan.runs:
        if not run.n:
            continue
        spans.setdefault(run.col + 1, []).append((run.row0 + 1, run.last + 1))
        suspects = _run_suspects(run, kinds, sv, skip)
        if suspects is None:  # not a numeric run: cell by cell, a block of rows at a time
            for a in range(0, run.n, _RUN_BLOCK):
                b = min(run.n, a + _RUN_BLOCK)
                forms = run.formulas(a, b)
                for i, value in enumerate(run.scalars(a, b)):
                    compare(run.row0 + a + i, run.col, value, None if forms is None else forms[i])
            continue
        for i in suspects:
            f = run.formulas(i, i + 1)
            compare(run.row0 + i, run.col, run.scalars(i, i + 1)[0], f[0] if f else None)

    for pos in kinds.outside(spans):  # cells the runs do not cover
        if pos in seen:
            continue
        v = sv.get(*pos)
        kind = kinds.get(pos)
        if v.kind != BLANK or (kind is not None and kind.formula):
            edits.append(Edit(title, cell_ref(*pos), f"holds {_shown(v)}, which sheetfit did "
                              "not write (the next refresh replaces this sheet)"))
    return edits


def _run_suspects(run: Run, kinds: SheetKinds, sv: Any,
                  skip: set[tuple[int, int]]) -> list[int] | None:
    """Items of a run of numbers whose cell may differ from the plan (the rest certainly
    agree: a number within REL/ABS and, for a formula run, a formula with its result), found
    with arrays; ``_cell_edit`` then words each suspect. None for runs of other values."""
    v = run.values
    if not is_numeric(v):
        return None
    col = run.col + 1
    r1 = run.row0 + 1
    book = sv.column(col, r1, run.last + 1)
    planned = np.asarray(v, dtype=float)
    got = book.number
    is_num = book.kind == CODE[NUMBER]
    with np.errstate(invalid="ignore"):
        close = is_num & (np.abs(planned - got) <= np.maximum(
            ABS, REL * np.maximum(np.abs(planned), np.abs(got))))
    held, formula, result = kinds.column(col, r1, run.last + 1)
    if run.formula is not None:
        fine = formula & (~result | close)
    else:
        fine = ~(held & formula) & close
    out = np.flatnonzero(~fine).tolist()
    return [i for i in out if (r1 + i, col) not in skip] if skip else out


def _cell_edit(value: Any, formula: str | None, kind: CellKind | None, v: Value) -> str:
    """What is wrong with one planned cell in the book ('' when nothing is)."""
    if formula is not None:
        if kind is None:
            return "its formula was cleared"
        if not kind.formula:
            return f"its formula {formula[:40]} was replaced by {_shown(v)}"
        if v.kind == UNSAVED or not kind.result:
            return ""  # counted by the data-side pass, once per sheet
        if not _same(value, v):
            return f"shows {_shown(v)} where its formula gave {value!r:.30}"
        return ""
    if kind is not None and kind.formula:
        return f"a formula was typed where sheetfit wrote {value!r:.30}"
    if not _same(value, v):
        return f"holds {_shown(v)} where sheetfit wrote {value!r:.30}"
    return ""


def _data_side(title: str, k: SheetKinds, owned: set[str], values: BookValues) -> list[Edit]:
    """Owned references (on sheet ``title``) to a user's cell whose cached value differs
    from that cell, and owned formulas stored without a result. Compared a column at a
    time: the references of one owned column to one column of a user's sheet, as arrays.
    ``owned``: the owned sheets' names, case-folded (references to them are not data)."""
    edits: list[Edit] = []
    unsaved = k.unsaved()
    refs = k.refs
    # one group per (owned column, referred sheet, referred column): 14 + 20 + 14 bits
    key = ((refs.cols.astype(np.int64) << 34) | (refs.sheets.astype(np.int64) << 14)
           | refs.to_cols.astype(np.int64))
    order = np.argsort(key, kind="stable")
    cuts = np.flatnonzero(np.diff(key[order])) + 1
    found: list[tuple[int, int, str]] = []
    for idx in np.split(order, cuts) if len(order) else []:
        i0 = int(idx[0])
        c, tc = int(refs.cols[i0]), int(refs.to_cols[i0])
        sheet = refs.sheet_names[int(refs.sheets[i0])]
        if sheet.casefold() in owned:
            continue
        try:
            values.sheet(sheet)
        except KeyError:
            continue  # a sheet the book does not have
        rows = refs.rows[idx].astype(np.int64)
        _, _, result = k.column(c, int(rows.min()), int(rows.max()))
        stored = result[rows - rows.min()]  # without a result: counted above
        idx, rows = idx[stored], rows[stored]
        if not len(idx):
            continue
        to_rows = refs.to_rows[idx].astype(np.int64)
        for j in _differing_refs(values, title, c, rows, sheet, tc, to_rows):
            r, tr = int(rows[j]), int(to_rows[j])
            v = values.sheet(title).get(r, c)
            target = values.sheet(sheet).get(tr, tc)
            ref = f"{quote_sheet(sheet)}!{cell_ref(tr, tc)}"
            found.append((r, c, (
                f"shows {_shown(v)} but {ref} holds {_shown(target)} "
                "(the data changed and the book was saved without recalculating)")))
    edits += [Edit(title, cell_ref(r, c), what) for r, c, what in sorted(found)]
    if unsaved:
        edits.append(Edit(title, "", (
            f"{unsaved} formula cells have no saved result (the book was saved by a "
            "program that does not calculate)")))
    return edits


def _differing_refs(values: BookValues, title: str, col: int, rows: np.ndarray, sheet: str,
                    to_col: int, to_rows: np.ndarray) -> list[int]:
    """Which of the owned cells (``rows`` of column ``col`` of ``title``) that refer to
    cells (``to_rows`` of column ``to_col`` of ``sheet``) show a cached value other than
    the referred cell's (``_same_value``), as indices; cells read as formulas without a
    result are left to the count of those."""
    mine = values.column(title, col, int(rows.min()), int(rows.max()))
    theirs = values.column(sheet, to_col, int(to_rows.min()), int(to_rows.max()))
    a_at, b_at = rows - mine.row1, to_rows - theirs.row1
    ka, kb = mine.kind[a_at], theirs.kind[b_at]
    na, nb = mine.number[a_at], theirs.number[b_at]
    num, blank = CODE[NUMBER], CODE[BLANK]
    unsaved = ka == CODE[UNSAVED]
    both = (ka == num) & (kb == num)
    with np.errstate(invalid="ignore"):
        close = (np.abs(na - nb) <= np.maximum(ABS, REL * np.maximum(np.abs(na), np.abs(nb))))
        close |= np.isnan(na) & np.isnan(nb)
        # a reference to a blank cell shows 0
        blank_ok = ((ka == blank) & ((kb == blank) | ((kb == num) & (nb == 0)))) | (
            (kb == blank) & (ka == num) & (na == 0))
    same = np.where(both, close, blank_ok)
    other = ~both & ~blank_ok & (ka == kb) & (ka != num) & (ka != blank)
    bad = []
    for j in np.flatnonzero(~same & ~unsaved).tolist():
        if other[j] and mine.value(int(a_at[j])).text == theirs.value(int(b_at[j])).text:
            continue
        bad.append(j)
    return bad


def _same_value(a: Value, b: Value) -> bool:
    if a.kind == NUMBER and b.kind == NUMBER:
        return _close(a.number, b.number)
    if {a.kind, b.kind} <= {BLANK, NUMBER} and (a.kind == BLANK or b.kind == BLANK):
        # a reference to a blank cell shows 0
        other = a if a.kind == NUMBER else b
        return other.kind == BLANK or other.number == 0
    return a.kind == b.kind and a.text == b.text
