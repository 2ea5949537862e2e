"""European option prices under Heston by Fourier methods.

Two independent methods:

* ``"cos"`` (default): the COS method of Fang & Oosterlee (2008), priced
  through puts and put-call parity, on the characteristic function in the
  form of Albrecher et al. (2007).  Every maturity's truncation range and
  number of terms are chosen from the model and then *verified*: the
  characteristic function must have decayed below 1e-12 at the last term,
  and widening both ends of the range by half must not move the extreme and
  at-the-money prices by more than 1e-10 x spot.  When that cannot be reached the affected
  options are priced by the check method instead (``fallbacks`` in
  :func:`heston_price_details` says so).
* ``"quad"`` (check): Lewis's (2001) single integral, integrated adaptively by
  QUADPACK, on a separately written characteristic function; see
  :mod:`rootvar.core.fourier_check`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .black_scholes import implied_vol_reason
from .fourier_check import lewis_call_price
from .heston_cf import heston_log_cf, log_return_cumulants
from .params import HestonParams
from .validation import InputError, as_float_array, broadcast, check_choice, scalar_or_array

__all__ = ["FourierDetails", "heston_implied_vol", "heston_price", "heston_price_details"]

_METHODS = ("cos", "quad")
_KINDS = ("call", "put")

#: The characteristic function must be below this at the last COS term.
CF_TAIL = 1e-12
#: Allowed change (x spot) when the truncation range is widened by half.
RANGE_TOL = 1e-10
#: Out-of-the-money prices below this (x spot) give no implied volatility.
PRICE_FLOOR = 1e-9
#: Most COS terms per maturity before the check method takes over.
MAX_TERMS = 1 << 16


@dataclass(frozen=True)
class FourierDetails:
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
        Maturity -> (left, right) extent of the truncation range around the
        mean, in standard deviations of ln(S_T / S_0).
    fallbacks : int
        Number of options the COS method could not certify and that were
        priced by the check method.
    """

    price: np.ndarray
    method: str
    terms: dict
    half_width: dict
    fallbacks: int


def _cf_cutoff(params, maturity, drift):
    """Frequency beyond which |cf(u)| < CF_TAIL (cf modulus decays in u)."""
    u = np.geomspace(1e-2, 1e7, 160)
    mod = np.exp(heston_log_cf(u, params, maturity, drift).real)
    above = np.nonzero(mod >= CF_TAIL)[0]
    return float(u[min(above[-1] + 1, u.size - 1)]) if above.size else float(u[0])


def _fourier_sums(angle, coef):
    """``sum_k coef[k, p] exp(i k angle[m])`` for every m and column p.

    Splits ``k = j B + l`` so that only ``M (B + J)`` complex exponentials
    are taken instead of ``M N``; the rest is one matrix product.
    """
    n, cols = coef.shape
    block = max(1, int(np.ceil(np.sqrt(n))))
    blocks = -(-n // block)
    padded = np.zeros((blocks * block, cols), dtype=complex)
    padded[:n] = coef
    inner_wave = np.exp(1j * np.outer(angle, np.arange(block)))  # (M, B)
    grouped = padded.reshape(blocks, block, cols).transpose(1, 0, 2).reshape(block, -1)
    inner = (inner_wave @ grouped).reshape(angle.size, blocks, cols)
    outer_wave = np.exp(1j * np.outer(angle, block * np.arange(blocks)))  # (M, J)
    return np.einsum("mj,mjp->mp", outer_wave, inner)


@dataclass(frozen=True)
class _CosSeries:
    """Density coefficients of ln(S_T/S_0) on [a, b] (Fang & Oosterlee 2008, eq. 9)."""

    a: float
    b: float
    omega: np.ndarray
    coef: np.ndarray

    @classmethod
    def build(cls, params, maturity, drift, a, b, u_cut):
        n = int(np.ceil(u_cut * (b - a) / np.pi)) + 2
        if n > MAX_TERMS:
            return None
        omega = np.arange(n) * np.pi / (b - a)
        # Re[cf(omega) exp(-i omega a)], folded into one complex exponential
        coef = np.exp(heston_log_cf(omega, params, maturity, drift) - 1j * a * omega).real
        coef[0] *= 0.5  # the primed sum halves the first term
        return cls(a, b, omega, coef)

    def puts(self, log_moneyness, strike):
        """Undiscounted puts ``E[K (1 - e^{x + R})^+]`` with ``x = ln(S_0 / K)``.

        Payoff coefficients from Fang & Oosterlee (2008), eqs. 22-23, with the
        payoff cut at ``R = -x`` clipped to the range.
        """
        a, b, omega, coef = self.a, self.b, self.omega, self.coef
        cut = np.clip(-log_moneyness, a, b)
        angle = np.pi * (cut - a) / (b - a)
        with np.errstate(divide="ignore", invalid="ignore"):
            y = np.where(omega > 0, coef / omega, 0.0)
        z = coef * (1.0 - 1j * omega) / (1.0 + omega * omega)
        sums = _fourier_sums(angle, np.stack([y, z], axis=1))
        psi_sum = coef[0] * (cut - a) + sums[:, 0].imag
        chi_sum = np.exp(cut) * sums[:, 1].real - np.exp(a) * z.real.sum()
        return 2.0 / (b - a) * strike * (psi_sum - np.exp(log_moneyness) * chi_sum)


def _cos_puts_certified(params, spot, strike, maturity, drift, start=(12.0, 12.0)):
    """Undiscounted puts for one maturity with a verified range, or None.

    The range ``[c1 - left sd, c1 + right sd]`` is accepted when widening
    both ends by half moves no probed price (lowest, highest and
    nearest-the-money strike) by more than ``RANGE_TOL x spot``.  Otherwise
    the end at fault is widened by half and the check repeats: heavy left
    tails under negative correlation need far more room than the right tail.
    ``start`` is the first range tried (the previous maturity's answer, since
    the shape of the law changes slowly with maturity).
    Returns ``(puts or None, terms, (left, right))``.
    """
    c1, c2 = log_return_cumulants(params, maturity, drift)
    sd = float(np.sqrt(c2))
    u_cut = _cf_cutoff(params, maturity, drift)
    x = np.log(spot / strike)
    probe = np.unique([np.argmin(strike), np.argmax(strike), np.argmin(np.abs(x))])
    tol = RANGE_TOL * spot

    def series(left, right):
        return _CosSeries.build(params, maturity, drift, c1 - left * sd, c1 + right * sd, u_cut)

    def moved(a, b):
        return (
            np.max(np.abs(a.puts(x[probe], strike[probe]) - b.puts(x[probe], strike[probe]))) > tol
        )

    left, right = start
    base = series(left, right)
    for _ in range(16):
        both = series(1.5 * left, 1.5 * right) if base is not None else None
        if both is None:
            break
        if not moved(base, both):
            return base.puts(x, strike), base.omega.size, (left, right)
        left_only = series(1.5 * left, right)
        if left_only is not None and moved(base, left_only):
            left, base = 1.5 * left, left_only
        else:
            right, base = 1.5 * right, series(left, 1.5 * right)
    return None, 0, (left, right)


def _validated(params, spot, strike, maturity, rate, div_yield, kind, method):
    if not isinstance(params, HestonParams):
        raise InputError(f"params must be a HestonParams, got {type(params).__name__}")
    check_choice("kind", kind, _KINDS)
    check_choice("method", method, _METHODS)
    spot = float(_scalar("spot", spot, ">0"))
    rate = float(_scalar("rate", rate))
    div_yield = float(_scalar("div_yield", div_yield))
    strike = as_float_array("strike", strike, ">0")
    maturity = as_float_array("maturity", maturity, ">0")
    strike, maturity = broadcast(strike=strike, maturity=maturity)
    return spot, strike, maturity, rate, div_yield


def _scalar(name, value, *rules):
    arr = as_float_array(name, value, *rules)
    if arr.ndim:
        raise InputError(f"{name} must be a single number, got shape {arr.shape}")
    return arr


def _call_from_put(put, forward, strike, discount):
    """Put-call parity, kept inside the call's no-arbitrage bounds."""
    call = put + discount * (forward - strike)
    return np.clip(call, np.maximum(discount * (forward - strike), 0.0), discount * forward)


def heston_price_details(
    params, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call", method="cos"
) -> FourierDetails:
    """Like :func:`heston_price`, returning how each maturity was priced."""
    spot, strike, maturity, rate, div_yield = _validated(
        params, spot, strike, maturity, rate, div_yield, kind, method
    )
    drift = rate - div_yield
    shape = strike.shape
    k_flat, t_flat = strike.ravel(), maturity.ravel()
    put = np.empty(k_flat.shape)
    terms, widths, fallbacks = {}, {}, 0
    start = (12.0, 12.0)
    for t in np.unique(t_flat):
        sel = t_flat == t
        prices = None
        if method == "cos":
            prices, n, extent = _cos_puts_certified(params, spot, k_flat[sel], t, drift, start)
            terms[float(t)], widths[float(t)] = n, extent
            start = extent if prices is not None else start
        if prices is None:
            fallbacks += int(sel.sum()) if method == "cos" else 0
            calls = lewis_call_price(params, spot, k_flat[sel], t, rate, div_yield)
            # back to undiscounted puts through parity
            prices = (calls - spot * np.exp(-div_yield * t)) * np.exp(rate * t) + k_flat[sel]
        put[sel] = prices
    df = np.exp(-rate * t_flat)
    fwd = spot * np.exp(drift * t_flat)
    put = df * put
    lower_put = np.maximum(df * (k_flat - fwd), 0.0)
    put = np.clip(put, lower_put, df * k_flat)
    price = put if kind == "put" else _call_from_put(put, fwd, k_flat, df)
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
    maturity's range); the end at fault is widened by half until widening
    both ends once more changes no probed price (lowest, highest,
    nearest-the-money strike) by more than 1e-10 x spot; ``N`` is set
    so the characteristic function has decayed below 1e-12 at the last term.

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
    call = _call_from_put(put, forward, strike_, np.exp(-rate_ * maturity_))
    use_put = strike_ < forward
    vol_put, _ = implied_vol_reason(put, spot_, strike_, maturity_, rate_, div_, "put")
    vol_call, _ = implied_vol_reason(call, spot_, strike_, maturity_, rate_, div_, "call")
    otm = np.where(use_put, put, call)
    vol = np.where(use_put, vol_put, vol_call)
    return scalar_or_array(np.where(otm >= PRICE_FLOOR * spot_, vol, np.nan))
