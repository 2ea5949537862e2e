"""``rootvar compute``: a workbook's formulas computed headlessly, saved as a copy with values."""

from __future__ import annotations

import sys

from rootvar.addin.cli.types import NO_LIMIT, path_steps_cap

__all__ = ["add_compute_parser", "run_compute"]


def run_compute(args) -> int:
    """Run ``rootvar compute``; returns the exit code (0, 2 or 3)."""
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


def add_compute_parser(sub) -> None:
    """Register ``compute`` on an argparse subparsers object."""
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
    compute.set_defaults(func=run_compute)
