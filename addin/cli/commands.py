"""The ``rootvar`` command line."""

from __future__ import annotations

import argparse
import os
import re
import sys
from pathlib import Path

import pandas as pd

from rootvar.addin.cells import PARAM_ORDER, parameter_name
from rootvar.addin.cli.launch import crash_line, quiet_pipe
from rootvar.addin.cli.text import CAUTION
from rootvar.addin.cli.types import (
    NO_LIMIT,
    number,
    numbers,
    path_steps_cap,
    positive_int,
    positive_number,
)
from rootvar.addin.functions import trading_days
from rootvar.addin.workbooks.demo_desk import DESK_NAME, demo_models
from rootvar.core import (
    HestonParams,
    InputError,
    __version__,
    euler_max_step,
    euler_negative_probability,
    euler_worst_case,
    variance_report,
)

#: Exit codes shared by every command (see ``rootvar refresh --help``).
EXIT_INTERNAL, EXIT_INTERRUPTED = 4, 130


def non_negative_float(text: str) -> float:
    """argparse type: a finite number >= 0."""
    try:
        value = float(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"must be a number >= 0, got {text!r}") from exc
    if not (value >= 0 and value != float("inf")):
        raise argparse.ArgumentTypeError(f"must be a number >= 0, got {text!r}")
    return value


COMMANDS_TEXT = """commands:
  report            variance report for one parameter set (Feller ratio, Euler risk, exact law)
  demo              report on the invented demo desk, then build and compute its workbooks
  build-workbooks   build the shipped workbook templates
  compute           compute a workbook's formulas headlessly and save a copy with values
  refresh           refresh the daily control workbook (all models, headless)
  history           show or export the control history store, with a trend chart
  calibrate         calibrate Heston to a quotes file, free and with Feller enforced
  compile           compile the numerical kernels ahead of time (once per machine)

Run "rootvar COMMAND --help" for the options of one command."""


def _print_report(params: HestonParams, horizons, dt: float, tolerance: float, out) -> None:
    p = params
    table = variance_report(p, horizons, dt=dt)
    neg = euler_negative_probability(p.v0, p.kappa, p.theta, p.vol_of_vol, dt)
    safe = euler_max_step(p.v0, p.kappa, p.theta, p.vol_of_vol, tolerance)
    print(f"  Feller ratio {p.feller_ratio:.4f} ({table.attrs['regime']})", file=out)
    worst, level = euler_worst_case(p.kappa, p.theta, p.vol_of_vol, dt)
    step = f"dt={dt:.6g} y ({trading_days(dt)})"
    print(f"  Euler one-step negative probability from v0 at {step}: {neg:.3e}", file=out)
    where = "as v grows without bound" if level == float("inf") else f"at v* = {level:.4g}"
    print(f"  Euler worst case over all variance levels at {step}: {worst:.3e} {where}", file=out)
    safe_text = NO_LIMIT if safe == float("inf") else f"{safe:.6g} y ({trading_days(safe)})"
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
    from rootvar.addin.engine import compute_workbook
    from rootvar.addin.workbooks.build import CONTROL, PARAMETER_CHECK, PRICE_TWICE, build_all

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
    from rootvar.addin.control import refresh, summary_table

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


def _cmd_history(args) -> int:
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


def _cmd_build(args) -> int:
    from rootvar.addin.workbooks.build import build_all

    for path in build_all(Path(args.dir)):
        print(path)
    return 0


def _cmd_compute(args) -> int:
    from rootvar.addin.engine import FormulaError, WorkbookFileError, compute_workbook

    try:
        report = compute_workbook(args.workbook, args.out, args.max_path_steps)
    except (FormulaError, WorkbookFileError) as exc:
        print(f"rootvar compute: {exc}; nothing was written", file=sys.stderr)
        return 2
    print(f"{report.formulas} formulas computed in {report.passes} passes -> {report.output}")
    if report.unsupported:
        print(f"{len(report.unsupported)} cells use functions or syntax the engine cannot compute:")
        for _cell, text in report.unsupported:
            print(f"  {text}")
    others = [(c, t) for c, t in report.error_cells if (c, t) not in report.unsupported]
    if others:
        print(f"{len(others)} cells hold error texts:")
        for cell, text in others:
            print(f"  {cell}: {text}")
    return 3 if report.error_cells else 0


def _cmd_calibrate(args) -> int:
    from rootvar.addin.cli.calibrate import run_calibrate

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


def _parameter_aliases(argv: list[str]) -> list[str]:
    """Parameter options spelt as on a sheet (``--sigma``, ``--vol_of_vol``) in one spelling."""
    out = []
    for arg in argv:
        match = re.fullmatch(r"--([A-Za-z][\w\-. ]*)(=.*)?", arg)
        name = parameter_name(match.group(1)) if match else None
        out.append(f"--{name.replace('_', '-')}{match.group(2) or ''}" if name else arg)
    return out


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="rootvar",
        description="Heston/CIR variance checks, Fourier and Monte Carlo prices, and workbook "
        "controls.",
        epilog=COMMANDS_TEXT,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"rootvar {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    common = argparse.ArgumentParser(add_help=False)
    common.add_argument(
        "--horizons",
        type=numbers,
        default=[0.25, 1.0, 5.0],
        help="horizons in years, comma-separated, fractions allowed (default 0.25,1,5)",
    )
    common.add_argument(
        "--dt",
        type=positive_number,
        default=1.0 / 252.0,
        help="production Euler step in years, a number or a fraction (default 1/252, one "
        "trading day)",
    )
    common.add_argument(
        "--tolerance",
        type=number,
        default=1e-3,
        help="acceptable one-step negative probability, a probability in (0, 1) (default 1e-3)",
    )

    report = sub.add_parser(
        "report",
        parents=[common],
        help="variance report for one parameter set",
        description="Variance report for one parameter set. The parameters accept the same "
        "labels as a sheet's parameter block: case, spaces, underscores and hyphens are "
        "ignored, and sigma, xi, eta or vol-of-vol all mean vol_of_vol, mean-reversion means "
        "kappa, long-run-variance theta, initial-variance v0, correlation rho.",
    )
    units = {
        "v0": "initial variance, annualised (0.04 is 20%% volatility), >= 0",
        "kappa": "mean-reversion speed, per year, > 0",
        "theta": "long-run variance, annualised, > 0",
        "vol_of_vol": "volatility of variance, per sqrt(year), > 0 (alias --sigma, --xi, --eta)",
        "rho": "correlation of spot and variance, in [-1, 1]",
    }
    for name in PARAM_ORDER:
        report.add_argument(
            f"--{name.replace('_', '-')}",
            dest=name,
            type=number,
            required=True,
            help=units[name],
        )
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
    compute.add_argument(
        "--max-path-steps",
        type=path_steps_cap,
        default=None,
        metavar="N",
        help="cap on one cell's Monte Carlo work, in path-steps (paths x steps), or "
        f"{NO_LIMIT} (default {NO_LIMIT}; a spreadsheet program applies 50,000,000)",
    )
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
    from rootvar.addin.cli.calibrate import add_calibrate_parser

    add_calibrate_parser(sub, _cmd_calibrate)
    comp = sub.add_parser(
        "compile", help="compile the numerical kernels ahead of time (once per machine)"
    )
    comp.set_defaults(func=_cmd_compile)
    return parser


#: Exit code when the reader of our output went away (128 + SIGPIPE, as a shell reports it).
EXIT_PIPE = 141


def main(argv=None) -> int:
    """Entry point of the ``rootvar`` console command; returns the exit code."""
    parser = build_parser()
    argv = list(sys.argv[1:] if argv is None else argv)
    args = parser.parse_args(_parameter_aliases(argv))
    try:
        code = args.func(args)
        sys.stdout.flush()
        return code
    except InputError as exc:
        print(f"rootvar: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        quiet_pipe()  # `rootvar report ... | head`: the reader has what it wanted
        return EXIT_PIPE
    except KeyboardInterrupt:
        print("rootvar: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # a crash must never read as "clear" (0) or "breaches" (1)
        print(f"rootvar: internal error, please report it: {crash_line(exc)}", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
