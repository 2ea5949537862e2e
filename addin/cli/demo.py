"""``rootvar demo``: the invented desk's reports, its workbooks built and computed, a refresh."""

from __future__ import annotations

import sys
from pathlib import Path

from rootvar.addin.cli.report import print_report
from rootvar.addin.cli.text import CAUTION
from rootvar.addin.workbooks.demo_desk import DESK_NAME, demo_models
from rootvar.core import __version__

__all__ = ["add_demo_parser", "run_demo"]


def run_demo(args) -> int:
    """Run ``rootvar demo``; returns the exit code."""
    from rootvar.addin.engine import compute_workbook
    from rootvar.addin.workbooks.build import CONTROL, PARAMETER_CHECK, PRICE_TWICE, build_all

    print(f"rootvar {__version__} - {DESK_NAME} (invented demo data)\n")
    for model in demo_models():
        print(f"{model.model_id}  {model.underlying}  spot {model.spot:g}")
        print_report(model.params, args.horizons, args.dt, args.tolerance, sys.stdout)
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


def add_demo_parser(sub, common) -> None:
    """Register ``demo`` on an argparse subparsers object."""
    demo = sub.add_parser(
        "demo", parents=[common], help="report on the invented demo desk and build its workbooks"
    )
    demo.add_argument("--out", default="out", help="folder for the demo workbooks (default out)")
    demo.add_argument("--as-of", default=None, help="as-of date of the control refresh")
    demo.set_defaults(func=run_demo)
