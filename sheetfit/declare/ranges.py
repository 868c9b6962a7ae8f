"""From defined names to the areas they declare: which models, which roles, which cells.

Collects the ``sf_<model>_<role>`` names of a book, turns each into areas of worksheet
cells (refusing other workbooks, chart sheets, result sheets), trims whole columns at
the last used row, refuses formula cells without a saved result, and tells whether a
range starts with a header row.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ..a1 import cell_ref
from ..errors import Context, DataError, DeclarationError
from ..owned import INPUT_ROLES, MAX_TAG, OUTPUT_ROLES, is_ours, split_name
from ..reader.package import DefinedName, Package
from ..reader.values import TEXT, BookValues
from ..words import clip, plural
from .refs import Area, RefError, parse_areas

__all__ = [
    "LISTED",
    "Decl",
    "Ranges",
    "areas_of",
    "collect",
    "columns_of",
    "has_header",
    "last_row",
    "refuse_unsaved",
    "trim",
]

#: Declared ranges as read, by role: (defined name, areas after trimming).
Ranges = dict[str, tuple[str, list[Area]]]


@dataclass
class Decl:
    tag: str
    names: dict[str, DefinedName] = field(default_factory=dict)


def collect(pkg: Package, file: str) -> dict[str, Decl]:
    owned = pkg.owned_sheets()
    titles, indices = [s.name for s in owned], {s.index for s in owned}
    decls: dict[str, Decl] = {}
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
        decl = decls.setdefault(tag.casefold(), Decl(tag))
        if role in decl.names:
            raise DeclarationError(
                f"model '{tag}' declares its {role} twice (also as {decl.names[role].name}"
                f"{' on another sheet' if d.local_sheet_id is not None else ''})",
                ctx,
                hint="keep one of the two names",
            )
        decl.names[role] = d
    return decls


def areas_of(d: DefinedName, pkg: Package, file: str) -> list[Area]:
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
LISTED = 5


def refuse_unsaved(role: str, d: DefinedName, areas: list[Area], values: BookValues,
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
    listed = ", ".join(ref for _, ref in cells[:LISTED]) + (", …" if len(cells) > LISTED else "")
    raise DataError(
        f"{plural(len(cells), 'formula cell')} in {role} "
        f"{'has' if len(cells) == 1 else 'have'} no saved result ({listed})",
        Context(file, d.name, cells[0][0], cells[0][1]),
        hint="recalculate and save the book in a spreadsheet application first",
    )


def trim(areas: list[Area], last: int) -> list[Area]:
    return [a.with_rows(1, max(last, 1)) if a.whole_columns else a for a in areas]


def last_row(areas: list[Area], values: BookValues) -> int:
    return max(
        (values.sheet(a.sheet).last_used_row(a.col1, a.col2) for a in areas if a.whole_columns),
        default=0,
    )


def columns_of(areas: list[Area]) -> list[tuple[Area, int]]:
    return [(a, c) for a in areas for c in range(a.col1, a.col2 + 1)]


def has_header(cols: list[tuple[Area, int]], values: BookValues) -> bool:
    return all(values.sheet(a.sheet).get(a.row1, c).kind == TEXT for a, c in cols)

