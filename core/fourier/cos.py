"""European option prices under Heston by Fourier methods.

Two certified routes, chosen per maturity, and an independent check:

* ``"cos"``: the COS method of Fang & Oosterlee (2008), priced
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
* ``"contour"``: Lewis's (2001) single integral on a shifted, turned contour
  with a double-exponential trapezoid, each price certified to 1e-10 x spot
  by its own error estimate (:mod:`rootvar.core.fourier.contour`); an option
  it cannot certify goes to COS.  A few hundred characteristic-function
  values per maturity instead of COS's thousands: the route for one price
  and short strips.
* ``"auto"`` (default): the contour route for a maturity with at most
  ``CONTOUR_STRIKES`` strikes, COS for a wider one.
* ``"quad"`` (check): Lewis's (2001) single integral, integrated adaptively by
  QUADPACK, on a separately written characteristic function; see
  :mod:`rootvar.core.fourier.check`.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass

import numpy as np

from rootvar.core.black_scholes import implied_vol_reason
from rootvar.core.brief_repr import BriefRepr
from rootvar.core.fourier.check import lewis_call_price
from rootvar.core.fourier.contour import MAX_STRIKES, REASONS, strip_table
from rootvar.core.fourier.contour_kernels import CERTIFIED, STRIP_ROWS, contour_cells
from rootvar.core.fourier.cos_kernels import (
    cf_array,
    cos_coefficients,
    cos_puts,
    flat_sums,
)
from rootvar.core.fourier.series import (
    RANGE_TOL,
    SERIES_TOL,
    certified_puts,
    cf_cutoffs,
    law_facts,
)
from rootvar.core.params import HestonParams, as_params
from rootvar.core.runtime import notice_if_cold
from rootvar.core.validation import (
    as_float,
    as_float_array,
    broadcast,
    check_choice,
    scalar_or_array,
)

__all__ = ["FourierDetails", "heston_implied_vol", "heston_price", "heston_price_details"]

_METHODS = ("auto", "cos", "contour", "quad")
_KINDS = ("call", "put")

#: Out-of-the-money prices below this (x spot) give no implied volatility.
PRICE_FLOOR = 1e-9
#: Most strikes of one maturity that ``method="auto"`` prices by the contour
#: route; a maturity with more goes to COS.  Measured (strikes 30-300, fresh
#: maturities, medians of alternated blocks, same run, contour time / COS time)
#: on the Fang & Oosterlee, Broadie & Kaya and Andersen case I sets at 0.25, 1,
#: 5 and 20 years: 0.10-0.76 at 64 strikes, 0.12-1.61 at 128 (above 1 from 1
#: year on the first two sets), 0.15-2.06 at 256 and 0.34-2.61 at 1,024 (COS's
#: series has a few hundred terms there; case I's thousands keep the contour
#: ahead at every width).  128 keeps a 101-strike smile on the contour.
CONTOUR_STRIKES = 128
#: Route names in :class:`FourierDetails` ``route``.
ROUTES = ("contour", "cos", "quad")
#: The accuracy (x spot) a COS price is certified to: the range check's
#: ``RANGE_TOL`` plus the bound on the terms left out, ``SERIES_TOL``.
COS_CERTIFICATE = RANGE_TOL + SERIES_TOL
#: The reason given for an option the COS route could not certify.
COS_REASON = (
    "COS could not certify this maturity (truncation range within its most terms, "
    "or the rounding of a far strike's put)"
)


@dataclass(frozen=True, repr=False)
class FourierDetails(BriefRepr):
    """Prices with how they were obtained.

    Attributes
    ----------
    price : ndarray
        Option prices.
    method : str
        Requested method (``"auto"``, ``"cos"``, ``"contour"`` or ``"quad"``).
    terms : dict
        Maturity (years) -> number of COS terms used, for every maturity the
        COS route priced (all of them under ``method="cos"``).
    half_width : dict
        Maturity -> (left, right) extent of the certified truncation range
        around the mean, in standard deviations of ln(S_T / S_0); prices
        come from the range with both extents doubled.  Same maturities as
        ``terms``.
    fallbacks : int
        Number of options the COS method could not certify and that were
        priced by the check method.
    route : ndarray of str
        Per option (the shape of ``price``): ``"contour"``, ``"cos"`` or
        ``"quad"``, the route whose number was returned.
    nodes : ndarray of int
        Per option, the characteristic-function values its price was summed
        from: the contour's quadrature nodes (each shared node counted by
        every strike that used it; the alpha search included where a strike
        had its own contour), or the COS terms of its maturity; 0 for the
        check method (QUADPACK's own evaluations are not counted).
    error_estimate : ndarray
        Per option, in price units: the contour's own quadrature estimate;
        for COS the accuracy it is certified to (``COS_CERTIFICATE x spot``,
        a verified tolerance, not a measured error); NaN for the check method.
    reason : ndarray of str
        Per option, why it is not on the requested route: the contour's
        reason for handing it over, or ``COS_REASON``; ``""`` where it is.
    handed_over : int
        Number of options the contour route could not certify, priced by
        COS (or, failing that, by the check method).
    """

    price: np.ndarray
    method: str
    terms: dict
    half_width: dict
    fallbacks: int
    route: np.ndarray | None = None
    nodes: np.ndarray | None = None
    error_estimate: np.ndarray | None = None
    reason: np.ndarray | None = None
    handed_over: int = 0


def _validated(params, spot, strike, maturity, rate, div_yield, kind, method):
    as_params(params)
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


def _inside_bounds(price, spot, strike, maturity, rate, div_yield, put):
    """``price`` clipped into the no-arbitrage bounds stated in the discounted spot
    and strike, the numbers the COS route's bounds use (the contour kernel
    clips in its own forward terms, which round differently)."""
    spot_df = spot * np.exp(-div_yield * maturity)
    strike_df = strike * np.exp(-rate * maturity)
    if put:
        return np.clip(price, np.maximum(strike_df - spot_df, 0.0), strike_df)
    return np.clip(price, np.maximum(spot_df - strike_df, 0.0), spot_df)


class _Outcome:
    """Per-option results of one call (flat), filled route by route."""

    def __init__(self, size, spot):
        self.price = np.empty(size)
        self.route = np.full(size, "cos", dtype="<U7")
        self.nodes = np.zeros(size, dtype=np.int64)
        self.error = np.full(size, COS_CERTIFICATE * spot)
        self.reason = np.full(size, "", dtype=object)
        self.terms, self.widths = {}, {}
        self.fallbacks = self.handed_over = 0

    def details(self, shape, method):
        return FourierDetails(
            self.price.reshape(shape),
            method,
            self.terms,
            self.widths,
            self.fallbacks,
            self.route.reshape(shape),
            self.nodes.reshape(shape),
            self.error.reshape(shape),
            self.reason.astype(str).reshape(shape),
            self.handed_over,
        )


def heston_price_details(
    params, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call", method="auto"
) -> FourierDetails:
    """Like :func:`heston_price`, returning how each option was priced.

    Under ``method="auto"`` a maturity with at most ``CONTOUR_STRIKES``
    strikes goes to the contour route, a wider one to COS; ``"contour"``
    sends every maturity to the contour route.  An option the contour route
    cannot certify is priced by COS, and one COS cannot certify by the check
    method; ``route``, ``reason``, ``handed_over`` and ``fallbacks`` say so.
    """
    spot, strike, maturity, rate, div_yield = _validated(
        params, spot, strike, maturity, rate, div_yield, kind, method
    )
    k_flat, t_flat = strike.ravel(), maturity.ravel()
    out = _Outcome(k_flat.size, spot)
    market = (spot, rate, div_yield, kind)
    # the contour route first, maturity by maturity; what it leaves goes to COS
    rest = np.ones(k_flat.size, dtype=bool)
    if method in ("auto", "contour"):
        rest = _by_contour(out, params, market, k_flat, t_flat, method == "contour")
    if rest.any():
        _by_cos(out, params, market, k_flat, t_flat, np.flatnonzero(rest), method)
    return out.details(strike.shape, method)


def _by_contour(out, params, market, k_flat, t_flat, every):
    """The contour route for each maturity with at most ``CONTOUR_STRIKES``
    strikes (``every``: all of them); the options it did not certify, as a mask.

    One thread: sharing a surface's maturities between the pool's two threads
    was measured 5% slower on the shared 2-core machine (10 x 101 surface,
    load 1.6 from other work: 6.5 against 6.2 ms).
    """
    spot, rate, div_yield, kind = market
    put = kind == "put"
    rest = np.ones(k_flat.size, dtype=bool)
    _notice_contour()
    jobs = []
    for t in np.unique(t_flat):
        sel = np.flatnonzero(t_flat == t)
        if sel.size <= CONTOUR_STRIKES or every:
            jobs.append((float(t), sel))
    if not jobs:
        return rest

    def rows_of(job):
        t, sel = job
        strike = np.ascontiguousarray(k_flat[sel])
        # the kernel takes at most MAX_STRIKES: a wider forced strip goes in slices
        return [
            strip_table(params, spot, strike[i : i + MAX_STRIKES], t, rate, div_yield, put)[:, :-1]
            for i in range(0, strike.size, MAX_STRIKES)
        ]

    parts = [rows_of(job) for job in jobs]
    rows = np.concatenate([piece for part in parts for piece in part], axis=1)
    sel = np.concatenate([sel for _, sel in jobs])
    ok = rows[5] == CERTIFIED
    done = sel[ok]
    out.price[done] = _inside_bounds(
        rows[0, ok], spot, k_flat[done], t_flat[done], rate, div_yield, put
    )
    out.route[done] = "contour"
    out.nodes[done] = rows[3, ok]
    out.error[done] = rows[4, ok]
    rest[done] = False
    for j in np.flatnonzero(~ok):
        out.reason[sel[j]] = REASONS[int(rows[5, j])]
        out.handed_over += 1
    return rest


def _by_cos(out, params, market, k_all, t_all, index, method):
    """Options ``index`` by COS, or by the check method under ``"quad"`` and
    for a maturity COS cannot certify."""
    spot, rate, div_yield, kind = market
    drift = rate - div_yield
    k_flat, t_flat = k_all[index], t_all[index]
    put = np.empty(k_flat.shape)
    start = (12.0, 12.0)
    times = np.unique(t_flat)
    if method != "quad":
        notice_if_cold(cf_array, cos_coefficients, cos_puts, flat_sums)
        c1, sd, _ = law_facts(params, tuple(times.tolist()), drift)
        u_cut = cf_cutoffs(params, times, drift, float(k_flat.max()), spot)
    for i, t in enumerate(times):
        sel = t_flat == t
        where = index[sel]
        prices = None
        if method != "quad":
            prices, n, extent = certified_puts(
                params, spot, k_flat[sel], t, drift, c1[i], sd[i], u_cut[i], start
            )
            out.terms[float(t)], out.widths[float(t)] = n, extent
            start = extent if prices is not None else start
            out.nodes[where] = n
        if prices is None:
            out.route[where] = "quad"
            out.nodes[where] = 0
            out.error[where] = np.nan
            if method != "quad":
                out.fallbacks += where.size
                for j in where:
                    out.reason[j] = (
                        f"{out.reason[j]}; {COS_REASON}" if out.reason[j] else COS_REASON
                    )
            calls = lewis_call_price(params, spot, k_flat[sel], t, rate, div_yield)
            # back to undiscounted puts through parity
            prices = (calls - spot * np.exp(-div_yield * t)) * np.exp(rate * t) + k_flat[sel]
        put[sel] = prices
    df = np.exp(-rate * t_flat)
    spot_df, strike_df = spot * np.exp(-div_yield * t_flat), k_flat * df
    put = df * put
    put = np.clip(put, np.maximum(strike_df - spot_df, 0.0), strike_df)
    out.price[index] = put if kind == "put" else _call_from_put(put, spot_df, strike_df)


def heston_price(
    params, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call", method="auto"
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
    method : {"auto", "cos", "contour", "quad"}
        ``"auto"`` (default): per maturity, the contour route for at most
        ``CONTOUR_STRIKES`` strikes, COS for more.  ``"cos"`` and
        ``"contour"`` force one certified route (an option the contour
        cannot certify still goes to COS); ``"quad"`` is the slow adaptive
        check method sharing no pricing code with either.

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

    Contour: with ``F`` the forward, ``k = ln(K/F)`` and ``psi`` the
    characteristic function of ``ln(S_T/F)``,

    .. math:: \\frac{C}{e^{-rT}F} = R(\\alpha) + \\frac{1}{\\pi}\\,\\mathrm{Re}
              \\int_0^\\infty \\frac{e^{-izk}\\,\\psi(z - i)}{-z(z - i)}\\,z'(v)\\,dv

    on a contour ``z(v)`` through ``-i alpha``, ``R`` the residues crossed;
    see :func:`rootvar.core.fourier.contour.contour_prices`.

    References
    ----------
    Fang, F. & Oosterlee, C. W. (2008). A novel pricing method for European
    options based on Fourier-cosine series expansions. SIAM J. Sci. Comput.
    31(2), 826-848.
    Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
    Heston trap. Wilmott Magazine, January 2007.
    Lewis, A. L. (2001). A simple option formula for general jump-diffusion
    and other exponential Lévy processes. Envision Financial Systems.
    Lord, R. & Kahl, C. (2007). Optimal Fourier inversion in semi-analytical
    option pricing. Journal of Computational Finance 10(4), 1-30.
    Andersen, L. B. G. & Lake, M. (2018). Robust high-precision option
    pricing by Fourier transforms: contour deformations and double-exponential
    quadrature. SSRN 3231626.
    """
    if method == "contour" or (method == "auto" and CONTOUR_STRIKES >= 1):
        if type(strike) is not np.ndarray:
            price = _one_by_contour(params, spot, strike, maturity, rate, div_yield, kind)
        elif type(maturity) is np.ndarray:
            price = _surface_by_contour(params, spot, strike, maturity, rate, div_yield, kind)
        else:
            price = _strip_by_contour(params, spot, strike, maturity, rate, div_yield, kind)
        if price is not None:
            return price
    details = heston_price_details(params, spot, strike, maturity, rate, div_yield, kind, method)
    return scalar_or_array(details.price)


#: Argument types the one-price path takes as they are (anything else goes through
#: the general validation).
_PLAIN = (float, int, np.float64)
#: Per thread: the one-price path's buffers (a strike, the kernel's rows).
_SCRATCH = threading.local()
#: True once this process has looked whether the contour kernel needs compiling
#: (the look costs a fifth of a further strike).
_CONTOUR_NOTICED = False


def _notice_contour():
    """:func:`rootvar.core.runtime.notice_if_cold` for the contour kernel, once."""
    global _CONTOUR_NOTICED
    if not _CONTOUR_NOTICED:
        notice_if_cold(contour_cells)
        _CONTOUR_NOTICED = True


def _plain_market(params, spot, maturity, rate, div_yield, kind):
    """The market arguments as floats when they are plain valid numbers, else None."""
    for x in (spot, maturity, rate, div_yield):
        if type(x) not in _PLAIN:
            return None
    spot, maturity, rate, div_yield = float(spot), float(maturity), float(rate), float(div_yield)
    if not (
        math.isfinite(spot + maturity + rate + div_yield)
        and spot > 0.0
        and maturity > 0.0
        and type(params) is HestonParams
        and (kind == "call" or kind == "put")
    ):
        return None
    return spot, maturity, rate, div_yield


def _strip_by_contour(params, spot, strike, maturity, rate, div_yield, kind):
    """A strip of strikes (1-d float array, at most ``CONTOUR_STRIKES``) at one maturity
    by the contour route, with the validation cut to what that takes, or None.

    The same kernel call and bounds as :func:`heston_price_details`, for a
    spreadsheet cell (its strikes come as an array) or a check's strip.  None
    when an argument is not of that form or breaks its rule, or when a strike
    is not certified: the general path then says which or hands it over.
    """
    market = _plain_market(params, spot, maturity, rate, div_yield, kind)
    if market is None or strike.dtype != np.float64 or strike.ndim != 1:
        return None
    n = strike.size
    if not 0 < n <= CONTOUR_STRIKES or not (strike.min() > 0.0 and math.isfinite(strike.sum())):
        return None
    spot, maturity, rate, div_yield = market
    if not _CONTOUR_NOTICED:
        _notice_contour()
    put = kind == "put"
    strike = np.ascontiguousarray(strike)
    table = strip_table(params, spot, strike, maturity, rate, div_yield, put)
    if np.any(table[5, :n] != CERTIFIED):
        return None
    times = np.full(n, maturity)  # as the general path holds them
    return _inside_bounds(table[0, :n], spot, strike, times, rate, div_yield, put)


def _surface_by_contour(params, spot, strike, maturity, rate, div_yield, kind):
    """A surface (maturities as a column, ``m x 1``, strikes as a row or an ``m x n``
    grid, float arrays) by the contour route, with the validation cut to what
    that takes, or None.

    The same kernel calls, in the same order, and the same bounds as
    :func:`heston_price_details` (so the same bits for ascending maturities),
    without building the per-option details a surface call does not return
    (routes, reasons as text, node counts): measured 16-19% of the 10 x 101
    surface's time on the Fang & Oosterlee and Andersen case I sets (fresh
    maturities, medians of alternated calls, load 1.1 on 2 cores: 6.19 against
    4.99 ms and 6.87 against 5.74 ms).  None when an argument is
    not of that form or breaks its rule, when two rows share a maturity (the
    general path prices them as one strip) or a maturity has more than
    ``CONTOUR_STRIKES`` strikes, or when a strike is not certified: the
    general path then says which or hands it over.
    """
    market = _plain_market(params, spot, 1.0, rate, div_yield, kind)
    if market is None or strike.dtype != np.float64 or maturity.dtype != np.float64:
        return None
    if maturity.ndim != 2 or maturity.shape[1] != 1 or not 1 <= strike.ndim <= 2:
        return None
    m, n = maturity.shape[0], strike.shape[-1]
    if strike.ndim == 2 and strike.shape[0] not in (1, m):
        return None
    # a handful of maturities: Python's floats check them faster than numpy calls
    times = maturity[:, 0].tolist()
    if not (
        0 < m
        and 0 < n <= CONTOUR_STRIKES
        and min(times) > 0.0
        and math.isfinite(sum(times))
        and len(set(times)) == m
        and strike.min() > 0.0
        and math.isfinite(strike.sum())
    ):
        return None
    spot, _, rate, div_yield = market
    if not _CONTOUR_NOTICED:
        _notice_contour()
    put = kind == "put"
    if strike.ndim == 1 or strike.shape[0] == 1:
        row = np.ascontiguousarray(strike.reshape(n))
        rows = [row] * m
        flat_k = np.empty(m * n)
        flat_k.reshape(m, n)[:] = row  # np.tile's copy at a fifth of its cost
    else:
        flat_k = np.ascontiguousarray(strike).reshape(m * n)
        rows = [flat_k[i * n : (i + 1) * n] for i in range(m)]
    tables = np.empty((m, STRIP_ROWS, n + 1))
    for i in range(m):
        strip_table(params, spot, rows[i], times[i], rate, div_yield, put, out=tables[i])
    if (tables[:, 5, :n] != CERTIFIED).any():
        return None
    # as the general path holds them (flat, row by row), so np.exp sees the same arrays
    flat_t = np.repeat(maturity[:, 0], n)
    price = _inside_bounds(tables[:, 0, :n].ravel(), spot, flat_k, flat_t, rate, div_yield, put)
    return price.reshape(m, n)


def _one_by_contour(params, spot, strike, maturity, rate, div_yield, kind):
    """One price by the contour route with the validation cut to plain numbers, or None.

    The same kernel call and bounds as :func:`heston_price_details` (so the
    same bits), for a spreadsheet column of single prices.  None when an
    argument is not a plain number or breaks its rule (the general path then
    says which) or when the contour cannot certify the price (the general path
    hands it over).
    """
    market = _plain_market(params, spot, maturity, rate, div_yield, kind)
    if market is None or type(strike) not in _PLAIN:
        return None
    strike = float(strike)
    if not (math.isfinite(strike) and strike > 0.0):
        return None
    spot, maturity, rate, div_yield = market
    if not _CONTOUR_NOTICED:
        _notice_contour()
    put = kind == "put"
    scratch = _SCRATCH.__dict__
    if not scratch:  # this thread's buffers for one strike and the kernel's rows
        scratch["strike"], scratch["table"] = np.empty(1), np.empty((STRIP_ROWS, 2))
    one, table = scratch["strike"], scratch["table"]
    one[0] = strike
    strip_table(params, spot, one, maturity, rate, div_yield, put, out=table)
    if table[5, 0] != CERTIFIED:
        return None
    spot_df = spot * np.exp(-div_yield * maturity)
    strike_df = strike * np.exp(-rate * maturity)
    # np.clip's arithmetic, on floats: the bounds of _inside_bounds
    if put:
        low, high = max(strike_df - spot_df, 0.0), strike_df
    else:
        low, high = max(spot_df - strike_df, 0.0), spot_df
    return float(min(max(table[0, 0], low), high))


def heston_implied_vol(params, spot, strike, maturity, rate=0.0, div_yield=0.0, method="auto"):
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
