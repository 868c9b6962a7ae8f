"""Command line: ``sheetfit refresh BOOK [--out PATH] [--force] [--backup] [--wait SECONDS]``
and ``sheetfit watch PATH [--settle SECONDS] [--backup] [--wait SECONDS]`` (``watch.py``).

Exit status 0 on success, 2 when the input or the target is refused (one line on stderr,
the workbook untouched), 1 for an internal fault, 130 when stopped by SIGINT (Ctrl-C) and
143 when stopped by SIGTERM (128 + the signal number; the workbook untouched, no
temporary file left).
"""

from __future__ import annotations

import argparse
import signal
import sys
from collections.abc import Sequence

from . import __version__
from .errors import SheetfitError
from .stopping import Stopped, stop_signals
from .writer.target import DEFAULT_WAIT

__all__ = ["main"]

EXIT_OK, EXIT_FAULT, EXIT_REFUSED = 0, 1, 2


def _stopped_status(signum: int) -> int:
    """The shell's convention: 128 + the signal number (130 for SIGINT, 143 for SIGTERM)."""
    return 128 + signum


def _seconds(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number of seconds: {text!r}") from None
    if not 0 <= value <= 24 * 3600:
        raise argparse.ArgumentTypeError(f"give 0 to 86400 seconds, not {text}")
    return value


def _settle(text: str) -> float:
    value = _seconds(text)
    if value < 0.05:
        raise argparse.ArgumentTypeError(f"give at least 0.05 seconds, not {text}")
    return value


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
    r.add_argument("--force", action="store_true",
                   help="replace the file even when it is read-only or open in a "
                        "spreadsheet program")
    r.add_argument("--backup", action="store_true",
                   help="keep the file being replaced beside it as NAME.before-refresh.xlsx")
    r.add_argument("--wait", metavar="SECONDS", type=_seconds, default=DEFAULT_WAIT,
                   help="how long to wait for another sheetfit refreshing the same book "
                        f"(default {DEFAULT_WAIT:g})")
    r.add_argument("--scheduler", metavar="ADDRESS",
                   help="refresh on the Dask cluster at ADDRESS (tcp://HOST:8786); BOOK may "
                        "be a folder or a glob, seen at the same path by every worker")
    w = sub.add_parser("watch", help="refresh declared books each time they are saved")
    w.add_argument("path", help="a workbook, or a folder watched with its subfolders")
    w.add_argument("--settle", metavar="SECONDS", type=_settle, default=1.0,
                   help="how long a saved book must stay unchanged before it is refreshed "
                        "(default 1)")
    w.add_argument("--backup", action="store_true",
                   help="keep the file being replaced beside it as NAME.before-refresh.xlsx")
    w.add_argument("--wait", metavar="SECONDS", type=_seconds, default=DEFAULT_WAIT,
                   help="how long to wait for another sheetfit refreshing the same book "
                        f"(default {DEFAULT_WAIT:g})")
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    args = _parser().parse_args(argv)
    if args.command == "watch":  # until SIGINT or SIGTERM: 130 or 143, as below
        from .watch import command

        return command(args.path, settle=args.settle, backup=args.backup, wait=args.wait)
    try:
        with stop_signals():
            if args.command == "refresh" and args.scheduler:  # a batch on a Dask cluster
                from .batch.cluster import main_on_cluster
                return main_on_cluster(args)
            if args.command == "refresh":
                from .refresh import refresh

                report = refresh(args.book, args.out, force=args.force, backup=args.backup,
                                 wait=args.wait)
                print(report.text())
        return EXIT_OK
    except SheetfitError as exc:
        print(f"sheetfit: refused: {exc.render()}", file=sys.stderr)
        return EXIT_REFUSED
    except (Stopped, KeyboardInterrupt) as exc:
        signum = exc.signum if isinstance(exc, Stopped) else signal.SIGINT
        name = signal.Signals(signum).name
        print(f"sheetfit: stopped by {name}; the workbook was not changed", file=sys.stderr)
        return _stopped_status(signum)
    except Exception as exc:  # noqa: BLE001 - last line of defence: no traceback for users
        print(f"sheetfit: internal fault ({type(exc).__name__}: {exc}); the workbook was not "
              "changed. Please report this with the file if you can.", file=sys.stderr)
        return EXIT_FAULT


if __name__ == "__main__":
    sys.exit(main())
