"""``rootvar history``: the control history store shown or exported, with a trend chart."""

from __future__ import annotations

import sys
from pathlib import Path

__all__ = ["add_history_parser", "run_history"]


def run_history(args) -> int:
    """Run ``rootvar history``; returns the exit code (0 or 2)."""
    from rootvar.addin.control import ControlError
    from rootvar.addin.control.history_export import (
        history_frame,
        open_history,
        text_table,
        write_export,
    )

    try:
        store, book = open_history(args.source, args.book)
        frame = history_frame(store, book, args.model, args.since)
        store.dispose()
        if args.out:
            out = Path(args.out)
            if not out.parent.is_dir():
                raise ControlError(f"--out folder {out.parent} does not exist")
            write_export(frame, out, by_option=args.model is not None)
            print(f"{len(frame)} rows written to {out}")
        else:
            print(text_table(frame))
    except ControlError as exc:
        print(f"rootvar history: {exc}", file=sys.stderr)
        return 2
    except OSError as exc:
        print(f"rootvar history: {exc.filename or ''}: {exc.strerror or exc}", file=sys.stderr)
        return 2
    return 0


def add_history_parser(sub) -> None:
    """Register ``history`` on an argparse subparsers object."""
    hist = sub.add_parser(
        "history",
        help="show or export the control history store, with a trend chart",
        description="Rows of the history store of a control workbook (or of a store URL). "
        "With --out FILE.xlsx a Trend sheet charts MC minus Fourier in vol bp per model "
        "(per option with --model).",
    )
    hist.add_argument("source", help="control workbook, SQLite store file or store URL")
    hist.add_argument("--book", default=None, help="book name in a shared store")
    hist.add_argument("--model", default=None, help="one model id")
    hist.add_argument("--since", default=None, help="first as-of date, YYYY-MM-DD")
    hist.add_argument("--out", default=None, help="FILE.csv or FILE.xlsx (default: print)")
    hist.set_defaults(func=run_history)
