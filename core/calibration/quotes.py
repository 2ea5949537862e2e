"""Option quotes for a calibration: reading, validation and static-arbitrage checks."""

from __future__ import annotations

import itertools
import math
import numbers
import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd

from rootvar.core.black_scholes import bs_price, implied_vol_reason
from rootvar.core.brief_repr import BriefRepr
from rootvar.core.validation import InputError, as_float_array

__all__ = ["QuoteSet", "StaticArbitrageWarning", "read_quotes"]

#: Accepted column names (lower case, spaces and hyphens as underscores) -> field.
_COLUMNS = {
    "maturity": "maturity",
    "expiry": "maturity",
    "strike": "strike",
    "implied_vol": "implied_vol",
    "vol": "implied_vol",
    "iv": "implied_vol",
    "price": "price",
    "kind": "kind",
    "weight": "weight",
    "spread": "spread",
    "bid_ask": "spread",
}

#: Fewest usable quotes: one more than the five parameters.
MIN_QUOTES = 6


class StaticArbitrageWarning(UserWarning):
    """The quotes admit a static arbitrage (calendar or butterfly)."""


@dataclass(frozen=True, repr=False)
class QuoteSet(BriefRepr):
    """Validated quotes, one entry per usable quote, sorted by maturity then strike.

    Attributes
    ----------
    maturity, strike, implied_vol, weight : ndarray
        Years, currency, annualised Black-Scholes volatility, and relative
        weight (mean 1).
    row : ndarray of int
        Row of each quote in the input, counted from 1.
    skipped : int
        Input rows left out because a required value was empty or NaN.
    warnings : tuple of str
        Static-arbitrage findings (calendar, butterfly), also issued as
        :class:`StaticArbitrageWarning`.
    """

    maturity: np.ndarray
    strike: np.ndarray
    implied_vol: np.ndarray
    weight: np.ndarray
    row: np.ndarray
    skipped: int
    warnings: tuple

    def __len__(self) -> int:
        return int(self.maturity.size)


def _frame(quotes) -> pd.DataFrame:
    if isinstance(quotes, QuoteSet):
        return pd.DataFrame(
            {
                "maturity": quotes.maturity,
                "strike": quotes.strike,
                "implied_vol": quotes.implied_vol,
                "weight": quotes.weight,
            }
        )
    if isinstance(quotes, pd.DataFrame):
        frame = quotes.copy()
    elif isinstance(quotes, dict) or (
        isinstance(quotes, (list, tuple)) and all(isinstance(r, dict) for r in quotes)
    ):
        frame = pd.DataFrame(quotes)
    else:
        raise InputError(
            "quotes must be a pandas DataFrame, a dict of columns or a list of records, "
            f"got {type(quotes).__name__}"
        )
    renamed = {}
    for col in frame.columns:
        key = str(col).strip().lower().replace(" ", "_").replace("-", "_")
        if key not in _COLUMNS:
            raise InputError(
                f"quotes column {col!r} is not known; expected maturity, strike, implied_vol "
                "(or price and kind), and optionally weight or spread"
            )
        renamed[col] = _COLUMNS[key]
    frame = frame.rename(columns=renamed)
    if frame.columns.duplicated().any():
        raise InputError(f"quotes columns must not repeat, got {list(quotes.columns)}")
    return frame.reset_index(drop=True)


def _blank(value) -> bool:
    if value is None:
        return True
    if isinstance(value, str):
        return not value.strip()
    return isinstance(value, numbers.Real) and not isinstance(value, bool) and np.isnan(value)


#: The rules of :func:`_number` for a plain number, checked without building an array.
_PLAIN_RULES = {">0": lambda v: v > 0.0, ">=0": lambda v: v >= 0.0}


def _number(column: str, value, row: int, *rules: str) -> float:
    # a plain finite number that keeps its rules needs no array check (which costs
    # some 40 microseconds a cell, most of reading a surface); anything else goes
    # through the shared validator, which words the error
    if isinstance(value, (float, int, np.floating, np.integer)) and not isinstance(value, bool):
        v = float(value)
        if math.isfinite(v) and all(_PLAIN_RULES[rule](v) for rule in rules):
            return v
    if isinstance(value, str):
        try:
            value = float(value)
        except ValueError:
            raise InputError(
                f"quotes {column} must be a number, got {value!r} (row {row})"
            ) from None
    try:
        return float(as_float_array(f"quotes {column}", value, *rules))
    except InputError as exc:
        raise InputError(f"{exc} (row {row})") from None


def read_quotes(quotes, spot, rate=0.0, div_yield=0.0, weights=None) -> QuoteSet:
    """Check quotes and turn them into implied volatilities with weights.

    Parameters
    ----------
    quotes : pandas.DataFrame, dict of columns, or list of records
        Columns (names case-blind, spaces or hyphens for underscores):

        * ``maturity`` (years, > 0) and ``strike`` (> 0), required;
        * ``implied_vol`` (annualised decimal, > 0), or ``price`` (currency)
          with ``kind`` (``call`` or ``put``; empty means the
          out-of-the-money side);
        * optionally ``weight`` (>= 0) or ``spread``, the bid-ask width
          in the unit of the quote (volatility or price; a price width is
          turned into volatility by the Black-Scholes vega), weight
          ``1 / spread``.

        A row whose maturity, strike or quote is empty or NaN is skipped
        and counted.
    spot, rate, div_yield : float
        Spot (> 0), continuous rate and dividend yield (decimals).
    weights : array_like, optional
        One weight (>= 0) per input row; overrides the ``weight`` and
        ``spread`` columns.

    Returns
    -------
    QuoteSet
        Weights scaled to mean 1.

    Raises
    ------
    InputError
        Naming the row for a bad value (negative volatility, maturity 0,
        text, price outside the no-arbitrage bounds) or a repeated
        (maturity, strike); and when fewer than six quotes or only one
        maturity remain: five parameters cannot be pinned down by them.

    Notes
    -----
    Static-arbitrage checks, reported as warnings and not errors:

    * calendar: the total implied variance ``sigma^2 T`` must not decrease
      with maturity at fixed forward moneyness ``ln(K / F)``; each quote is
      compared with the next maturity's total variance interpolated
      linearly in moneyness (inside that maturity's quoted range);
    * butterfly: call prices must be convex in strike; checked on the
      second divided differences of Black-Scholes call prices per maturity.

    Both allow a rounding margin of 1e-10 (relative to the total variance,
    and times spot for prices).

    References
    ----------
    Gatheral, J. (2006). The Volatility Surface: A Practitioner's Guide.
    Wiley, chapter 7 (calendar and butterfly arbitrage).
    """
    spot = float(as_float_array("spot", spot, ">0"))
    rate = float(as_float_array("rate", rate))
    div_yield = float(as_float_array("div_yield", div_yield))
    frame = _frame(quotes)
    for need in ("maturity", "strike"):
        if need not in frame:
            raise InputError(f"quotes must have a {need} column, got {list(frame.columns)}")
    by_price = "implied_vol" not in frame
    if by_price and "price" not in frame:
        raise InputError("quotes must have an implied_vol column or a price column")
    if weights is not None:
        w_in = as_float_array("weights", weights, ">=0").reshape(-1)
        if w_in.size != len(frame):
            raise InputError(
                f"weights must give one weight per quote row ({len(frame)}), got {w_in.size}"
            )
    value_col = "price" if by_price else "implied_vol"
    mats, strikes, vols, wts, rows = [], [], [], [], []
    skipped = 0
    seen: dict[tuple, int] = {}
    for i, rec in enumerate(frame.to_dict("records")):
        row = i + 1
        if any(_blank(rec.get(c)) for c in ("maturity", "strike", value_col)):
            skipped += 1
            continue
        t = _number("maturity", rec["maturity"], row, ">0")
        k = _number("strike", rec["strike"], row, ">0")
        forward = spot * np.exp((rate - div_yield) * t)
        if by_price:
            price = _number("price", rec["price"], row, ">0")
            kind = rec.get("kind")
            kind = "" if _blank(kind) else str(kind).strip().lower()
            if kind not in ("", "call", "put"):
                raise InputError(f"quotes kind must be call or put, got {kind!r} (row {row})")
            kind = kind or ("call" if k >= forward else "put")
            vol, why = implied_vol_reason(price, spot, k, t, rate, div_yield, kind)
            if str(why) or not np.isfinite(vol) or vol <= 0:
                raise InputError(
                    f"quotes price must lie within the no-arbitrage bounds "
                    f"({why or 'no volatility'}), got {price!r} (row {row})"
                )
            vol = float(vol)
        else:
            vol = _number("implied_vol", rec["implied_vol"], row, ">0")
        if weights is not None:
            w = float(w_in[i])
        elif "weight" in rec and not _blank(rec["weight"]):
            w = _number("weight", rec["weight"], row, ">=0")
        elif "spread" in rec and not _blank(rec["spread"]):
            width = _number("spread", rec["spread"], row, ">0")
            if by_price:
                vega = _vega(spot, k, t, vol, rate, div_yield)
                width = width / vega
            w = 1.0 / width
        else:
            w = 1.0
        key = (t, k)
        if key in seen:
            raise InputError(
                f"quotes row {row} repeats maturity {t:g}, strike {k:g} of row {seen[key]}"
            )
        seen[key] = row
        mats.append(t)
        strikes.append(k)
        vols.append(vol)
        wts.append(w)
        rows.append(row)
    if len(mats) < MIN_QUOTES:
        raise InputError(
            f"quotes must hold at least {MIN_QUOTES} usable quotes to fit five parameters, "
            f"got {len(mats)}"
        )
    if len(set(mats)) < 2:
        raise InputError(
            "quotes must span at least two maturities to pin down mean reversion, "
            f"got only {mats[0]:g}"
        )
    wts = np.array(wts)
    if not np.any(wts > 0):
        raise InputError("quote weights must not all be zero, got only zeros")
    order = np.lexsort((np.array(strikes), np.array(mats)))
    t_arr, k_arr, v_arr = (np.array(x)[order] for x in (mats, strikes, vols))
    found = tuple(_calendar(t_arr, k_arr, v_arr, spot, rate, div_yield)) + tuple(
        _butterfly(t_arr, k_arr, v_arr, spot, rate, div_yield)
    )
    for text in found:
        warnings.warn(text, StaticArbitrageWarning, stacklevel=2)
    return QuoteSet(
        t_arr, k_arr, v_arr, wts[order] / wts.mean(), np.array(rows)[order], skipped, found
    )


def _vega(spot, strike, maturity, vol, rate, div_yield):
    """Black-Scholes vega by a central difference of :func:`bs_price` (only scales weights)."""
    h = 1e-4 * vol
    up = bs_price(spot, strike, maturity, vol + h, rate, div_yield)
    down = bs_price(spot, strike, maturity, vol - h, rate, div_yield)
    return max((up - down) / (2.0 * h), 1e-300)


def _calendar(t, k, vol, spot, rate, div_yield):
    """Quotes whose total variance exceeds the next maturity's at the same moneyness."""
    times = np.unique(t)
    moneyness = np.log(k / (spot * np.exp((rate - div_yield) * t)))
    total = vol * vol * t
    for early, late in itertools.pairwise(times):
        a, b = t == early, t == late
        x_late, w_late = moneyness[b], total[b]
        inside = (moneyness[a] >= x_late.min()) & (moneyness[a] <= x_late.max())
        if not inside.any():
            continue
        w_next = np.interp(moneyness[a][inside], x_late, w_late)
        w_now = total[a][inside]
        bad = w_now > w_next * (1.0 + 1e-10)
        if bad.any():
            j = int(np.argmax(np.where(bad, w_now - w_next, -np.inf)))
            yield (
                f"calendar arbitrage: total variance falls from maturity {early:g} to {late:g} "
                f"at {int(bad.sum())} strike(s), most at strike {k[a][inside][j]:g}"
            )


def _butterfly(t, k, vol, spot, rate, div_yield):
    """Maturities whose call prices are not convex in strike."""
    for time in np.unique(t):
        sel = t == time
        if sel.sum() < 3:
            continue
        ks = k[sel]
        calls = np.asarray(bs_price(spot, ks, time, vol[sel], rate, div_yield, "call"))
        slopes = np.diff(calls) / np.diff(ks)
        curvature = np.diff(slopes)
        bad = curvature < -1e-10 * spot / np.diff(ks)[1:]
        if bad.any():
            j = int(np.argmin(curvature))
            yield (
                f"butterfly arbitrage: call prices not convex in strike at maturity {time:g} "
                f"({int(bad.sum())} place(s), most near strike {ks[j + 1]:g})"
            )
