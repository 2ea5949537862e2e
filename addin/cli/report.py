"""``rootvar report``: the variance report of one parameter set, then one option's Greeks."""

from __future__ import annotations

import argparse
import math
import sys
from dataclasses import dataclass

import pandas as pd

from rootvar.addin.cells import PARAM_ORDER
from rootvar.addin.cli.text import CAUTION
from rootvar.addin.cli.types import NO_LIMIT, number, numbers, positive_number
from rootvar.addin.functions import (
    GREEK_LABELS,
    KINDS,
    MAX_YEARS,
    MIN_MATURITY,
    NOT_CERTIFIED,
    trading_days,
)
from rootvar.core import (
    HestonParams,
    InputError,
    __version__,
    euler_max_step,
    euler_negative_probability,
    euler_worst_case,
    variance_report,
)
from rootvar.core.greeks import GREEK_NAMES, GREEK_UNITS
from rootvar.core.validation import as_float

__all__ = [
    "OptionSpec",
    "add_report_parser",
    "option_spec",
    "print_greeks",
    "print_report",
    "report_options",
    "run_report",
]

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


@dataclass(frozen=True)
class OptionSpec:
    """The European option whose Greeks the report prints (checked by :func:`option_spec`)."""

    spot: float
    strike: float
    maturity: float
    rate: float
    div_yield: float
    kind: str


def option_spec(spot, strike, maturity, rate, div_yield, kind) -> OptionSpec:
    """The report's option from its command-line texts (or numbers), each checked.

    ``strike`` None is at the money.  Raises :class:`rootvar.core.InputError`
    naming the option, the rule and the value, on the ranges the spreadsheet
    cells take, so a bad option is one line and exit code 2 before anything is
    printed.
    """
    s = as_float("--spot", _number("--spot", spot), ">0")
    k = s if strike is None else as_float("--strike", _number("--strike", strike), ">0")
    if not math.exp(-20.0) <= k / s <= math.exp(20.0):  # all intrinsic or worthless beyond
        raise InputError(
            f"--strike / --spot must lie in [{math.exp(-20.0):.3g}, {math.exp(20.0):.3g}], "
            f"got {k / s!r}"
        )
    t = as_float("--maturity", _number("--maturity", maturity), ">0")
    if not MIN_MATURITY <= t <= MAX_YEARS:
        raise InputError(
            f"--maturity must lie in [{MIN_MATURITY:g}, {MAX_YEARS:g}] years, got {t!r}"
        )
    r = as_float("--rate", _number("--rate", rate), "[-1,1]")
    q = as_float("--div-yield", _number("--div-yield", div_yield), "[-1,1]")
    word = str(kind).strip().lower()
    if word not in KINDS:
        raise InputError(f"--kind must be one of {', '.join(KINDS)}, got {kind!r}")
    return OptionSpec(s, k, t, r, q, word)


def _number(option: str, value):
    """A number from an option's text (decimals or fractions, as the other options take)."""
    if not isinstance(value, str):
        return value
    try:
        return number(value)
    except argparse.ArgumentTypeError as exc:
        raise InputError(f"{option} must be a number or a fraction such as 1/252, got "
                         f"{value!r}") from exc  # fmt: skip


def print_greeks(params: HestonParams, option: OptionSpec, out) -> None:
    """Print the option's certified Fourier price and Greeks, each with its unit."""
    from rootvar.addin.functions.greeks import fourier_route
    from rootvar.core import heston_greeks

    o = option
    g = heston_greeks(params, o.spot, o.strike, o.maturity, o.rate, o.div_yield, o.kind)
    print(file=out)
    print(
        f"  Greeks of a European {o.kind}: strike {o.strike:g}, {o.maturity:g} y to expiry, spot "
        f"{o.spot:g}, rate {o.rate:g}, dividend yield {o.div_yield:g} (continuous, per year)",
        file=out,
    )
    print(
        f"  by Fourier (certified, {fourier_route(g)} route; derivatives of the characteristic "
        "function, nothing bumped), each per unit of its input:",
        file=out,
    )
    print(f"    {'':<22}{'value':>14}{'error estimate':>16}  unit", file=out)
    rows = [("price", g.price, g.price_error, "ccy")]
    rows += [(n, g.values[n], g.errors[n], GREEK_UNITS[n]) for n in GREEK_NAMES]
    for name, value, error, unit in rows:
        shown = f"{value:>14.6g}" if math.isfinite(value) else f"{NOT_CERTIFIED:>14}"
        print(f"    {GREEK_LABELS[name]:<22}{shown}{error:>16.1e}  {unit}", file=out)
    print(
        "    vega: sqrt(v0) and sqrt(theta) moved together, per 1.00 (100 vol points) of "
        "volatility; theta: dV/dt, per year",
        file=out,
    )
    for note in g.notes:
        if " not certified: " in note or note.startswith("handed over to COS"):
            print(f"    {note}", file=out)


def run_report(args) -> int:
    """Run ``rootvar report``; returns the exit code."""
    params = HestonParams(args.v0, args.kappa, args.theta, args.vol_of_vol, args.rho)
    option = option_spec(args.spot, args.strike, args.maturity, args.rate, args.div_yield,
                         args.kind)  # fmt: skip
    print(f"rootvar {__version__} variance report", file=sys.stdout)
    print_report(params, args.horizons, args.dt, args.tolerance, sys.stdout)
    print_greeks(params, option, sys.stdout)
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
    # read as texts and checked by option_spec, so a bad value is one line naming it
    greeks = report.add_argument_group(
        "the option whose Greeks follow the variance report (a European, by Fourier)"
    )
    greeks.add_argument(
        "--spot", default="100", help="spot price, in the price's currency, > 0 (default 100)"
    )
    greeks.add_argument(
        "--strike", default=None, help="strike, in the spot's currency, > 0 (default: the "
        "spot, at the money)",
    )  # fmt: skip
    greeks.add_argument(
        "--maturity", default="1", help="time to expiry in years, in [0.001, 100], a number or "
        "a fraction (default 1)",
    )  # fmt: skip
    greeks.add_argument(
        "--rate", default="0", help="continuously compounded rate, a decimal per year, in "
        "[-1, 1] (default 0)",
    )  # fmt: skip
    greeks.add_argument(
        "--div-yield", dest="div_yield", default="0", help="continuous dividend yield, a "
        "decimal per year, in [-1, 1] (default 0)",
    )  # fmt: skip
    greeks.add_argument("--kind", default="call", help="call or put (default call)")
    report.set_defaults(func=run_report)
