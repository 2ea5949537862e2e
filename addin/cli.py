"""The ``rootvar`` command line: ``rootvar demo``, ``rootvar report``, ``rootvar compile``."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

import pandas as pd

from rootvar.core import (
    HestonParams,
    InputError,
    __version__,
    euler_max_step,
    euler_negative_probability,
    variance_report,
)

from .cli_text import CAUTION
from .demo_desk import DESK_NAME, demo_models

#: Exit codes shared by every command (see ``rootvar refresh --help``).
EXIT_INTERNAL, EXIT_INTERRUPTED = 4, 130


def positive_int(text: str) -> int:
    """argparse type: a whole number >= 1."""
    try:
        value = int(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"must be a whole number >= 1, got {text!r}") from exc
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be a whole number >= 1, got {text!r}")
    return value


def non_negative_float(text: str) -> float:
    """argparse type: a finite number >= 0."""
    try:
        value = float(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"must be a number >= 0, got {text!r}") from exc
    if not (value >= 0 and value != float("inf")):
        raise argparse.ArgumentTypeError(f"must be a number >= 0, got {text!r}")
    return value


def _floats(text: str) -> list[float]:
    try:
        return [float(x) for x in text.split(",") if x.strip()]
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"expected comma-separated numbers, got {text!r}") from exc


def _print_report(params: HestonParams, horizons, dt: float, tolerance: float, out) -> None:
    p = params
    table = variance_report(p, horizons, dt=dt)
    neg = euler_negative_probability(p.v0, p.kappa, p.theta, p.vol_of_vol, dt)
    safe = euler_max_step(p.v0, p.kappa, p.theta, p.vol_of_vol, tolerance)
    print(f"  Feller ratio {p.feller_ratio:.4f} ({table.attrs['regime']})", file=out)
    print(f"  Euler one-step negative probability from v0 at dt={dt:.6g} y: {neg:.3e}", file=out)
    safe_text = (
        "any step" if safe == float("inf") else f"{safe:.6g} y ({safe * 252:.3g} trading days)"
    )
    print(f"  Largest Euler step keeping it <= {tolerance:g}: {safe_text}", file=out)
    shown = table.drop(columns=["feller_ratio", "regime"])
    with pd.option_context(
        "display.width", 160, "display.max_columns", 40, "display.float_format", "{:.4g}".format
    ):
        print(shown.T.to_string(), file=out)


def _cmd_report(args) -> int:
    params = HestonParams(args.v0, args.kappa, args.theta, args.vol_of_vol, args.rho)
    print(f"rootvar {__version__} variance report", file=sys.stdout)
    _print_report(params, args.horizons, args.dt, args.tolerance, sys.stdout)
    print(CAUTION)
    return 0


def _cmd_demo(args) -> int:
    from .engine import compute_workbook
    from .workbook_build import CONTROL, PARAMETER_CHECK, PRICE_TWICE, build_all

    print(f"rootvar {__version__} - {DESK_NAME} (invented demo data)\n")
    for model in demo_models():
        print(f"{model.model_id}  {model.underlying}  spot {model.spot:g}")
        _print_report(model.params, args.horizons, args.dt, args.tolerance, sys.stdout)
        print()
    out = Path(args.out)
    build_all(out)
    print(f"Workbooks built in {out.resolve()}:")
    for name in (PARAMETER_CHECK, PRICE_TWICE):
        report = compute_workbook(out / name)
        status = (
            "no cell errors" if not report.error_cells else f"{len(report.error_cells)} cell errors"
        )
        print(
            f"  {name}: {report.formulas} formulas computed headlessly ({status}) -> "
            f"{report.output.name}"
        )
    from .control import refresh, summary_table

    outcome = refresh(out / CONTROL, as_of=args.as_of, workers=2, quiet=True)
    print(
        f"  {CONTROL}: refreshed in place (exit code {outcome.exit_code}); backup "
        f"{outcome.backup.name if outcome.backup else 'none'}"
    )
    print()
    print(summary_table(outcome.rows))
    print()
    print(CAUTION)
    return 0


def _cmd_refresh(args) -> int:
    from .control import EXIT_FILE, ControlError, refresh, summary_table

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


def _cmd_history(args) -> int:
    from .control import ControlError
    from .control.history_export import history_frame, open_history, text_table, write_export

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


def _cmd_build(args) -> int:
    from .workbook_build import build_all

    for path in build_all(Path(args.dir)):
        print(path)
    return 0


def _cmd_compute(args) -> int:
    from .engine import FormulaError, compute_workbook

    try:
        report = compute_workbook(args.workbook, args.out)
    except (FormulaError, OSError, KeyError, ValueError) as exc:
        print(f"rootvar compute: {exc}", file=sys.stderr)
        return 2
    print(f"{report.formulas} formulas computed in {report.passes} passes -> {report.output}")
    for cell, text in report.error_cells:
        print(f"  {cell}: {text}")
    return 3 if report.error_cells else 0


def _cmd_calibrate(args) -> int:
    from .calibrate_command import run_calibrate

    return run_calibrate(args)


def _cmd_compile(args) -> int:
    from rootvar.core import compile_kernels, kernels_cached

    if kernels_cached():
        print("rootvar compile: kernels already compiled for this machine; loading them")
    else:
        print("rootvar compile: compiling the numerical kernels once (up to about a minute)")
    seconds = compile_kernels()
    print(f"rootvar compile: ready in {seconds:.1f} s")
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="rootvar", description=__doc__)
    parser.add_argument("--version", action="version", version=f"rootvar {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)

    common = argparse.ArgumentParser(add_help=False)
    common.add_argument(
        "--horizons",
        type=_floats,
        default=[0.25, 1.0, 5.0],
        help="horizons in years, comma-separated (default 0.25,1,5)",
    )
    common.add_argument(
        "--dt",
        type=float,
        default=1.0 / 252.0,
        help="production Euler step in years (default 1/252)",
    )
    common.add_argument(
        "--tolerance",
        type=float,
        default=1e-3,
        help="acceptable one-step negative probability (default 1e-3)",
    )

    report = sub.add_parser(
        "report", parents=[common], help="variance report for one parameter set"
    )
    for name in ("v0", "kappa", "theta", "vol-of-vol", "rho"):
        report.add_argument(f"--{name}", type=float, required=True)
    report.set_defaults(func=_cmd_report)

    demo = sub.add_parser(
        "demo", parents=[common], help="report on the invented demo desk and build its workbooks"
    )
    demo.add_argument("--out", default="out", help="folder for the demo workbooks (default out)")
    demo.add_argument("--as-of", default=None, help="as-of date of the control refresh")
    demo.set_defaults(func=_cmd_demo)

    build = sub.add_parser("build-workbooks", help="build the shipped workbook templates")
    build.add_argument("--dir", default="workbooks", help="target folder (default workbooks)")
    build.set_defaults(func=_cmd_build)

    compute = sub.add_parser(
        "compute",
        help="compute a workbook's formulas headlessly and save a copy with values",
        description="Exit codes: 0 computed, 3 computed but some cells hold errors, "
        "2 the workbook could not be computed (nothing written).",
    )
    compute.add_argument("workbook")
    compute.add_argument("--out", help="computed copy (default <name>.computed.xlsx beside it)")
    compute.set_defaults(func=_cmd_compute)

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
        help="local worker processes, >= 1 (default: all cores)",
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
    ref.set_defaults(func=_cmd_refresh)

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
    hist.set_defaults(func=_cmd_history)
    from .calibrate_command import add_calibrate_parser

    add_calibrate_parser(sub, _cmd_calibrate)
    comp = sub.add_parser(
        "compile", help="compile the numerical kernels ahead of time (once per machine)"
    )
    comp.set_defaults(func=_cmd_compile)
    return parser


def main(argv=None) -> int:
    """Entry point of the ``rootvar`` console command; returns the exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except InputError as exc:
        print(f"rootvar: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("rootvar: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # a crash must never read as "clear" (0) or "breaches" (1)
        print(f"rootvar: internal error, please report it: {exc!r}", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
