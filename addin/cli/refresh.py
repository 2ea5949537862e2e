"""``rootvar refresh``: the daily control workbook, every model, headless."""

from __future__ import annotations

import argparse
import os
import sys

from rootvar.addin.cli.exits import EXIT_INTERRUPTED
from rootvar.addin.cli.text import CAUTION
from rootvar.addin.cli.types import non_negative_float, positive_int

__all__ = ["add_refresh_parser", "run_refresh"]


def run_refresh(args) -> int:
    """Run ``rootvar refresh``; returns the refresh's exit code."""
    from rootvar.addin.control import EXIT_FILE, ControlError, refresh, summary_table

    try:
        outcome = refresh(
            args.workbook,
            args.as_of,
            args.out,
            args.workers,
            args.scheduler,
            quiet=args.quiet,
            history=args.history,
            wait=args.wait,
        )
    except ControlError as exc:
        print(f"rootvar refresh: {exc}; nothing was written", file=sys.stderr)
        return EXIT_FILE
    except KeyboardInterrupt:
        print("rootvar refresh: interrupted; nothing was written", file=sys.stderr)
        return EXIT_INTERRUPTED
    for note in outcome.notes:
        print(f"rootvar refresh: {note}", file=sys.stderr)
    if not args.quiet:
        print(summary_table(outcome.rows))
        print(
            f"\nwritten to {outcome.output}"
            + (f" (previous file kept as {outcome.backup})" if outcome.backup else "")
            + f"; history recorded in {outcome.store}"
        )
        print(CAUTION)
    return outcome.exit_code


def add_refresh_parser(sub) -> None:
    """Register ``refresh`` on an argparse subparsers object."""
    ref = sub.add_parser(
        "refresh",
        help="refresh the daily control workbook (all models, headless)",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        description="Checks every model of the control workbook, records the rows in the "
        "history store and writes the Results sheet and the History window.",
        epilog="exit codes:\n  0  all clear\n  1  breaches or undecided checks found\n"
        "  2  input, file, lock or store error: nothing was written\n"
        "  3  some rows failed (input errors or failed checks); the rest were written\n"
        "  4  unexpected internal error: nothing was written (please report it)\n"
        "  130  interrupted: nothing was written",
    )
    ref.add_argument("workbook")
    ref.add_argument("--as-of", default=None, help="as-of date, YYYY-MM-DD (default today)")
    ref.add_argument("--out", default=None, help="write here instead of refreshing in place")
    ref.add_argument(
        "--workers",
        type=positive_int,
        default=os.cpu_count() or 1,
        help="local worker processes, a whole number >= 1 (default: all cores)",
    )
    ref.add_argument(
        "--scheduler",
        default=None,
        help="address of a Dask distributed scheduler (needs rootvar[cluster])",
    )
    ref.add_argument(
        "--history",
        default=None,
        help="history store: a SQLAlchemy URL (postgresql+psycopg://...) or a SQLite file "
        "(default: the Settings sheet's 'history store', else NAME.history.sqlite beside it)",
    )
    ref.add_argument(
        "--wait",
        type=non_negative_float,
        default=600.0,
        help="seconds to wait for another refresh of the same workbook (default 600)",
    )
    ref.add_argument("--quiet", action="store_true", help="no progress, no summary (schedulers)")
    ref.set_defaults(func=run_refresh)
