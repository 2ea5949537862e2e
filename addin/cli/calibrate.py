"""``rootvar calibrate QUOTES.csv --spot S``: fit free and Feller-constrained, print the trade-off.

One module per command: :mod:`rootvar.addin.cli.main` registers this one's parser.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import pandas as pd

from rootvar.addin.cli.text import CAUTION
from rootvar.addin.files import os_cause
from rootvar.core import InputError, StaticArbitrageWarning, calibration_tradeoff

__all__ = ["add_calibrate_parser", "run_calibrate"]

EPILOG = """quotes file (CSV, header row, one quote per row; names case-blind):
  maturity     years to expiry, > 0                      (required)
  strike       strike in the currency of the spot, > 0   (required)
  implied_vol  Black-Scholes volatility, decimal (0.21)  (or price and kind)
  price        option price, with kind call or put (empty kind: out-of-the-money side)
  weight       relative weight, >= 0                     (optional)
  spread       bid-ask width in the unit of the quote; weight 1/spread (optional)
Empty or NaN quotes are skipped and counted; a repeated (maturity, strike) is an error.

exit codes:
  0  fitted; the trade-off table is printed (and --out written)
  2  bad input (file, columns, values, arguments): nothing was written"""


def add_calibrate_parser(sub) -> None:
    """Register the ``calibrate`` subcommand on an argparse subparsers object."""
    import argparse

    cal = sub.add_parser(
        "calibrate",
        help="fit Heston parameters to an implied-volatility surface, free and with Feller",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        description="Fits the free parameters and a Feller-constrained set side by side and "
        "prints what the constraint costs (bp of implied vol) and buys (variance checks).",
        epilog=EPILOG,
    )
    cal.add_argument("quotes", help="CSV file of quotes (columns below)")
    cal.add_argument("--spot", type=float, required=True, help="spot price, > 0")
    cal.add_argument("--rate", type=float, default=0.0, help="continuous rate (default 0)")
    cal.add_argument(
        "--div-yield", type=float, default=0.0, help="continuous dividend yield (default 0)"
    )
    cal.add_argument(
        "--feller",
        default="free",
        help="fit written to --out: free (default), enforce, or a minimum Feller ratio such as "
        "0.5; the table's constrained column uses enforce, or that ratio",
    )
    cal.add_argument("--starts", type=int, default=8, help="Sobol start points (default 8)")
    cal.add_argument("--seed", type=int, default=None, help="seed of the start points")
    cal.add_argument("--out", default=None, help="write the chosen fit as JSON here")
    cal.set_defaults(func=run_calibrate)


def _feller_arg(text: str):
    key = text.strip().lower()
    if key in ("free", "enforce"):
        return key
    try:
        return float(key)
    except ValueError:
        raise InputError(
            f"--feller must be free, enforce or a minimum ratio > 0, got {text!r}"
        ) from None


def _read_csv(path: str) -> pd.DataFrame:
    try:
        return pd.read_csv(path, skipinitialspace=True)
    except FileNotFoundError:
        raise InputError(f"quotes file must exist, got {path!r}") from None
    except IsADirectoryError:
        raise InputError(f"quotes file must be a file, got the folder {path!r}") from None
    except OSError as exc:  # no right to read it, or the disk failed: an input problem, not a crash
        raise InputError(f"quotes file must be readable, got {path!r}: {os_cause(exc)}") from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(
            f"quotes file must be a CSV with a header row, got {path!r}: {exc}"
        ) from None


def run_calibrate(args) -> int:
    """Fit, print the trade-off table, optionally write the chosen fit; returns the exit code."""
    from rootvar.core.calibration.fit import DEFAULT_CALIBRATION_SEED

    chosen = _feller_arg(args.feller)
    constraint = chosen if chosen != "free" else "enforce"
    if args.starts < 0:
        raise InputError(f"--starts must be >= 0, got {args.starts}")
    quotes = _read_csv(args.quotes)
    seed = DEFAULT_CALIBRATION_SEED if args.seed is None else args.seed
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", StaticArbitrageWarning)
        table = calibration_tradeoff(
            quotes,
            args.spot,
            args.rate,
            args.div_yield,
            feller=constraint,
            seed=seed,
            starts=args.starts,
        )
    free, tied = table.attrs["free"], table.attrs["constrained"]
    print(f"rootvar calibrate: {len(free.residuals)} quotes ({free.skipped_quotes} skipped)")
    for w in dict.fromkeys(str(c.message) for c in caught):
        print(f"  warning: {w}")
    with pd.option_context(
        "display.width", 160, "display.max_colwidth", 60, "display.float_format", "{:.6g}".format
    ):
        print(table.to_string())
    for label, cal in (("free", free), (tied.feller, tied)):
        for note in cal.warnings:
            if note not in (str(c.message) for c in caught):
                print(f"  {label}: {note}")
    if args.out:
        pick = free if chosen == "free" else tied
        _write_json(Path(args.out), pick, args)
        print(f"{pick.feller} fit written to {args.out}")
    print(CAUTION)
    return 0


def _write_json(path: Path, cal, args) -> None:
    p = cal.params
    data = {
        "v0": p.v0,
        "kappa": p.kappa,
        "theta": p.theta,
        "vol_of_vol": p.vol_of_vol,
        "rho": p.rho,
        "feller": cal.feller,
        "feller_ratio": cal.feller_ratio,
        "rmse_bp": cal.rmse_bp,
        "max_abs_bp": cal.max_abs_bp,
        "status": cal.status,
        "spot": args.spot,
        "rate": args.rate,
        "div_yield": args.div_yield,
        "quotes_file": str(args.quotes),
        "std_errors": {k: float(v) for k, v in cal.std_errors.items()},
        "warnings": list(cal.warnings),
    }
    try:
        path.write_text(json.dumps(data, indent=2) + "\n", encoding="utf-8")
    except OSError as exc:
        raise InputError(f"--out must be a writable file, got {str(path)!r}: {exc}") from None
