"""Command line: ``sheetfit refresh BOOK [--out PATH] [--force] [--backup] [--wait SECONDS]``,
``sheetfit watch PATH [--settle SECONDS] [--backup] [--wait SECONDS]`` (``watch.py``) and
``sheetfit check BOOK [--json]`` (``check.py``; exit 0 all current, 3 not, 2 refused).
``sheetfit serve [--host H] [--port N] [--max-mb M] [--time-limit S]`` (``serve/``).

``BOOK`` may also be a folder or a pattern (``--jobs N``, ``--report PATH``): every book
found is refreshed by a runner (``_runner``: worker processes here, or a Dask cluster with
``--scheduler``), then one table and a count per status are
printed, whichever runner ran; the exit status is the worst book's.

Exit status 0 on success, 2 when the input or the target is refused (one line on stderr,
the workbook untouched), 1 for an internal fault, 130 when stopped by SIGINT (Ctrl-C) and
143 when stopped by SIGTERM (128 + the signal number; the workbook untouched, no
temporary file left).
"""

from __future__ import annotations

import argparse
import shutil
import signal
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from . import __version__
from .batch.discover import is_batch
from .batch.outcome import Outcome
from .errors import SheetfitError
from .stopping import Stopped, stop_signals
from .writer.target import DEFAULT_WAIT

__all__ = ["main"]

#: A batch runner: books, options for ``refresh_one``, a callback per outcome -> outcomes
#: in the order of the books.
Runner = Callable[[Sequence[Path], dict[str, Any], Callable[[Outcome], None] | None],
                  list[Outcome]]

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


def _jobs(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"give 1 or more, not {text}")
    return value


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="sheetfit",
        description="Refresh the models declared in a workbook and write back formula sheets.",
    )
    p.add_argument("--version", action="version", version=f"sheetfit {__version__}")
    sub = p.add_subparsers(dest="command", required=True)
    # options every command that writes a book shares
    writing = argparse.ArgumentParser(add_help=False)
    writing.add_argument("--backup", action="store_true",
                         help="keep the file being replaced beside it as "
                              "NAME.before-refresh.xlsx")
    writing.add_argument("--wait", metavar="SECONDS", type=_seconds, default=DEFAULT_WAIT,
                         help="how long to wait for another sheetfit refreshing the same book "
                              f"(default {DEFAULT_WAIT:g})")
    r = sub.add_parser("refresh", parents=[writing],
                       help="fit every declared model and rewrite its result sheets")
    r.add_argument("book", help="the .xlsx workbook; or a folder (every **/*.xlsx under it) "
                                "or a pattern such as 'month-end/*/costs*.xlsx'")
    r.add_argument("--out", metavar="PATH",
                   help="write the refreshed workbook here and leave BOOK untouched")
    r.add_argument("--force", action="store_true",
                   help="replace the file even when it is read-only or open in a "
                        "spreadsheet program")
    r.add_argument("--jobs", metavar="N", type=_jobs, default=None,
                   help="with a folder or pattern: refresh N books at a time in worker "
                        "processes (default: the number of CPUs; 1 runs them in this process)")
    r.add_argument("--report", metavar="PATH",
                   help="with a folder or pattern: also write the table to PATH "
                        "(.csv or .json)")
    r.add_argument("--scheduler", metavar="ADDRESS",
                   help="refresh on the Dask cluster at ADDRESS (tcp://HOST:8786); BOOK may "
                        "be a folder or a glob, seen at the same path by every worker")
    w = sub.add_parser("watch", parents=[writing],
                       help="refresh declared books each time they are saved")
    w.add_argument("path", help="a workbook, or a folder watched with its subfolders")
    w.add_argument("--settle", metavar="SECONDS", type=_settle, default=1.0,
                   help="how long a saved book must stay unchanged before it is refreshed "
                        "(default 1)")
    c = sub.add_parser("check", help="say whether each model's results still fit the book's "
                                     "current inputs (never writes; exit 3 when any does not)")
    c.add_argument("book", help="the .xlsx workbook")
    c.add_argument("--json", action="store_true", help="print the findings as JSON")
    s = sub.add_parser("serve", help="serve the refresh, inspection and worksheet functions "
                                      "over HTTP on this machine, with a page at /")
    s.add_argument("--host", default="127.0.0.1", help="address to listen on (default "
                   "127.0.0.1: this machine only)")
    s.add_argument("--port", type=_port, default=8765, help="port (default 8765; 0 takes a "
                   "free one, printed at start)")
    s.add_argument("--max-mb", metavar="M", type=_positive, default=200,
                   help="largest request in MB, 1 MB = 1,000,000 bytes (default 200)")
    s.add_argument("--time-limit", metavar="S", type=_positive, default=300,
                   help="longest a request or refresh job may work, in seconds (default 300)")
    return p


def _check(args: argparse.Namespace) -> int:
    """``sheetfit check``: 0 all current, 3 any stale, edited or never refreshed."""
    from .check import check

    found = check(args.book)
    print(found.as_json() if args.json else found.text())
    return found.exit_status


def _port(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a port number: {text!r}") from None
    if not 0 <= value <= 65535:
        raise argparse.ArgumentTypeError(f"give a port from 0 to 65535, not {text}")
    return value


def _positive(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not 0 < value < float("inf"):
        raise argparse.ArgumentTypeError(f"give a number above 0, not {text}")
    return value


def _refused(text: str) -> int:
    print(f"sheetfit: refused: {text}", file=sys.stderr)
    return EXIT_REFUSED


def _runner(args: argparse.Namespace) -> Runner:
    """The one call that refreshes the books of a batch; everything around it is shared."""
    if args.scheduler:
        from .batch.cluster import run_on_cluster

        return lambda books, options, on_done: run_on_cluster(books, args.scheduler, options,
                                                              on_done)
    from .batch.local import default_jobs, run_local

    jobs = args.jobs or default_jobs()
    return lambda books, options, on_done: run_local(books, jobs, options, on_done)


def _batch(args: argparse.Namespace) -> int:
    """Refresh every book of a folder or pattern; print the table; the worst book's status."""
    from .batch.discover import discover
    from .batch.outcome import worst_exit
    from .batch.progress import progress
    from .batch.table import common_root, counts, report_kind, table, write_report

    if args.out is not None:
        return _refused(f"--out writes one workbook; {args.book} names several books, "
                        "which are refreshed in place (drop --out)")
    if args.report is not None and report_kind(args.report) is None:
        return _refused(f"--report {args.report}: give a path ending in .csv or .json")
    books = [Path(args.book)] if Path(args.book).is_file() else discover(args.book)
    if not books:
        return _refused(f"{args.book}: no workbooks found (a folder is searched for "
                        "**/*.xlsx; side files, backups and hidden files are left out)")
    options = {"force": args.force, "backup": args.backup, "wait": args.wait}
    done: list[Outcome] = []
    try:
        with progress(len(books)) as advance:
            def on_done(outcome: Outcome) -> None:
                done.append(outcome)
                advance(outcome)

            outcomes = _runner(args)(books, options, on_done)
    except (Stopped, KeyboardInterrupt) as exc:
        signum = exc.signum if isinstance(exc, Stopped) else signal.SIGINT
        print(f"sheetfit: stopped by {signal.Signals(signum).name} after {len(done)} of "
              f"{len(books)} books; each book is as it was or completely refreshed",
              file=sys.stderr)
        return _stopped_status(signum)
    root = Path(args.book) if Path(args.book).is_dir() else common_root(books)
    print(table(outcomes, shutil.get_terminal_size((100, 24)).columns, root))
    print(counts(outcomes))
    status = worst_exit(outcomes)
    if args.report is not None:
        try:
            write_report(args.report, outcomes)
        except OSError as exc:
            _refused(f"--report {args.report}: cannot write it ({exc.strerror or exc})")
            status = status or EXIT_REFUSED
    return status


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    args = _parser().parse_args(argv)
    if args.command == "watch":  # until SIGINT or SIGTERM: 130 or 143, as below
        from .watch import command

        return command(args.path, settle=args.settle, backup=args.backup, wait=args.wait)
    if args.command == "serve":  # until SIGINT or SIGTERM: 130 or 143
        from .serve.command import command as serve

        return serve(args.host, args.port, args.max_mb, args.time_limit)
    try:
        with stop_signals():
            if args.command == "check":
                return _check(args)
            if args.command == "refresh" and (is_batch(args.book) or args.scheduler):
                return _batch(args)  # a folder or pattern, here or on a Dask cluster
            if args.command == "refresh" and args.report is not None:
                return _refused("--report is for a folder or pattern of books; "
                                f"{args.book} is one book")
            if args.command == "refresh":
                from .batch.progress import phases
                from .refresh import refresh

                with phases(args.book) as on_phase:
                    report = refresh(args.book, args.out, force=args.force, backup=args.backup,
                                     wait=args.wait, on_phase=on_phase)
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
