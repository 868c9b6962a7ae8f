"""Workbook packages: read a user's package, graft owned sheets back into it."""

from sheetfit.book.package import DefinedName, Package, SheetEntry, open_package

__all__ = ["DefinedName", "Package", "SheetEntry", "open_package"]
