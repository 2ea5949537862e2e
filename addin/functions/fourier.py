"""Cells priced by the certified Fourier routes (contour or COS), and Black-Scholes implied vols.

ROOTVAR_FOURIER_PRICE gives a price or a column of prices over a range of
strikes, ROOTVAR_FOURIER_VOL the same prices quoted as implied volatilities,
and ROOTVAR_IMPLIED_VOL the implied volatility of any option price.
"""

from __future__ import annotations

import numpy as np

from rootvar.addin.cells import CellError, to_number, to_params
from rootvar.addin.functions.arguments import PARAMS_DOC, market_args, single_strike
from rootvar.addin.functions.registry import sheet_function
from rootvar.addin.functions.results import finite, one_or_column
from rootvar.core import heston_implied_vol, heston_price, implied_vol_reason

__all__ = ["ROOTVAR_FOURIER_PRICE", "ROOTVAR_FOURIER_VOL", "ROOTVAR_IMPLIED_VOL"]


@sheet_function(
    "number, or a column for a range of strikes",
    params=PARAMS_DOC,
    spot="spot price, > 0",
    strike="strike or range of strikes, > 0",
    maturity="years, in [0.001, 100]",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    kind="call or put (empty: call)",
)
def ROOTVAR_FOURIER_PRICE(params, spot, strike, maturity, rate=None, div_yield=None, kind=None):
    """European option price under Heston, certified Fourier (contour; COS for wide strips)."""
    p = to_params("params", params)
    s, ks, t, r, q, kd = market_args(spot, strike, maturity, rate, div_yield, kind)
    return one_or_column(heston_price(p, s, ks, t, r, q, kd), ks.size == 1)


@sheet_function(
    "number, or a column for a range of strikes (empty text where no volatility exists)",
    params=PARAMS_DOC,
    spot="spot price, > 0",
    strike="strike or range of strikes, > 0",
    maturity="years, in [0.001, 100]",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
)
def ROOTVAR_FOURIER_VOL(params, spot, strike, maturity, rate=None, div_yield=None):
    """Heston Fourier prices quoted as Black-Scholes implied volatilities."""
    p = to_params("params", params)
    s, ks, t, r, q, _ = market_args(spot, strike, maturity, rate, div_yield, None)
    vols = np.atleast_1d(heston_implied_vol(p, s, ks, t, r, q))
    cells = [[finite(float(v))] for v in vols]
    return cells[0][0] if ks.size == 1 else cells


@sheet_function(
    "number: annualised volatility",
    price="option price, > 0",
    spot="spot price, > 0",
    strike="strike, > 0",
    maturity="years, in [0.001, 100]",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    kind="call or put (empty: call)",
)
def ROOTVAR_IMPLIED_VOL(price, spot, strike, maturity, rate=None, div_yield=None, kind=None):
    """Black-Scholes implied volatility of an option price."""
    value = to_number("price", price)
    s, ks, t, r, q, kd = market_args(spot, strike, maturity, rate, div_yield, kind)
    vol, why = implied_vol_reason(value, s, single_strike(ks), t, r, q, kd)
    if str(why):
        raise CellError(f"price must lie within the no-arbitrage bounds ({why}), got {value!r}")
    return float(vol)
