"""Reading a user's package: the package view (sheets, defined names, rels) and cell values.

Nothing here writes; the writer (``sheetfit.writer``) may use this package model,
never the other way round.
"""

from sheetfit.reader.package import DefinedName, Package, SheetEntry, open_package

__all__ = ["DefinedName", "Package", "SheetEntry", "open_package"]
