"""The one exception module: refusals of bad input, internal faults, numerical cautions.

Every refusal carries its context (file, defined name, sheet, cell) so the message
a user reads names where the problem is and what to do. The CLI turns a
``SheetfitError`` into exit status 2 and one line on stderr; anything else is an
internal fault (exit status 1).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "BookBusyError",
    "BootstrapCaution",
    "CollinearError",
    "ConditioningCaution",
    "Context",
    "DataError",
    "DeclarationError",
    "ExtrapolationCaution",
    "FewRowsLevelCaution",
    "NoModelsError",
    "OutputError",
    "PackageError",
    "SettingError",
    "SheetfitCaution",
    "SheetfitError",
]


#: Longest message and hint a refusal line carries (user text is clipped before, see words.clip).
_MESSAGE_LIMIT = 400
_HINT_LIMIT = 200


def _one_line(text: str, limit: int) -> str:
    one = " ".join(text[: 2 * limit].split()) if not text.isprintable() else text
    return one if len(one) <= limit else one[: limit - 1] + "…"


@dataclass(frozen=True)
class Context:
    """Where a problem is: file, defined name, sheet and cell (each optional)."""

    file: str | None = None
    name: str | None = None
    sheet: str | None = None
    cell: str | None = None

    def describe(self) -> str:
        parts = []
        if self.file:
            parts.append(self.file)
        if self.name:
            parts.append(f"name {self.name}")
        if self.sheet is not None:
            where = f"sheet '{self.sheet}'"
            if self.cell:
                where += f" cell {self.cell}"
            parts.append(where)
        elif self.cell:
            parts.append(f"cell {self.cell}")
        return ", ".join(parts)


class SheetfitError(Exception):
    """Base of every refusal: the input cannot be used as it is."""

    def __init__(self, message: str, context: Context | None = None, hint: str | None = None,
                 *, column: int | None = None):
        self.message = message
        self.context = context or Context()
        self.hint = hint
        #: For a refusal of the numbers themselves: which attribute column (0-based) it
        #: concerns, so the layer that knows the cells can name them.
        self.column = column
        super().__init__(self.render())

    def render(self) -> str:
        """The one line a user reads: where, what, and what to do.

        User text is clipped where a message quotes it; as a last guard, the message
        and the hint are each kept to one line of bounded length here too.
        """
        where = self.context.describe()
        message = _one_line(self.message, _MESSAGE_LIMIT)
        text = f"{where}: {message}" if where else message
        if self.hint:
            text += f" — {_one_line(self.hint, _HINT_LIMIT)}"
        return text

    def with_context(self, context: Context) -> SheetfitError:
        """The same refusal (same class, message and hint) at another place."""
        new = type(self).__new__(type(self))
        SheetfitError.__init__(new, self.message, context, self.hint, column=self.column)
        return new

    def with_file(self, file: str) -> SheetfitError:
        """Return the same refusal with the file name filled in (if missing)."""
        if self.context.file:
            return self
        c = self.context
        return self.with_context(Context(file, c.name, c.sheet, c.cell))


class DeclarationError(SheetfitError, LookupError):
    """A defined name is missing, malformed, points nowhere, or collides with an owned name."""


class DataError(SheetfitError, ValueError):
    """The declared cells cannot be fitted: lengths differ, too few rows, constant columns..."""


class SettingError(SheetfitError, ValueError):
    """A setting in an ``opts`` range is unknown or has a value outside what is allowed."""


class PackageError(SheetfitError, OSError):
    """The workbook file cannot be read or written as an xlsx package."""


class OutputError(SheetfitError, OSError):
    """The refreshed workbook cannot be written where asked: a read-only or open workbook,
    a missing or read-only folder, a folder given as the file, another refresh of the same
    book under way, or the operating system refusing the write."""


class NoModelsError(DeclarationError):
    """The workbook declares no models (a batch run skips such books and counts them)."""


class BookBusyError(OutputError):
    """The workbook is held: open in a spreadsheet program, or being refreshed by another
    sheetfit (a batch run skips such books and says why)."""


class CollinearError(DataError):
    """The design matrix is rank deficient; names the attributes involved."""


class SheetfitCaution(UserWarning):
    """Base of numerical cautions collected during a refresh and shown on the index sheet."""


class ExtrapolationCaution(SheetfitCaution):
    """Rows to predict lie outside the range of the data the model was fitted on.

    ``rows`` holds their 0-based positions among the rows predicted, so the layer that
    knows the cells can name them.
    """

    def __init__(self, message: str, rows: list[int]):
        super().__init__(message)
        self.rows = rows


class ConditioningCaution(SheetfitCaution):
    """The attributes are nearly collinear; coefficients are sensitive to small data changes."""


class BootstrapCaution(SheetfitCaution):
    """Many bootstrap resamples could not be refitted and were skipped."""


class FewRowsLevelCaution(SheetfitCaution):
    """A level of a text attribute has very few rows: its indicator's coefficient is fragile."""
