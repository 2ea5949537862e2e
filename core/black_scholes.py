"""Black-Scholes prices and implied volatility, accurate deep in the wings.

Both work on the *normalised out-of-the-money price*
``b(x, s) = price / (DF sqrt(F K))`` with ``x = ln(F / K)`` and total
volatility ``s = vol sqrt(T)``; in-the-money prices add the intrinsic value
``2 sinh(|x| / 2)`` exactly, so nothing tiny is ever obtained by subtracting
two large numbers.
"""

from __future__ import annotations

import numpy as np
from scipy.special import erfcx, ndtr

from rootvar.core.validation import (
    InputError,
    as_float_array,
    broadcast,
    check_choice,
    scalar_or_array,
)

__all__ = ["bs_greeks", "bs_price", "implied_vol", "implied_vol_reason"]

_KINDS = ("call", "put")
_SQRT_2 = np.sqrt(2.0)
_INV_SQRT_2PI = 1.0 / np.sqrt(2.0 * np.pi)


def _otm_normalised(x_abs_neg, s):
    """``b(x, s)`` for ``x <= 0`` (an out-of-the-money call), ``s > 0``.

    ``b = e^{x/2} Phi(h + t) - e^{-x/2} Phi(h - t)`` with ``h = x / s`` and
    ``t = s / 2``.  When ``h + t < 0`` both terms are tails; then
    ``b = e^{-(h^2 + t^2)/2} [erfcx(-(h+t)/sqrt2) - erfcx(-(h-t)/sqrt2)] / 2``
    keeps relative precision (Jäckel 2015, "Let's be rational", eq. 2.3 and
    the erfcx form of his region I).
    """
    x = x_abs_neg
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        h = x / s
        t = 0.5 * s
        tails = (
            0.5
            * np.exp(-0.5 * (h * h + t * t))
            * (erfcx(-(h + t) / _SQRT_2) - erfcx(-(h - t) / _SQRT_2))
        )
        direct = np.exp(0.5 * x) * ndtr(h + t) - np.exp(-0.5 * x) * ndtr(h - t)
    b = np.where(h + t < 0, tails, direct)
    return np.where(s > 0, np.maximum(b, 0.0), 0.0)


def _forward_terms(spot, strike, maturity, rate, div_yield):
    spot = as_float_array("spot", spot, ">0")
    strike = as_float_array("strike", strike, ">0")
    maturity = as_float_array("maturity", maturity, ">0")
    rate = as_float_array("rate", rate)
    div_yield = as_float_array("div_yield", div_yield)
    spot, strike, maturity, rate, div_yield = broadcast(
        spot=spot, strike=strike, maturity=maturity, rate=rate, div_yield=div_yield
    )
    forward = spot * np.exp((rate - div_yield) * maturity)
    discount = np.exp(-rate * maturity)
    return forward, strike, maturity, discount


def bs_price(spot, strike, maturity, vol, rate=0.0, div_yield=0.0, kind="call"):
    """Black-Scholes price of a European call or put.

    Parameters
    ----------
    spot : array_like
        Spot price, > 0.
    strike : array_like
        Strike, > 0.
    maturity : array_like
        Time to expiry in years, > 0.
    vol : array_like
        Black-Scholes volatility (annualised, decimal), >= 0.
    rate, div_yield : array_like
        Continuously compounded rate and dividend yield (decimals).
    kind : {"call", "put"}

    Returns
    -------
    float or ndarray
        The price, in the currency of ``spot``.

    Notes
    -----
    ``price = DF sqrt(F K) [b(-|x|, s) + max(+-2 sinh(x/2), 0)]`` with
    ``x = ln(F/K)``, ``s = vol sqrt(T)`` and ``b`` the normalised
    out-of-the-money price evaluated with ``erfcx`` in the tails.

    References
    ----------
    Black, F. & Scholes, M. (1973). The pricing of options and corporate
    liabilities. Journal of Political Economy 81(3), 637-654.
    Jäckel, P. (2015). Let's be rational. Wilmott 2015(75), 40-53.
    """
    check_choice("kind", kind, _KINDS)
    forward, strike, maturity, discount = _forward_terms(spot, strike, maturity, rate, div_yield)
    vol = as_float_array("vol", vol, ">=0")
    forward, strike, maturity, discount, vol = broadcast(
        forward=forward, strike=strike, maturity=maturity, discount=discount, vol=vol
    )
    x = np.log(forward / strike)
    s = vol * np.sqrt(maturity)
    sign = 1.0 if kind == "call" else -1.0
    intrinsic = np.maximum(sign * 2.0 * np.sinh(0.5 * x), 0.0)
    b = _otm_normalised(-np.abs(x), s)
    return scalar_or_array(discount * np.sqrt(forward * strike) * (b + intrinsic))


def _solve_total_vol(beta, x_neg):
    """Total vol ``s`` with ``b(x_neg, s) = beta``; bracketed Newton on ``ln b``.

    ``d b / d s = exp(-(h^2 + t^2)/2) / sqrt(2 pi)`` (the normalised vega), so
    the Newton step on ``ln b`` is ``(ln b - ln beta) b / b'``.  Any step that
    leaves the bracket is replaced by bisection (in ``log s`` while the
    bracket spans decades), so convergence is guaranteed.
    """
    lo = np.full_like(beta, 1e-12)
    hi = np.full_like(beta, 1e3)
    s = np.sqrt(2.0 * np.abs(x_neg)) + 0.5  # near the inflection point of b in s
    s = np.clip(s, 1e-6, 50.0)
    log_beta = np.log(beta)
    active = np.ones(beta.shape, bool)
    for _ in range(200):
        if not active.any():
            break
        b = _otm_normalised(x_neg, s)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            f = np.log(b) - log_beta
            vega = _INV_SQRT_2PI * np.exp(-0.5 * ((x_neg / s) ** 2 + 0.25 * s * s))
            step = f * b / vega
        below = f < 0
        lo = np.where(active & below, s, lo)
        hi = np.where(active & ~below, s, hi)
        new = s - step
        bad = ~np.isfinite(new) | (new <= lo) | (new >= hi)
        bisect = np.where(hi / lo > 4.0, np.sqrt(lo * hi), 0.5 * (lo + hi))
        new = np.where(bad, bisect, new)
        done = (np.abs(new - s) <= 4e-16 * s) | (hi - lo <= 4e-16 * hi)
        s = np.where(active, new, s)
        active &= ~done
    return s


def implied_vol_reason(price, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call"):
    """Implied volatility with a reason string per element (vectorized use).

    Returns
    -------
    vol : ndarray
        Implied volatility, NaN where none exists.
    reason : ndarray of str
        ``""`` where the volatility was found, otherwise why not, e.g.
        ``"price below intrinsic value"``.
    """
    check_choice("kind", kind, _KINDS)
    forward, strike, maturity, discount = _forward_terms(spot, strike, maturity, rate, div_yield)
    price = as_float_array("price", price)
    price, forward, strike, maturity, discount = broadcast(
        price=price, forward=forward, strike=strike, maturity=maturity, discount=discount
    )
    x = np.log(forward / strike)
    sign = 1.0 if kind == "call" else -1.0
    scale = discount * np.sqrt(forward * strike)
    intrinsic = np.maximum(sign * 2.0 * np.sinh(0.5 * x), 0.0)
    upper = np.exp(0.5 * sign * x)  # normalised price at infinite vol: DF F or DF K
    beta = price / scale - intrinsic
    x_neg = -np.abs(x)
    b_max = np.exp(0.5 * x_neg)
    reason = np.full(price.shape, "", dtype=object)
    reason[price / scale < intrinsic] = "price below intrinsic value (no-arbitrage lower bound)"
    reason[price / scale >= upper] = "price at or above the no-arbitrage upper bound"
    zero = (beta <= 0) & (reason == "")
    # A time value smaller than the rounding of the price itself carries no
    # information about the volatility (deep in the money, tiny vol).
    lost = (beta > 0) & (beta <= 8 * np.finfo(float).eps * price / scale) & (reason == "")
    reason[lost] = "time value lost in the rounding of the price; volatility undetermined"
    ok = (reason == "") & ~zero
    vol = np.full(price.shape, np.nan)
    vol[zero] = 0.0
    if ok.any():
        beta_ok = np.minimum(beta[ok], b_max[ok] * (1 - 1e-16))
        s = _solve_total_vol(beta_ok, x_neg[ok])
        vol[ok] = s / np.sqrt(maturity[ok])
    return vol, reason.astype(str)


def implied_vol(price, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call"):
    """Black-Scholes implied volatility of a European option price.

    Parameters
    ----------
    price : array_like
        Option price, in the currency of ``spot``.
    spot, strike, maturity, rate, div_yield, kind
        As in :func:`bs_price`.

    Returns
    -------
    float or ndarray
        Annualised volatility.  A price at intrinsic value gives 0.0.  For a
        scalar price outside the no-arbitrage bounds ``(intrinsic, DF F)``
        for calls and ``(intrinsic, DF K)`` for puts an :class:`InputError`
        is raised; in vectorized use such elements are NaN (see
        :func:`implied_vol_reason` for the reasons).

    Notes
    -----
    Works on the normalised out-of-the-money price ``beta`` (intrinsic value
    removed exactly, put-call symmetry ``b_put(x) = b_call(-x)``) and solves
    ``ln b(x, s) = ln beta`` for the total volatility ``s`` by Newton's method
    safeguarded by bisection; ``b`` is evaluated with the scaled
    complementary error function in the tails.  Working in ``ln b`` keeps the
    iteration well conditioned for prices down to 1e-300 (deep out of the
    money or tiny volatility).

    References
    ----------
    Jäckel, P. (2015). Let's be rational. Wilmott 2015(75), 40-53 (the
    normalisation, the erfcx form and the log-price objective; rootvar uses a
    simpler safeguarded Newton iteration rather than his rational
    initial guesses).
    """
    vol, reason = implied_vol_reason(price, spot, strike, maturity, rate, div_yield, kind)
    if vol.ndim == 0 and reason.item():
        raise InputError(f"price {reason.item()}, got {float(np.asarray(price))!r}")
    return scalar_or_array(vol)


def bs_vega(spot, strike, maturity, vol, rate, div_yield):
    """Black-Scholes vega ``S e^{-qT} phi(d1) sqrt(T)`` (currency per unit vol)."""
    total = vol * np.sqrt(maturity)
    d1 = (np.log(spot / strike) + (rate - div_yield) * maturity) / total + 0.5 * total
    return (
        spot
        * np.exp(-div_yield * maturity)
        * np.exp(-0.5 * d1 * d1)
        * np.sqrt(maturity / (2.0 * np.pi))
    )


def bs_otm_price(spot, strike, maturity, vol, rate, div_yield):
    """Black-Scholes out-of-the-money price: put below the forward, call at or above."""
    total = vol * np.sqrt(maturity)
    fwd = spot * np.exp((rate - div_yield) * maturity)
    d1 = np.log(fwd / strike) / total + 0.5 * total
    d2 = d1 - total
    df = np.exp(-rate * maturity)
    call = df * (fwd * ndtr(d1) - strike * ndtr(d2))
    put = df * (strike * ndtr(-d2) - fwd * ndtr(-d1))
    return np.where(strike >= fwd, call, put)


def bs_greeks(spot, strike, maturity, vol, rate=0.0, div_yield=0.0, kind="call"):
    """Black-Scholes Greeks of a European call or put.

    Parameters
    ----------
    spot : array_like
        Spot price, > 0.
    strike : array_like
        Strike, > 0.
    maturity : array_like
        Time to expiry in years, > 0.
    vol : array_like
        Black-Scholes volatility (annualised, decimal), > 0.
    rate, div_yield : array_like
        Continuously compounded rate and dividend yield (decimals).
    kind : {"call", "put"}

    Returns
    -------
    dict
        ``"delta"`` (per unit spot), ``"gamma"`` (per unit spot squared),
        ``"theta"`` (``dV/dt = -dV/dT``, per year), ``"vega"`` (per unit
        volatility, 1.00 = 100 vol points), ``"rho_rate"`` and ``"rho_div"``
        (per unit rate and dividend yield), each a float or an ndarray of
        the broadcast shape; the definitions of :mod:`rootvar.core.greeks`.

    Notes
    -----
    With ``d1 = (ln(S/K) + (r - q + vol^2/2) T) / (vol sqrt T)``,
    ``d2 = d1 - vol sqrt T``, ``phi`` the normal density, ``N`` its cdf and
    ``w = +1`` for a call, ``-1`` for a put:

    * delta ``= w e^{-qT} N(w d1)``; gamma ``= e^{-qT} phi(d1) / (S vol sqrt T)``
    * theta ``= -S e^{-qT} phi(d1) vol / (2 sqrt T) - w r K e^{-rT} N(w d2)
      + w q S e^{-qT} N(w d1)``
    * vega ``= S e^{-qT} phi(d1) sqrt T``
    * rho_rate ``= w K T e^{-rT} N(w d2)``; rho_div ``= -w S T e^{-qT} N(w d1)``

    References
    ----------
    Black, F. & Scholes, M. (1973). The pricing of options and corporate
    liabilities. Journal of Political Economy 81(3), 637-654.
    Merton, R. C. (1973). Theory of rational option pricing. Bell Journal of
    Economics and Management Science 4(1), 141-183 (the dividend yield).
    Hull, J. C. Options, Futures, and Other Derivatives, chapter "The Greek
    letters" (the same formulas, with a dividend yield).

    Examples
    --------
    >>> g = bs_greeks(100.0, 100.0, 1.0, 0.2)
    >>> round(g["delta"], 4), round(g["vega"], 4)
    (0.5398, 39.6953)
    """
    check_choice("kind", kind, _KINDS)
    spot = as_float_array("spot", spot, ">0")
    strike = as_float_array("strike", strike, ">0")
    maturity = as_float_array("maturity", maturity, ">0")
    vol = as_float_array("vol", vol, ">0")
    rate = as_float_array("rate", rate)
    div_yield = as_float_array("div_yield", div_yield)
    spot, strike, maturity, vol, rate, div_yield = broadcast(
        spot=spot, strike=strike, maturity=maturity, vol=vol, rate=rate, div_yield=div_yield
    )
    w = 1.0 if kind == "call" else -1.0
    root_t = np.sqrt(maturity)
    total = vol * root_t
    d1 = (np.log(spot / strike) + (rate - div_yield) * maturity) / total + 0.5 * total
    d2 = d1 - total
    spot_df = spot * np.exp(-div_yield * maturity)
    strike_df = strike * np.exp(-rate * maturity)
    density = _INV_SQRT_2PI * np.exp(-0.5 * d1 * d1)
    n1, n2 = ndtr(w * d1), ndtr(w * d2)
    greeks = {
        "delta": w * np.exp(-div_yield * maturity) * n1,
        "gamma": np.exp(-div_yield * maturity) * density / (spot * total),
        "theta": -spot_df * density * vol / (2.0 * root_t)
        - w * rate * strike_df * n2
        + w * div_yield * spot_df * n1,
        "vega": spot_df * density * root_t,
        "rho_rate": w * maturity * strike_df * n2,
        "rho_div": -w * maturity * spot_df * n1,
    }
    return {name: scalar_or_array(value) for name, value in greeks.items()}
