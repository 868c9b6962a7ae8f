"""sheetfit: refresh models declared in a workbook, written back as checkable formula sheets."""

__version__ = "0.1.0"

__all__ = ["__version__"]
