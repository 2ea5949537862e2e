"""The ``rootvar`` command line: the top parser, one entry per command, and the exit codes.

Each command lives in its own module with its own parser function
(``report``, ``demo``, ``build_workbooks``, ``compute``, ``refresh``,
``history``, ``calibrate``, ``compile``); this module assembles them.  The
console script enters through :mod:`rootvar.addin.cli.launch`, whose guard turns
any failure to import this module into one line and exit code 4.
"""

from __future__ import annotations

import argparse
import re
import sys

from rootvar.addin.cells import parameter_name
from rootvar.addin.cli.build_workbooks import add_build_parser
from rootvar.addin.cli.calibrate import add_calibrate_parser
from rootvar.addin.cli.compile import add_compile_parser
from rootvar.addin.cli.compute import add_compute_parser
from rootvar.addin.cli.demo import add_demo_parser
from rootvar.addin.cli.exits import (
    EXIT_INTERNAL,
    EXIT_INTERRUPTED,
    EXIT_PIPE,
    crash_line,
    quiet_pipe,
)
from rootvar.addin.cli.history import add_history_parser
from rootvar.addin.cli.refresh import add_refresh_parser
from rootvar.addin.cli.report import add_report_parser, report_options
from rootvar.core import InputError, __version__

__all__ = ["build_parser", "main"]

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


def _parameter_aliases(argv: list[str]) -> list[str]:
    """Parameter options spelt as on a sheet (``--sigma``, ``--vol_of_vol``) in one spelling."""
    out = []
    for arg in argv:
        match = re.fullmatch(r"--([A-Za-z][\w\-. ]*)(=.*)?", arg)
        name = parameter_name(match.group(1)) if match else None
        out.append(f"--{name.replace('_', '-')}{match.group(2) or ''}" if name else arg)
    return out


def build_parser() -> argparse.ArgumentParser:
    """The ``rootvar`` parser with every command registered, in the order its help lists them."""
    parser = argparse.ArgumentParser(
        prog="rootvar",
        description="Heston/CIR variance checks, Fourier and Monte Carlo prices, and workbook "
        "controls.",
        epilog=COMMANDS_TEXT,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"rootvar {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    common = report_options()
    add_report_parser(sub, common)
    add_demo_parser(sub, common)
    add_build_parser(sub)
    add_compute_parser(sub)
    add_refresh_parser(sub)
    add_history_parser(sub)
    add_calibrate_parser(sub)
    add_compile_parser(sub)
    return parser


def main(argv=None) -> int:
    """Run one ``rootvar`` command; returns the exit code."""
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
