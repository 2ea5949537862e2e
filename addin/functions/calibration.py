"""Cells that fit the model to quotes: the calibration, its residuals and the Feller trade-off.

ROOTVAR_CALIBRATE fits the Heston parameters to implied volatilities (its
first five rows work as the params of every other cell),
ROOTVAR_CALIBRATION_RESIDUALS lists the same fit quote by quote, and
ROOTVAR_FELLER_TRADEOFF sets the free fit beside the one that enforces Feller.
"""

from __future__ import annotations

import numpy as np

from rootvar.addin.cells import CellError, to_int, to_number, to_table
from rootvar.addin.functions.registry import cell_cache, sheet_function
from rootvar.addin.functions.results import finite, frame_rows, pairs
from rootvar.core import InputError

__all__ = ["ROOTVAR_CALIBRATE", "ROOTVAR_CALIBRATION_RESIDUALS", "ROOTVAR_FELLER_TRADEOFF"]


_QUOTES_DOC = (
    "range with a header row: maturity, strike, implied_vol (or price and kind), optional "
    "weight or spread; one quote per row"
)
_CAL_DOCS = dict(
    quotes=_QUOTES_DOC,
    spot="spot price, > 0",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    feller="free, enforce, or a minimum Feller ratio such as 0.5 (empty: free)",
    starts="Sobol start points besides the first (empty: 8; 0 for one start)",
    sobol_seed="seed of the Sobol start points (empty: 20260105)",
)


def _feller_cell(name: str, value, default: str):
    """free / enforce text, or a minimum ratio > 0."""
    if isinstance(value, (list, tuple)):
        cells = [c for c in np.ravel(np.array(value, dtype=object)) if c is not None]
        value = cells[0] if cells else None
    if value is None or (isinstance(value, str) and not value.strip()):
        return default
    if isinstance(value, str):
        key = value.strip().lower()
        if key in ("free", "enforce"):
            return key
        try:
            return to_number(name, float(key), ">0")
        except ValueError:
            raise CellError(
                f"{name} must be free, enforce or a minimum ratio > 0, got the text {value!r}"
            ) from None
    return to_number(name, value, ">0")


def _cal_args(quotes, spot, rate, div_yield, feller, starts, sobol_seed, default_feller):
    from rootvar.core.calibration.fit import DEFAULT_CALIBRATION_SEED

    table = to_table("quotes", quotes)
    key = tuple((col, tuple(vals)) for col, vals in table.items())
    return (
        key,
        to_number("spot", spot, ">0"),
        to_number("rate", rate, default=0.0),
        to_number("div_yield", div_yield, default=0.0),
        _feller_cell(
            "feller" if default_feller == "free" else "constraint", feller, default_feller
        ),
        to_int("starts", starts, 8, 0, 64),
        to_int("sobol_seed", sobol_seed, DEFAULT_CALIBRATION_SEED, 0),
    )


@cell_cache(maxsize=32)
def _cached_calibration(key, spot, rate, div_yield, feller, starts, seed):
    import warnings

    from rootvar.core import calibrate

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # arbitrage findings travel in .warnings
        try:
            return calibrate(
                dict(key), spot, rate, div_yield, feller=feller, starts=starts, seed=seed
            )
        except InputError as exc:  # the core's message names the argument and row
            raise CellError(str(exc)) from exc


@cell_cache(maxsize=16)
def _cached_tradeoff(key, spot, rate, div_yield, feller, starts, seed):
    import warnings

    from rootvar.core import calibration_tradeoff

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return calibration_tradeoff(
                dict(key), spot, rate, div_yield, feller=feller, starts=starts, seed=seed
            )
        except InputError as exc:
            raise CellError(str(exc)) from exc


@sheet_function(
    "table: label / value rows; the first five (v0, kappa, theta, vol_of_vol, rho) work as "
    "params of every other function; then the fit, standard errors, status and warnings",
    **_CAL_DOCS,
)
def ROOTVAR_CALIBRATE(
    quotes, spot, rate=None, div_yield=None, feller=None, starts=None, sobol_seed=None
):
    """Heston parameters fitted to implied volatilities, with the fit and its warnings."""
    c = _cached_calibration(
        *_cal_args(quotes, spot, rate, div_yield, feller, starts, sobol_seed, "free")
    )
    p = c.params
    rows = [[name, getattr(p, name)] for name in ("v0", "kappa", "theta", "vol_of_vol", "rho")]
    rows += [
        ["Feller ratio", c.feller_ratio],
        ["regime", c.regime],
        ["RMSE (bp)", c.rmse_bp],
        ["largest error (bp)", c.max_abs_bp],
    ]
    rows += [[f"std error {name}", float(v)] for name, v in c.std_errors.items()]
    rows += [
        ["constraint", c.feller],
        ["status", c.status],
        ["starts at best / tried", f"{c.starts_at_best} / {c.starts}"],
        ["quotes used / skipped", f"{len(c.residuals)} / {c.skipped_quotes}"],
        ["warnings", " | ".join(c.warnings) if c.warnings else "none"],
    ]
    return pairs(rows)


@sheet_function(
    "table: header row, then one row per quote (maturity, strike, market and model vol, "
    "error in bp, weight)",
    **_CAL_DOCS,
)
def ROOTVAR_CALIBRATION_RESIDUALS(
    quotes, spot, rate=None, div_yield=None, feller=None, starts=None, sobol_seed=None
):
    """Quote-by-quote implied-vol errors of the fit that ROOTVAR_CALIBRATE returns."""
    c = _cached_calibration(
        *_cal_args(quotes, spot, rate, div_yield, feller, starts, sobol_seed, "free")
    )
    return frame_rows(c.residuals)


@sheet_function(
    "table: header row, then the parameters, fit and variance checks of the free and the "
    "constrained fit, with the cost of the constraint",
    quotes=_QUOTES_DOC,
    spot=_CAL_DOCS["spot"],
    rate=_CAL_DOCS["rate"],
    div_yield=_CAL_DOCS["div_yield"],
    constraint="enforce, or a minimum Feller ratio such as 0.5 (empty: enforce)",
    starts=_CAL_DOCS["starts"],
    sobol_seed=_CAL_DOCS["sobol_seed"],
)
def ROOTVAR_FELLER_TRADEOFF(
    quotes, spot, rate=None, div_yield=None, constraint=None, starts=None, sobol_seed=None
):
    """What enforcing Feller costs in implied-vol bp and buys in variance behaviour."""
    args = _cal_args(quotes, spot, rate, div_yield, constraint, starts, sobol_seed, "enforce")
    if args[4] == "free":
        raise CellError("constraint must be enforce or a minimum ratio for a trade-off, got free")
    table = _cached_tradeoff(*args)
    rows = [["quantity", *[str(c) for c in table.columns]]]
    rows += [
        [label, *[finite(v) for v in row]]
        for label, row in zip(table.index, table.itertuples(index=False), strict=True)
    ]
    return rows
