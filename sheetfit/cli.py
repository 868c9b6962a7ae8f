"""Command line: ``sheetfit refresh BOOK [--out PATH]``.

Exit status 0 on success, 2 when the input is refused (one line on stderr, the
workbook untouched), 1 for an internal fault.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from . import __version__
from .errors import SheetfitError

__all__ = ["main"]

EXIT_OK, EXIT_FAULT, EXIT_REFUSED = 0, 1, 2


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="sheetfit",
        description="Refresh the models declared in a workbook and write back formula sheets.",
    )
    p.add_argument("--version", action="version", version=f"sheetfit {__version__}")
    sub = p.add_subparsers(dest="command", required=True)
    r = sub.add_parser("refresh", help="fit every declared model and rewrite its result sheets")
    r.add_argument("book", help="the .xlsx workbook")
    r.add_argument("--out", metavar="PATH",
                   help="write the refreshed workbook here and leave BOOK untouched")
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    args = _parser().parse_args(argv)
    try:
        if args.command == "refresh":
            from .refresh import refresh

            report = refresh(args.book, args.out)
            print(report.text())
        return EXIT_OK
    except SheetfitError as exc:
        print(f"sheetfit: refused: {exc.render()}", file=sys.stderr)
        return EXIT_REFUSED
    except KeyboardInterrupt:
        print("sheetfit: interrupted; the workbook was not changed", file=sys.stderr)
        return EXIT_FAULT
    except Exception as exc:  # noqa: BLE001 - last line of defence: no traceback for users
        print(f"sheetfit: internal fault ({type(exc).__name__}: {exc}); the workbook was not "
              "changed. Please report this with the file if you can.", file=sys.stderr)
        return EXIT_FAULT


if __name__ == "__main__":
    sys.exit(main())
