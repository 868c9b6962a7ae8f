"""Find the models declared with defined names and turn their cells into arrays.

A declaration is a defined name ``sf_<model>_<role>`` (roles y, x, new, opts, key, newkey,
rule),
workbook- or sheet-scoped. This module checks everything that comes out of the
named ranges (one place, one wording): references, lengths, headers, values, settings.
Messages name the file, the defined name, the sheet and the cell. What the numbers themselves must satisfy (enough
rows, no constant attribute, ...) is checked by the numeric core (``sheetfit.fit.checks``)
and placed on the cells by the refresh.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from typing import Protocol

import numpy as np

from ..a1 import cell_ref, col_letter, quote_sheet
from ..errors import Context, DataError, DeclarationError, NoModelsError
from ..fit.totals import find_totals
from ..fit.totals import reason as totals_reason
from ..labels import label_text
from ..owned import INPUT_ROLES, MAX_TAG, OUTPUT_ROLES, is_ours, split_name
from ..reader.formats import amount_format
from ..reader.package import DefinedName, Package
from ..reader.values import (
    BLANK,
    ERROR,
    NUMBER,
    TEXT,
    UNSAVED,
    BookValues,
    SheetValues,
    Value,
)
from ..settings import MethodSettings, Settings, parse_settings
from ..words import clip, plural
from .fingerprint import InputRecord, record_inputs, settings_text
from .levels import Coding, code_levels, indicators, is_level, text_columns
from .refs import Area, RefError, parse_areas

__all__ = [
    "Column",
    "KeyValue",
    "Keys",
    "LeftOut",
    "MethodReading",
    "ModelData",
    "NewRows",
    "RuleCells",
    "describe_value",
    "find_models",
]


@dataclass(frozen=True)
class Column:
    """One declared column: where its first data cell is and what it is called."""

    name: str
    sheet: str
    col: int
    first_row: int
    #: For an indicator of a text attribute (``declare/levels.py``): the level it marks;
    #: the cells are the text attribute's own, and the value is 1 where the cell is that level.
    level: str | None = None
    #: The number format of the column's first data cell when it shows a plain number
    #: (``reader.formats.amount_format``), for the result sheets to show amounts alike.
    fmt: str | None = None

    def value_ref(self, i: int) -> str:
        """Formula expression of this column's value in the model's i-th row.

        The cell reference itself, or for an indicator ``IF(EXACT(cell,"level"),1,0)``
        (quotes in the level doubled, as a formula's text constant needs).
        """
        if self.level is None:
            return self.cell(i)
        text = self.level.replace('"', '""')
        return f'IF(EXACT({self.cell(i)},"{text}"),1,0)'

    def row_of(self, i: int) -> int:
        """Sheet row of the model's i-th row (0-based)."""
        return self.first_row + i

    def cell(self, i: int) -> str:
        """Formula reference to this column's cell in the model's i-th row, e.g. Data!C5."""
        return f"{quote_sheet(self.sheet)}!{cell_ref(self.row_of(i), self.col)}"

    def span(self, i0: int, i1: int) -> str:
        """Plain address of rows i0..i1 of this column (for messages)."""
        return f"{cell_ref(self.row_of(i0), self.col)}:{cell_ref(self.row_of(i1), self.col)}"


@dataclass(frozen=True)
class LeftOut:
    """A data row left out of the fit, with the reason in plain words."""

    index: int
    sheet_row: int
    reason: str


#: What an identifier cell holds, as shown beside a row: a number (dates as serials),
#: text, or None for a blank.
KeyValue = float | str | None


@dataclass
class Keys:
    """Identifier columns (a month, a job or invoice number ...) beside the model's rows.

    ``values[j][i]`` is what column j holds in the i-th row of the declared range
    (all rows, used or not; index as ``Column.cell(i)``).
    """

    columns: list[Column]
    values: list[list[KeyValue]]

    def row(self, i: int) -> list[KeyValue]:
        return [v[i] for v in self.values]


@dataclass(frozen=True)
class RuleCells:
    """The coefficients of the rule in use today: their cells (as formula references), values."""

    name: str
    cells: list[str]
    values: np.ndarray


@dataclass
class NewRows:
    """Rows of attribute values to predict (the ``new`` declaration)."""

    columns: list[Column]
    X: np.ndarray
    keys: Keys | None = None

    @property
    def n(self) -> int:
        return int(self.X.shape[0])


@dataclass
class ModelData:
    """A declared model with its cells read: what the fit and the sheet plan need."""

    tag: str
    file: str
    settings: Settings
    y: Column
    xs: list[Column]
    n_rows: int
    used: np.ndarray
    left_out: list[LeftOut]
    Y: np.ndarray
    X: np.ndarray
    new: NewRows | None = None
    names: dict[str, str] = field(default_factory=dict)
    keys: Keys | None = None
    rule: RuleCells | None = None
    #: What people typed on this model's owned sheets at the last refresh, to be written
    #: back (by sheet kind, then row identity): filled by the refresh, not a declaration.
    kept: dict[str, dict[str, list[str | float]]] = field(default_factory=dict)
    #: Text attribute (its header name) → its baseline level, for methods that code
    #: text attributes as indicators (``Method.text_attributes``); empty otherwise.
    baselines: dict[str, str] = field(default_factory=dict)
    #: Text attribute → level → rows used with that level (baseline included).
    level_counts: dict[str, dict[str, int]] = field(default_factory=dict)
    #: What each declared range held when read (``declare/fingerprint.py``).
    record: InputRecord | None = None

    @property
    def attribute_names(self) -> list[str]:
        return [c.name for c in self.xs]


def describe_value(v: Value) -> str:
    """A cell value in the words of a left-out reason."""
    if v.kind == BLANK:
        return "blank"
    if v.kind == ERROR:
        return f"error {clip(v.text, 20)}"
    if v.kind == TEXT:
        return f"text '{clip(v.text, 20)}'"
    if v.kind == UNSAVED:
        return "a formula with no saved result"
    return f"{clip(v.text, 20)} (not a number)"


#: Declared ranges as read, by role: (defined name, areas after trimming).
_Ranges = dict[str, tuple[str, list[Area]]]


@dataclass
class _Decl:
    tag: str
    names: dict[str, DefinedName] = field(default_factory=dict)


def _collect(pkg: Package, file: str) -> dict[str, _Decl]:
    owned = pkg.owned_sheets()
    titles, indices = [s.name for s in owned], {s.index for s in owned}
    decls: dict[str, _Decl] = {}
    for d in pkg.defined_names:
        parts = split_name(d.name)
        if parts is None:
            continue
        tag, role = parts
        ctx = Context(file, d.name)
        if role in OUTPUT_ROLES:
            if is_ours(d, titles, indices):  # the grafter's rule too: replaced on refresh
                continue
            raise DeclarationError(
                f"'{role}' is a role sheetfit writes (results), so this name of yours would be "
                "overwritten",
                ctx,
                hint="rename it",
            )
        if role not in INPUT_ROLES:
            raise DeclarationError(
                f"unknown role '{role}'",
                ctx,
                hint="a declaration ends in _" + ", _".join(INPUT_ROLES),
            )
        if len(tag) > MAX_TAG:
            raise DeclarationError(
                f"model name '{tag}' is longer than {MAX_TAG} characters", ctx,
                hint="shorten it so result sheet titles fit in 31 characters",
            )
        decl = decls.setdefault(tag.casefold(), _Decl(tag))
        if role in decl.names:
            raise DeclarationError(
                f"model '{tag}' declares its {role} twice (also as {decl.names[role].name}"
                f"{' on another sheet' if d.local_sheet_id is not None else ''})",
                ctx,
                hint="keep one of the two names",
            )
        decl.names[role] = d
    return decls


class MethodReading(MethodSettings, Protocol):
    """What reading a declaration needs to know of its method (a registry record)."""

    @property
    def title(self) -> str: ...

    @property
    def labels(self) -> bool: ...

    @property
    def max_attributes(self) -> int | None: ...

    @property
    def text_attributes(self) -> bool: ...

    @property
    def check(self) -> Callable[[ModelData], None] | None: ...

    @property
    def compares_rule(self) -> bool: ...


def find_models(pkg: Package, values: BookValues, file: str,
                methods: Mapping[str, MethodReading]) -> list[ModelData]:
    """Every model declared in the book, checked and read, in order of model name.

    ``methods`` is the method registry (sheetfit.methods.REGISTRY).
    """
    decls = _collect(pkg, file)
    if not decls:
        raise NoModelsError(
            "no models are declared",
            Context(file),
            hint="define names sf_<model>_y and sf_<model>_x pointing at the response "
            "and attribute cells",
        )
    return [_read_model(decls[k], pkg, values, file, methods) for k in sorted(decls)]


def _areas(d: DefinedName, pkg: Package, file: str) -> list[Area]:
    ctx = Context(file, d.name)
    try:
        areas = parse_areas(d.text)
    except RefError as exc:
        raise DeclarationError(str(exc), ctx, hint="point the name at cells of this workbook") \
            from None
    owned = {s.name.casefold() for s in pkg.owned_sheets()}
    for a in areas:
        try:
            entry = pkg.sheet(a.sheet)
        except KeyError:
            raise DeclarationError(
                f"it points to sheet '{clip(a.sheet)}', which is not in this workbook", ctx
            ) from None
        if not entry.is_worksheet:
            what = {"chartsheet": "a chart sheet", "xlMacrosheet": "a macro sheet",
                    "xlIntlMacrosheet": "a macro sheet", "dialogsheet": "a dialog sheet"}.get(
                entry.kind, "not a worksheet")
            raise DeclarationError(
                f"it points to '{clip(a.sheet)}', which is {what}, not a sheet of cells",
                Context(file, d.name, a.sheet), hint="point it at the cells of a worksheet",
            )
        if a.sheet.casefold() in owned:
            raise DeclarationError(
                f"it points to '{a.sheet}', a result sheet that sheetfit replaces on refresh",
                Context(file, d.name, a.sheet, a.first_cell()),
                hint="point it at your own data",
            )
    return areas


#: Cells a refusal lists by address before it only counts the rest.
_LISTED = 5


def _refuse_unsaved(role: str, d: DefinedName, areas: list[Area], values: BookValues,
                    file: str) -> None:
    """Formula cells without a saved result in a declared range are refused, never blanks.

    A book written by a program that does not calculate stores ``<f>`` without ``<v>``;
    reading those cells as blanks would leave rows out for no reason the user can see.
    """
    cells = [
        (a.sheet, cell_ref(r, c))
        for a in areas
        for r, c in values.sheet(a.sheet).unsaved_in(a.row1, a.row2, a.col1, a.col2)
    ]
    if not cells:
        return
    listed = ", ".join(ref for _, ref in cells[:_LISTED]) + (", …" if len(cells) > _LISTED else "")
    raise DataError(
        f"{plural(len(cells), 'formula cell')} in {role} "
        f"{'has' if len(cells) == 1 else 'have'} no saved result ({listed})",
        Context(file, d.name, cells[0][0], cells[0][1]),
        hint="recalculate and save the book in a spreadsheet application first",
    )


def _trim(areas: list[Area], last: int) -> list[Area]:
    return [a.with_rows(1, max(last, 1)) if a.whole_columns else a for a in areas]


def _last_row(areas: list[Area], values: BookValues) -> int:
    return max(
        (values.sheet(a.sheet).last_used_row(a.col1, a.col2) for a in areas if a.whole_columns),
        default=0,
    )


def _columns(areas: list[Area]) -> list[tuple[Area, int]]:
    return [(a, c) for a in areas for c in range(a.col1, a.col2 + 1)]


def _header(cols: list[tuple[Area, int]], values: BookValues) -> bool:
    return all(values.sheet(a.sheet).get(a.row1, c).kind == TEXT for a, c in cols)


def _read_model(decl: _Decl, pkg: Package, values: BookValues, file: str,
                methods: Mapping[str, MethodReading]) -> ModelData:
    tag = decl.tag
    for role in ("y", "x"):
        if role not in decl.names:
            raise DeclarationError(
                f"model '{tag}' has no {role} declaration",
                Context(file, f"sf_{tag}_{role}"),
                hint=f"define sf_{tag}_{role}",
            )
    dy, dx = decl.names["y"], decl.names["x"]
    ranges: _Ranges = {}
    settings = _settings(decl, pkg, values, file, methods, ranges)
    method = methods[settings.method]
    y_areas, x_areas = _areas(dy, pkg, file), _areas(dx, pkg, file)
    last = _last_row(y_areas + x_areas, values)
    y_areas, x_areas = _trim(y_areas, last), _trim(x_areas, last)
    _refuse_unsaved("y", dy, y_areas, values, file)
    _refuse_unsaved("x", dx, x_areas, values, file)
    if len(y_areas) != 1 or y_areas[0].n_cols != 1:
        raise DataError(
            "the response must be one column", Context(file, dy.name, y_areas[0].sheet,
                                                       y_areas[0].a1()),
            hint="point sf_..._y at a single column",
        )
    ya = y_areas[0]
    ranges["y"], ranges["x"] = (dy.name, [ya]), (dx.name, x_areas)
    for a in x_areas:
        if a.n_rows != ya.n_rows:
            raise DataError(
                f"x has {a.n_rows} rows in {a.a1()} but y has {ya.n_rows} in {ya.a1()}",
                Context(file, dx.name, a.sheet, a.a1()),
                hint="make the y and x ranges cover the same rows",
            )
    y_cols, x_cols = _columns([ya]), _columns(x_areas)
    header = _header(y_cols + x_cols, values)
    offset = 1 if header else 0
    n_rows = ya.n_rows - offset
    ycol = _make_column(ya, ya.col1, header, values, offset)
    xcols = [_make_column(a, c, header, values, offset) for a, c in x_cols]
    _check_headers(xcols, dx, file)
    cat = (text_columns([[values.sheet(c.sheet).get(c.row_of(i), c.col) for i in range(n_rows)]
                         for c in xcols])
           if method.text_attributes else [False] * len(xcols))
    used, left, Y, X, texts = _read_rows(ycol, xcols, n_rows, values, method.labels, cat)
    num = [j for j, t in enumerate(cat) if not t]
    keep, left = _leave_out_totals(ycol, used, left, Y, X[:, num], method.labels,
                                   len(num) < len(cat))
    used, Y, X = used[keep], Y[keep], X[keep]
    texts = {j: [t for t, k in zip(col, keep) if k] for j, col in texts.items()}
    ctx = Context(file, dy.name, ycol.sheet, cell_ref(ycol.first_row, ycol.col))
    most = method.max_attributes
    if most is not None and len(xcols) > most:
        raise DataError(
            f"a {method.title} uses {'one attribute' if most == 1 else f'{most} attributes'}"
            f", x has {len(xcols)}",
            Context(file, dx.name), hint="declare fewer x columns for this model",
        )
    if n_rows == 0:
        raise DataError(
            "the declared ranges hold no data rows yet", ctx,
            hint="type or paste your rows under the headers",
        )
    _check_numeric_columns([c for c, t in zip(xcols, cat) if not t], n_rows, values, dx, file)
    if len(used) == 0:
        raise DataError(
            f"no rows with numbers in both y and x ({len(left)} rows, all left out)", ctx,
            hint="fill in the data or point the names at it",
        )
    codings: dict[int, Coding] = {}
    source = xcols
    if any(cat):
        where = Context(file, decl.names["opts"].name if "opts" in decl.names else dx.name)
        coded = code_levels([xcols[j].name for j in texts], list(texts.values()),
                            settings.values.get("baseline"), where)
        codings = dict(zip(texts, coded, strict=True))
        xcols, X = _expand(xcols, X, texts, codings)
    elif settings.values.get("baseline") is not None:
        code_levels([], [], settings.values.get("baseline"), Context(file, dx.name))
    new = (_read_new(decl, pkg, values, file, source, ranges, codings) if "new" in decl.names
           else None)
    if "newkey" in decl.names and new is None:
        raise DeclarationError(
            f"model '{tag}' names identifiers of new rows but declares no new rows",
            Context(file, decl.names["newkey"].name), hint=f"define sf_{tag}_new or drop the name",
        )
    keys = (_read_keys(decl.names["key"], pkg, values, file, ya, header, ranges)
            if "key" in decl.names else None)
    rule = _read_rule(decl.names["rule"], pkg, values, file) if "rule" in decl.names else None
    if "rule" in decl.names:
        ranges["rule"] = (decl.names["rule"].name, _areas(decl.names["rule"], pkg, file))
    if rule is not None and not method.compares_rule:
        raise DeclarationError(
            f"a {method.title} model has no coefficients to compare with a rule",
            Context(file, rule.name), hint="declare the rule on a least-squares model")
    names = {role: d.name for role, d in decl.names.items()}
    model = ModelData(tag, file, settings, ycol, xcols, n_rows, used, left, Y, X, new, names,
                      keys, rule, baselines={c.name: c.baseline for c in codings.values()},
                      level_counts={c.name: dict(c.counts) for c in codings.values()})
    if method.check is not None:
        method.check(model)
    used_settings = settings_text(settings.values, ["method"] + [r.name for r in method.rules])
    model.record = record_inputs(tag, ranges, values, used_settings, INPUT_ROLES)
    return model


def _check_numeric_columns(xcols: list[Column], n_rows: int, values: BookValues,
                           dx: DefinedName, file: str) -> None:
    """An attribute column without a single number is a declaration mistake, not data."""
    for c in xcols:
        sv = values.sheet(c.sheet)
        kinds = [sv.get(c.row_of(i), c.col) for i in range(n_rows)]
        if not any(v.kind == NUMBER for v in kinds):
            first = next((v for v in kinds if v.kind != BLANK), None)
            what = describe_value(first) if first else "only blanks"
            raise DataError(
                f"attribute '{clip(c.name)}' holds no numbers ({what} ...); distances and "
                "fits need numeric attributes",
                Context(file, dx.name, c.sheet, c.span(0, n_rows - 1)),
                hint="code the attribute as numbers or leave it out of x",
            )


def _make_column(a: Area, col: int, header: bool, values: BookValues, offset: int) -> Column:
    name = values.sheet(a.sheet).get(a.row1, col).text.strip() if header else col_letter(col)
    fmt = amount_format(values.number_format(a.sheet, a.row1 + offset, col))
    return Column(name, a.sheet, col, a.row1 + offset, fmt=fmt)


def _check_headers(cols: list[Column], d: DefinedName, file: str) -> None:
    seen: dict[str, Column] = {}
    for c in cols:
        key = c.name.casefold()
        if key in seen:
            first = seen[key]
            raise DataError(
                f"two attribute columns are both called '{clip(c.name)}' "
                f"({cell_ref(first.first_row - 1, first.col)} and "
                f"{cell_ref(c.first_row - 1, c.col)})",
                Context(file, d.name, c.sheet, cell_ref(c.first_row - 1, c.col)),
                hint="give each attribute column its own header",
            )
        seen[key] = c


def _read_rows(
    ycol: Column, xcols: list[Column], n: int, values: BookValues, labels: bool = False,
    text: list[bool] | None = None,
) -> tuple[np.ndarray, list[LeftOut], np.ndarray, np.ndarray, dict[int, list[str]]]:
    """Used row indices, left-out rows, y (floats, or labels when ``labels``), X, levels.

    Attribute j with ``text[j]`` is a text attribute: its X column is nan and the levels
    of the used rows are returned under key j (``declare/levels.py``).
    """
    cols = [ycol] + xcols
    text = text or [False] * len(xcols)
    sheets: list[SheetValues] = [values.sheet(c.sheet) for c in cols]
    data = np.empty((n, len(cols)))
    ylab: list[object] = [None] * n
    levels: list[list[str]] = [[""] * n for _ in xcols]
    ok = np.ones(n, dtype=bool)
    left: list[LeftOut] = []
    for i in range(n):
        for j, (c, sv) in enumerate(zip(cols, sheets)):
            v = sv.get(c.row_of(i), c.col)
            if j == 0 and labels and v.kind in (NUMBER, TEXT) and (v.kind == NUMBER
                                                                   or v.text.strip()):
                ylab[i] = v.number if v.kind == NUMBER else v.text
                data[i, 0] = 0.0
                continue
            if j > 0 and text[j - 1]:
                if is_level(v):
                    levels[j - 1][i] = v.text
                    data[i, j] = np.nan
                    continue
                ok[i] = False
                what = (f"the number {clip(label_text(v.number), 20)}" if v.kind == NUMBER
                        else describe_value(v))
                left.append(LeftOut(i, ycol.row_of(i),
                                    f"{what} in text attribute '{clip(c.name)}' ({c.cell(i)})"))
                break
            if v.kind != NUMBER:
                ok[i] = False
                role = "y" if j == 0 else f"'{clip(c.name)}'"
                left.append(LeftOut(i, ycol.row_of(i),
                                    f"{describe_value(v)} in {role} ({c.cell(i)})"))
                break
            data[i, j] = v.number
    used = np.flatnonzero(ok)
    if labels:
        Y = np.empty(len(used), dtype=object)
        Y[:] = [ylab[i] for i in used]
    else:
        Y = data[used, 0].copy()
    texts = {j: [levels[j][i] for i in used] for j, t in enumerate(text) if t}
    return used, left, Y, data[used, 1:].copy(), texts


def _expand(xcols: list[Column], X: np.ndarray, texts: dict[int, list[str]],
            codings: dict[int, Coding]) -> tuple[list[Column], np.ndarray]:
    """Each text attribute replaced, in place, by its indicator columns."""
    cols: list[Column] = []
    blocks: list[np.ndarray] = []
    for j, c in enumerate(xcols):
        if j in codings:
            cols += [replace(c, name=f"{c.name} = {lv}", level=lv) for lv in codings[j].levels]
            blocks.append(indicators(texts[j], codings[j]))
        else:
            cols.append(c)
            blocks.append(X[:, j:j + 1])
    return cols, np.hstack(blocks)


def _leave_out_totals(
    ycol: Column, used: np.ndarray, left: list[LeftOut], Y: np.ndarray, X: np.ndarray,
    labels: bool, some_text: bool = False,
) -> tuple[np.ndarray, list[LeftOut]]:
    """Which used rows to keep, leaving out rows that look like totals of the rows above.

    Compared: y and every numeric attribute (only the attributes when y holds class
    labels; text attributes never). With a single column to compare, chance equalities
    are too common to call a row a total, so nothing is left out (``sheetfit.fit.totals``
    has the rule). Returns the mask over ``used`` and the left-out list with the totals.
    """
    keep = np.ones(len(used), dtype=bool)
    Z = X if labels else np.column_stack([Y, X])
    if Z.shape[1] < 2 or len(used) == 0:
        return keep, left
    totals = find_totals(Z)
    if not totals:
        return keep, left
    attrs = "every numeric attribute" if some_text else "every attribute"
    what = f"{attrs} equals its sum" if labels else f"y and {attrs} equal their sums"
    left = list(left)
    for t in totals:
        keep[t.row] = False
        r1, r2 = ycol.row_of(int(used[t.first])), ycol.row_of(int(used[t.last]))
        i = int(used[t.row])
        left.append(LeftOut(i, ycol.row_of(i), totals_reason(r1, r2, t, what)))
    left.sort(key=lambda lo: lo.index)
    return keep, left


def _read_new(
    decl: _Decl, pkg: Package, values: BookValues, file: str, xcols: list[Column],
    ranges: _Ranges,
    codings: dict[int, Coding] | None = None,
) -> NewRows:
    """The new rows, their text attributes coded as in the data (``codings`` by x column)."""
    codings = codings or {}
    d = decl.names["new"]
    areas = _areas(d, pkg, file)
    areas = _trim(areas, _last_row(areas, values))
    _refuse_unsaved("the new rows", d, areas, values, file)
    ranges["new"] = (d.name, areas)
    rows = {a.n_rows for a in areas}
    if len(rows) != 1:
        raise DataError("the areas of the new rows have different numbers of rows",
                        Context(file, d.name))
    cols_ac = _columns(areas)
    if len(cols_ac) != len(xcols):
        raise DataError(
            f"new rows have {len(cols_ac)} columns but x has {len(xcols)}",
            Context(file, d.name, areas[0].sheet, areas[0].a1()),
            hint="give the new rows the same columns as x, in the same order",
        )
    header = _header(cols_ac, values)
    offset = 1 if header else 0
    cols = [_make_column(a, c, header, values, offset) for a, c in cols_ac]
    if header:
        for c, xc in zip(cols, xcols):
            if c.name.casefold() != xc.name.casefold():
                raise DataError(
                    f"new-row column '{clip(c.name)}' stands where x has '{clip(xc.name)}'",
                    Context(file, d.name, c.sheet, cell_ref(c.first_row - 1, c.col)),
                    hint="put the new-row columns in the order of x",
                )
    n = rows.pop() - offset
    X = np.empty((n, len(cols)))
    texts: dict[int, list[str]] = {j: [] for j in codings}
    for i in range(n):
        for j, c in enumerate(cols):
            v = values.sheet(c.sheet).get(c.row_of(i), c.col)
            if j in codings:
                texts[j].append(_new_level(v, codings[j], c, i, d, file))
                X[i, j] = np.nan
                continue
            if v.kind != NUMBER:
                raise DataError(
                    f"a new row holds {describe_value(v)} where a number is needed",
                    Context(file, d.name, c.sheet, cell_ref(c.row_of(i), c.col)),
                    hint="fill it in or shorten the range of new rows",
                )
            X[i, j] = v.number
    if n == 0:
        raise DataError("the new rows range holds no rows", Context(file, d.name))
    keys = (_read_keys(decl.names["newkey"], pkg, values, file, areas[0], header, ranges,
                       "newkey") if "newkey" in decl.names else None)
    if codings:
        named = [replace(c, name=xc.name) for c, xc in zip(cols, xcols)]
        cols, X = _expand(named, X, texts, codings)
    return NewRows(cols, X, keys)


def _new_level(v: Value, coding: Coding, c: Column, i: int, d: DefinedName, file: str) -> str:
    """The level a new row's text-attribute cell names; a level the data lack is refused."""
    where = Context(file, d.name, c.sheet, cell_ref(c.row_of(i), c.col))
    known = ", ".join(f"'{clip(t)}'" for t in coding.known())
    if not is_level(v):
        raise DataError(
            f"a new row holds {describe_value(v)} where a level of text attribute "
            f"'{clip(coding.name)}' is needed (known levels: {known})", where,
            hint="type one of the known levels")
    level = coding.match(v.text)
    if level is None:
        raise DataError(
            f"new row level '{clip(v.text)}' of '{clip(coding.name)}' does not occur in the "
            f"rows fitted (known levels: {known}), so the model has no coefficient for it",
            where, hint="levels match exactly, capitals and spaces included; use a known "
            "level or add rows with this level to the data")
    return level


def _read_keys(d: DefinedName, pkg: Package, values: BookValues, file: str, like: Area,
               header: bool, ranges: _Ranges, role: str = "key") -> Keys:
    """Identifier columns that must cover the same sheet rows as ``like`` (y's or new's area).

    Whole columns take the rows of ``like``; the header row, when the model has one,
    names the columns. Any cell content is accepted: identifiers are shown, never fitted.
    """
    areas = [a.with_rows(like.row1, like.row2) if a.whole_columns else a
             for a in _areas(d, pkg, file)]
    for a in areas:
        if (a.row1, a.row2) != (like.row1, like.row2):
            raise DataError(
                f"identifiers in {a.a1()} do not cover the rows of the range they name "
                f"({like.a1()})",
                Context(file, d.name, a.sheet, a.a1()),
                hint="point the identifier name at the same rows as the data it names",
            )
    ranges[role] = (d.name, areas)
    offset = 1 if header else 0
    cols: list[Column] = []
    vals: list[list[KeyValue]] = []
    for a, c in _columns(areas):
        sv = values.sheet(a.sheet)
        name = sv.get(like.row1, c).text.strip() if header else ""
        code = values.number_format(a.sheet, like.row1 + offset, c)
        shown = None if not code or code.strip().lower() in ("general", "@") else code
        col = Column(name or col_letter(c), a.sheet, c, like.row1 + offset, fmt=shown)
        cols.append(col)
        vals.append([_key_value(sv.get(col.row_of(i), c))
                     for i in range(like.n_rows - offset)])
    return Keys(cols, vals)


def _read_rule(d: DefinedName, pkg: Package, values: BookValues, file: str) -> RuleCells:
    """The rule's coefficients: numbers in a column or a row, read in order."""
    cells: list[str] = []
    nums: list[float] = []
    for a in _areas(d, pkg, file):
        if a.whole_columns:
            raise DataError("the rule's coefficients must be a few cells, not whole columns",
                            Context(file, d.name, a.sheet, a.a1()),
                            hint="point the name at the cells holding the rule's coefficients")
        sv = values.sheet(a.sheet)
        for r in range(a.row1, a.row2 + 1):
            for c in range(a.col1, a.col2 + 1):
                v = sv.get(r, c)
                if v.kind != NUMBER:
                    raise DataError(
                        f"the rule's coefficients hold {describe_value(v)} where a number is "
                        "needed", Context(file, d.name, a.sheet, cell_ref(r, c)),
                        hint="give the rule's coefficients as numbers, intercept first")
                cells.append(f"{quote_sheet(a.sheet)}!{cell_ref(r, c)}")
                nums.append(v.number)
    return RuleCells(d.name, cells, np.array(nums))


def _key_value(v: Value) -> KeyValue:
    if v.kind == NUMBER:
        return v.number
    if v.kind == BLANK:
        return None
    return v.text


def _settings(decl: _Decl, pkg: Package, values: BookValues, file: str,
              methods: Mapping[str, MethodSettings], ranges: _Ranges) -> Settings:
    d = decl.names.get("opts")
    if d is None:
        return parse_settings([], Context(file), methods)
    areas = _areas(d, pkg, file)
    areas = _trim(areas, _last_row(areas, values))
    _refuse_unsaved("the settings", d, areas, values, file)
    if len(areas) != 1 or areas[0].n_cols != 2:
        raise DeclarationError(
            "settings must be one range of two columns (setting, value)", Context(file, d.name),
        )
    a = areas[0]
    ranges["opts"] = (d.name, areas)
    sv = values.sheet(a.sheet)
    pairs = []
    for r in range(a.row1, a.row2 + 1):
        key, val = sv.get(r, a.col1), sv.get(r, a.col1 + 1)
        if key.kind == BLANK and val.kind == BLANK:
            continue
        if r == a.row1 and key.text.strip().lower() == "setting" \
                and val.text.strip().lower() == "value":
            continue
        raw: object = val.number if val.kind == NUMBER else val.text
        if key.kind != TEXT or val.kind == BLANK:
            raise DeclarationError(
                "each settings row needs a setting name and a value",
                Context(file, d.name, a.sheet, cell_ref(r, a.col1)),
            )
        pairs.append((key.text, raw, cell_ref(r, a.col1 + 1)))
    return parse_settings(pairs, Context(file, d.name, a.sheet), methods)
