"""European option prices under Heston by Fourier methods.

Two independent methods:

* ``"cos"`` (default): the COS method of Fang & Oosterlee (2008), priced
  through puts and put-call parity, on the characteristic function in the
  form of Albrecher et al. (2007).  Every maturity's truncation range and
  number of terms are chosen from the model and then *verified*: the terms
  left out past the last one are bounded by 1e-11 x spot (from the decay of
  the characteristic function and a bound on the payoff coefficients),
  and doubling both ends' distance from the mean must not move the extreme
  and at-the-money prices by more than 1e-10 x spot, nor leave strikes past
  its ends with more than that in tail mass times strike; the options are
  then priced on the doubled range.  When that cannot be reached the affected
  options are priced by the check method instead (``fallbacks`` in
  :func:`heston_price_details` says so).
* ``"quad"`` (check): Lewis's (2001) single integral, integrated adaptively by
  QUADPACK, on a separately written characteristic function; see
  :mod:`rootvar.core.fourier.check`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rootvar.core.black_scholes import implied_vol_reason
from rootvar.core.brief_repr import BriefRepr
from rootvar.core.fourier.check import lewis_call_price
from rootvar.core.fourier.cos_kernels import (
    cf_array,
    cos_coefficients,
    cos_puts,
    flat_sums,
)
from rootvar.core.fourier.series import (
    certified_puts,
    cf_cutoffs,
    law_facts,
)
from rootvar.core.params import HestonParams
from rootvar.core.runtime import notice_if_cold
from rootvar.core.validation import (
    InputError,
    as_float,
    as_float_array,
    broadcast,
    check_choice,
    scalar_or_array,
)

__all__ = ["FourierDetails", "heston_implied_vol", "heston_price", "heston_price_details"]

_METHODS = ("cos", "quad")
_KINDS = ("call", "put")

#: Out-of-the-money prices below this (x spot) give no implied volatility.
PRICE_FLOOR = 1e-9


@dataclass(frozen=True, repr=False)
class FourierDetails(BriefRepr):
    """Prices with how they were obtained.

    Attributes
    ----------
    price : ndarray
        Option prices.
    method : str
        Requested method.
    terms : dict
        Maturity (years) -> number of COS terms used.
    half_width : dict
        Maturity -> (left, right) extent of the certified truncation range
        around the mean, in standard deviations of ln(S_T / S_0); prices
        come from the range with both extents doubled.
    fallbacks : int
        Number of options the COS method could not certify and that were
        priced by the check method.
    """

    price: np.ndarray
    method: str
    terms: dict
    half_width: dict
    fallbacks: int


def _validated(params, spot, strike, maturity, rate, div_yield, kind, method):
    if not isinstance(params, HestonParams):
        raise InputError(f"params must be a HestonParams, got {type(params).__name__}")
    check_choice("kind", kind, _KINDS)
    check_choice("method", method, _METHODS)
    spot = as_float("spot", spot, ">0")
    rate = as_float("rate", rate)
    div_yield = as_float("div_yield", div_yield)
    strike = as_float_array("strike", strike, ">0")
    maturity = as_float_array("maturity", maturity, ">0")
    strike, maturity = broadcast(strike=strike, maturity=maturity)
    return spot, strike, maturity, rate, div_yield


def _call_from_put(put, spot_df, strike_df):
    """Put-call parity ``C = P + S e^{-qT} - K e^{-rT}``, kept inside the call's bounds.

    ``spot_df`` and ``strike_df`` are the discounted spot and strike, the
    same numbers the bounds are stated in (no rounding gap at the bound).
    """
    gap = spot_df - strike_df
    return np.clip(put + gap, np.maximum(gap, 0.0), spot_df)


def heston_price_details(
    params, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call", method="cos"
) -> FourierDetails:
    """Like :func:`heston_price`, returning how each maturity was priced."""
    spot, strike, maturity, rate, div_yield = _validated(
        params, spot, strike, maturity, rate, div_yield, kind, method
    )
    notice_if_cold(cf_array, cos_coefficients, cos_puts, flat_sums)
    drift = rate - div_yield
    shape = strike.shape
    k_flat, t_flat = strike.ravel(), maturity.ravel()
    put = np.empty(k_flat.shape)
    terms, widths, fallbacks = {}, {}, 0
    start = (12.0, 12.0)
    times = np.unique(t_flat)
    if method == "cos":
        c1, sd, _ = law_facts(params, tuple(times.tolist()), drift)
        u_cut = cf_cutoffs(params, times, drift, float(k_flat.max()), spot)
    for i, t in enumerate(times):
        sel = t_flat == t
        prices = None
        if method == "cos":
            prices, n, extent = certified_puts(
                params, spot, k_flat[sel], t, drift, c1[i], sd[i], u_cut[i], start
            )
            terms[float(t)], widths[float(t)] = n, extent
            start = extent if prices is not None else start
        if prices is None:
            fallbacks += int(sel.sum()) if method == "cos" else 0
            calls = lewis_call_price(params, spot, k_flat[sel], t, rate, div_yield)
            # back to undiscounted puts through parity
            prices = (calls - spot * np.exp(-div_yield * t)) * np.exp(rate * t) + k_flat[sel]
        put[sel] = prices
    df = np.exp(-rate * t_flat)
    spot_df, strike_df = spot * np.exp(-div_yield * t_flat), k_flat * df
    put = df * put
    put = np.clip(put, np.maximum(strike_df - spot_df, 0.0), strike_df)
    price = put if kind == "put" else _call_from_put(put, spot_df, strike_df)
    return FourierDetails(price.reshape(shape), method, terms, widths, fallbacks)


def heston_price(
    params, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call", method="cos"
):
    """European call or put price under the Heston model.

    Parameters
    ----------
    params : HestonParams
        Model parameters.
    spot : float
        Spot price, > 0.
    strike : array_like
        Strike(s), > 0; broadcast against ``maturity`` (a strip of strikes,
        a grid of maturities, or a whole surface as a 2-d array).
    maturity : array_like
        Time(s) to expiry in years, > 0.
    rate, div_yield : float
        Continuously compounded rate and dividend yield (decimals).
    kind : {"call", "put"}
    method : {"cos", "quad"}
        ``"cos"`` (fast, certified, default) or ``"quad"`` (slow adaptive
        check method sharing no pricing code with it).

    Returns
    -------
    float or ndarray
        Prices in the currency of ``spot``, inside the no-arbitrage bounds
        ``[max(DF (F - K), 0), DF F]`` for calls and ``[max(DF (K - F), 0), DF K]``
        for puts.

    Notes
    -----
    COS: with ``R = ln(S_T / S_0)`` truncated to ``[a, b]`` and
    ``omega_k = k pi / (b - a)``, the put is

    .. math:: P = e^{-rT} \\sum_{k=0}^{N-1}{}' \\mathrm{Re}\\big[\\varphi(\\omega_k)
              e^{-i\\omega_k a}\\big] V_k,

    ``V_k`` the cosine coefficients of ``K (1 - e^{x + R})^+``.  Calls come
    from put-call parity, which avoids the large-payoff truncation error of
    calls (Fang & Oosterlee 2008, sec. 5).  The range starts at
    ``c1 +- 12 sqrt(c2)`` from the first two cumulants (or the previous
    maturity's range); the end at fault is widened by half until doubling
    both ends' distance from ``c1`` changes no probed price (lowest,
    highest, nearest-the-money strike) by more than 1e-10 x spot and the
    tail mass past each end, times the largest strike beyond it, stays
    below that too; the strip is priced on that doubled range; ``N`` is set so the terms left
    out add at most 1e-11 x spot, from ``|V_k| <= 4 K (b - a) / (k pi)^2``
    and the decay of the characteristic function.

    References
    ----------
    Fang, F. & Oosterlee, C. W. (2008). A novel pricing method for European
    options based on Fourier-cosine series expansions. SIAM J. Sci. Comput.
    31(2), 826-848.
    Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
    Heston trap. Wilmott Magazine, January 2007.
    Lewis, A. L. (2001). A simple option formula for general jump-diffusion
    and other exponential Lévy processes. Envision Financial Systems.
    """
    details = heston_price_details(params, spot, strike, maturity, rate, div_yield, kind, method)
    return scalar_or_array(details.price)


def heston_implied_vol(params, spot, strike, maturity, rate=0.0, div_yield=0.0, method="cos"):
    """Heston Fourier prices expressed as Black-Scholes implied volatilities.

    Parameters
    ----------
    params, spot, strike, maturity, rate, div_yield, method
        As in :func:`heston_price`.

    Returns
    -------
    float or ndarray
        Annualised implied volatility per strike/maturity.  Each is inverted
        from the out-of-the-money option (put below the forward, call above),
        whose price carries the most information.  NaN where that price is
        below ``PRICE_FLOOR x spot``: the Fourier price is certified to an
        absolute accuracy, so a smaller price says nothing reliable about
        the volatility.

    References
    ----------
    See :func:`heston_price` and :func:`rootvar.core.implied_vol`.
    """
    spot_, strike_, maturity_, rate_, div_ = _validated(
        params, spot, strike, maturity, rate, div_yield, "call", method
    )
    forward = spot_ * np.exp((rate_ - div_) * maturity_)
    put = heston_price_details(params, spot_, strike_, maturity_, rate_, div_, "put", method).price
    call = _call_from_put(
        put, spot_ * np.exp(-div_ * maturity_), strike_ * np.exp(-rate_ * maturity_)
    )
    use_put = strike_ < forward
    vol_put, _ = implied_vol_reason(put, spot_, strike_, maturity_, rate_, div_, "put")
    vol_call, _ = implied_vol_reason(call, spot_, strike_, maturity_, rate_, div_, "call")
    otm = np.where(use_put, put, call)
    vol = np.where(use_put, vol_put, vol_call)
    return scalar_or_array(np.where(otm >= PRICE_FLOOR * spot_, vol, np.nan))
