"""``rootvar report``: the variance report of one parameter set."""

from __future__ import annotations

import argparse
import sys

import pandas as pd

from rootvar.addin.cells import PARAM_ORDER
from rootvar.addin.cli.text import CAUTION
from rootvar.addin.cli.types import NO_LIMIT, number, numbers, positive_number
from rootvar.addin.functions import trading_days
from rootvar.core import (
    HestonParams,
    __version__,
    euler_max_step,
    euler_negative_probability,
    euler_worst_case,
    variance_report,
)

__all__ = ["add_report_parser", "print_report", "report_options", "run_report"]

#: What each parameter option means, with its unit and rule.
UNITS = {
    "v0": "initial variance, annualised (0.04 is 20%% volatility), >= 0",
    "kappa": "mean-reversion speed, per year, > 0",
    "theta": "long-run variance, annualised, > 0",
    "vol_of_vol": "volatility of variance, per sqrt(year), > 0 (alias --sigma, --xi, --eta)",
    "rho": "correlation of spot and variance, in [-1, 1]",
}


def report_options() -> argparse.ArgumentParser:
    """The options a variance report reads (horizons, step, tolerance), as a parent parser."""
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
    return common


def print_report(params: HestonParams, horizons, dt: float, tolerance: float, out) -> None:
    """Print the Feller ratio, the Euler risk at ``dt`` (years) and the exact law's table."""
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


def run_report(args) -> int:
    """Run ``rootvar report``; returns the exit code."""
    params = HestonParams(args.v0, args.kappa, args.theta, args.vol_of_vol, args.rho)
    print(f"rootvar {__version__} variance report", file=sys.stdout)
    print_report(params, args.horizons, args.dt, args.tolerance, sys.stdout)
    print(CAUTION)
    return 0


def add_report_parser(sub, common) -> None:
    """Register ``report`` on an argparse subparsers object (``common``: :func:`report_options`)."""
    report = sub.add_parser(
        "report",
        parents=[common],
        help="variance report for one parameter set",
        description="Variance report for one parameter set. The parameters accept the same "
        "labels as a sheet's parameter block: case, spaces, underscores and hyphens are "
        "ignored, and sigma, xi, eta or vol-of-vol all mean vol_of_vol, mean-reversion means "
        "kappa, long-run-variance theta, initial-variance v0, correlation rho.",
    )
    for name in PARAM_ORDER:
        report.add_argument(
            f"--{name.replace('_', '-')}",
            dest=name,
            type=number,
            required=True,
            help=UNITS[name],
        )
    report.set_defaults(func=run_report)
