"""Certified Fourier prices of the discrete geometric Asian and the forward-start option.

Both payoffs are a put-type payoff ``K (1 - e^{x + R})^+`` on one random
variable ``R`` whose characteristic function is known in closed form through
the joint characteristic function of the log-prices
(:mod:`rootvar.core.fourier.joint_cf`):

* geometric Asian: ``R = (1/N) sum_j ln(S_{t_j} / S_0)``;
* forward start: ``R = ln(S_T / S_t0)`` under the measure that takes
  ``S_t0`` as numeraire.

``R`` is priced by the COS series of :mod:`rootvar.core.fourier.cos` with the
same certification: the number of terms comes from the decay of the
characteristic function, and the truncation range is widened until doubling
it no longer moves the price (nor leaves tail mass past the strike's kink)
by more than ``RANGE_TOL x spot``.  A fixed range or a fixed integration limit
is not enough: on Feller-breaking sets the characteristic function decays
only exponentially, slowly, and a limit of 100 in the Fourier integral gives
a geometric Asian call a quarter below its value (issue 15).  When the check
cannot be met within ``MAX_TERMS`` terms (a law with a sharp spike, e.g. a
short forward start after a long start on a Feller-breaking set, where the
variance at the start is often near 0) the price is taken by Lewis's
integral with adaptive quadrature instead, as the European falls back to its
check method; if that reports a miss too, the pricers raise
:class:`FourierConvergenceError` instead of returning a number.
"""

from __future__ import annotations

import itertools
import warnings

import numpy as np
from scipy import integrate

from rootvar.core.fourier.joint_cf import joint_log_mgf
from rootvar.core.fourier.series import MAX_TERMS, RANGE_TOL, SERIES_TOL, CosSeries
from rootvar.core.params import as_params
from rootvar.core.products import AsianOption, ForwardStartOption
from rootvar.core.validation import InputError, as_float

#: Frequencies per evaluation of the joint characteristic function (bounds temporaries).
CF_CHUNK = 1 << 13

__all__ = ["FourierConvergenceError", "forward_start_price", "geometric_asian_price"]


class FourierConvergenceError(ArithmeticError):
    """The Fourier series could not be certified to its tolerance."""


def _common(params, spot, rate, div_yield):
    as_params(params)
    return as_float("spot", spot, ">0"), as_float("rate", rate), as_float("div_yield", div_yield)


def _in_chunks(log_cf, omega):
    """``exp(log_cf(omega))`` in chunks of :data:`CF_CHUNK` frequencies."""
    out = np.empty(omega.size, dtype=complex)
    for i in range(0, omega.size, CF_CHUNK):
        part = slice(i, i + CF_CHUNK)
        out[part] = np.exp(log_cf(omega[part]))
    return out


def _cumulants(log_cf):
    """Mean and variance of ``R`` from central differences of its log cf at 0.

    Only used to place the first truncation range, which is then verified.
    """
    c2 = 0.04
    for _ in range(2):  # the second pass scales the step to the variance found
        h = min(1e-2, 1e-3 / np.sqrt(c2))
        lo, hi = log_cf(np.array([-h, h]))
        c1 = (hi - lo).imag / (2.0 * h)
        c2 = max(-(hi.real + lo.real) / (h * h), 1e-12)
    return c1, c2


def _cutoff(log_cf, bound_scale, tol):
    """Frequency past which the dropped COS terms add at most ``tol``.

    The put payoff's cosine coefficients obey ``|V_k| <= 4 K w / (k pi)^2``
    on a range of width ``w`` (two integrations by parts), so the terms past
    ``u*`` add at most ``|cf(u*)| 4 K / (pi u*)`` provided ``|cf|`` does not
    grow again past ``u*``, checked on a grid up to 1e7 (as in
    :mod:`rootvar.core.fourier.cos`).
    """
    u = np.geomspace(1e-2, 1e7, 160)
    size = np.exp(log_cf(u).real) * bound_scale / (np.pi * u)
    above = np.nonzero(~(size < tol))[0]
    if above.size and above[-1] == u.size - 1:
        raise FourierConvergenceError(
            "the characteristic function has not decayed by frequency 1e7; "
            "the series cannot be certified"
        )
    return float(u[above[-1] + 1]) if above.size else float(u[0])


def cos_put(log_cf, log_moneyness, strike, spot, what):
    """``E[K (1 - e^{x + R})^+]`` by a certified COS series.

    Same rules as ``rootvar.core.fourier.cos.certified_puts`` for one strike:
    the range ``[c1 - left sd, c1 + right sd]`` is accepted when the price on
    it and on its double (both extents doubled) differ by at most
    ``RANGE_TOL x spot`` and, if the kink ``-x`` lies outside the range, the
    tail mass past that end times the strike is below that too (twice it on
    the right, where the cosine series folds the outside mass back in); the
    price is then taken on the doubled range.  Otherwise the end at fault is
    widened by half.  Raises :class:`FourierConvergenceError` past
    ``MAX_TERMS`` terms or 16 widenings.
    """
    c1, c2 = _cumulants(log_cf)
    sd = np.sqrt(c2)
    tol = RANGE_TOL * spot
    u_cut = _cutoff(log_cf, 4.0 * strike, SERIES_TOL * spot)
    x = np.array([log_moneyness])
    k = np.array([strike])
    kink = -log_moneyness

    def series(a, b, n):
        return CosSeries.from_cf(a, b, _in_chunks(log_cf, np.arange(n) * (np.pi / (b - a))))

    def terms(left, right):
        return int(np.ceil(u_cut * (left + right) * sd / np.pi)) + 2

    left, right = 12.0, 12.0
    for _ in range(16):
        n = terms(left, right)
        if 2 * n > MAX_TERMS:
            break
        wide_a, wide_b = c1 - 2.0 * left * sd, c1 + 2.0 * right * sd
        cf = _in_chunks(log_cf, np.arange(2 * n) * (np.pi / (wide_b - wide_a)))
        wide = CosSeries.from_cf(wide_a, wide_b, cf)
        base = CosSeries.from_cf(c1 - left * sd, c1 + right * sd, cf, step=2)
        below, up_to = wide.cdf(np.array([base.a, base.b]))
        err_left = strike * abs(below) if kink < base.a else 0.0
        err_right = 2.0 * strike * abs(1.0 - up_to) if kink > base.b else 0.0
        if err_left > tol or err_right > tol:
            left *= 1.5 if err_left > tol else 1.0
            right *= 1.5 if err_right > tol else 1.0
            continue
        put = float(wide.puts(x, k)[0])
        base_put = float(base.puts(x, k)[0])
        if abs(base_put - put) <= tol:
            return put
        # which end is at fault: widen the left alone by half and look again
        n = terms(1.5 * left, right)
        if n > MAX_TERMS:
            break
        wider = series(c1 - 1.5 * left * sd, c1 + right * sd, n).puts(x, k)[0]
        if abs(wider - base_put) > tol:
            left *= 1.5
        else:
            right *= 1.5
    raise FourierConvergenceError(
        f"the {what} Fourier price could not be certified to {RANGE_TOL:g} x spot within "
        f"{MAX_TERMS} terms (range {left:g} sd left, {right:g} sd right of the mean); "
        "no price is returned"
    )


def _quad_put(log_cf, log_moneyness, strike, mean, what):
    """``E[K (1 - e^{x + R})^+]`` by Lewis's integral and adaptive quadrature.

    The fallback when the COS series cannot be certified, as for Europeans
    (``rootvar.core.fourier.check``): with ``U = K e^{x + R}`` and
    ``E[e^R] = mean``,

    .. math:: E[(U - K)^+] = K e^x \\mathrm{mean} - \\frac{K e^{x/2}}{\\pi}
              \\int_0^\\infty \\mathrm{Re}\\big[e^{iux}\\varphi_R(u - i/2)\\big]
              \\frac{du}{u^2 + 1/4},

    integrated by QUADPACK (its oscillatory rule when ``|x|`` times the
    limit is large) up to the frequency past which the integrand stays
    below 1e-17; any QUADPACK warning raises :class:`FourierConvergenceError`.
    The put follows by parity.
    """
    x = log_moneyness
    u = np.geomspace(1.0, 1e7, 600)
    size = np.exp(log_cf(u - 0.5j).real) / (u * u + 0.25)
    above = np.nonzero(~(size < 1e-17))[0]
    if above.size and above[-1] == u.size - 1:
        raise FourierConvergenceError(f"the {what} integrand has not decayed by frequency 1e7")
    upper = float(u[above[-1] + 1]) if above.size else 1.0

    def g(v):
        return np.exp(log_cf(np.array([v - 0.5j]))[0]) / (v * v + 0.25)

    opts = {"epsabs": 1e-14, "epsrel": 1e-13, "limit": 2000}
    # one piece per decade: a spiky law's integrand decays slowly over many
    # decades, more than one adaptive subdivision budget resolves at once
    edges = np.concatenate([[0.0], np.geomspace(1.0, upper, max(2, int(np.log10(upper)) + 2))])
    val = 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("error", integrate.IntegrationWarning)
        try:
            for lo, hi in itertools.pairwise(edges):
                if abs(x) * hi < 1.0:
                    val += integrate.quad(
                        lambda v: (np.exp(1j * v * x) * g(v)).real, lo, hi, **opts
                    )[0]
                else:
                    re = integrate.quad(lambda v: g(v).real, lo, hi, weight="cos", wvar=x, **opts)
                    im = integrate.quad(lambda v: g(v).imag, lo, hi, weight="sin", wvar=x, **opts)
                    val += re[0] - im[0]
        except integrate.IntegrationWarning as exc:
            raise FourierConvergenceError(
                f"the {what} adaptive Fourier integral did not converge: {exc}"
            ) from exc
    call = strike * np.exp(x) * mean - strike * np.exp(0.5 * x) / np.pi * val
    return float(call - (strike * np.exp(x) * mean - strike))


def _certified_put(log_cf, log_moneyness, strike, mean, spot, what):
    """The certified COS put, or the adaptive-quadrature one when COS cannot certify."""
    try:
        return cos_put(log_cf, log_moneyness, strike, spot, what)
    except FourierConvergenceError as cos_error:
        try:
            return _quad_put(log_cf, log_moneyness, strike, mean, what)
        except FourierConvergenceError as quad_error:
            raise FourierConvergenceError(
                f"{cos_error}; the adaptive-quadrature fallback failed too: {quad_error}"
            ) from quad_error


def _from_put(kind, put, mean, strike, discount):
    """Discounted call or put from the undiscounted put and ``E[underlying] = mean``.

    The call comes from parity ``C = P + DF (mean - K)``, kept inside the
    no-arbitrage bounds, as for Europeans in :mod:`rootvar.core.fourier.cos`.
    """
    upper_put = discount * strike
    put = float(np.clip(discount * put, max(discount * (strike - mean), 0.0), upper_put))
    if kind == "put":
        return put
    gap = discount * (mean - strike)
    return float(np.clip(put + gap, max(gap, 0.0), discount * mean))


def geometric_asian_price(params, spot, product, rate=0.0, div_yield=0.0):
    """Discrete geometric average-price Asian call or put under Heston, by Fourier.

    Parameters
    ----------
    params : HestonParams
    spot : float
        Spot today, > 0.
    product : AsianOption
        With ``average="geometric"``; pays at its last fixing date.
    rate, div_yield : float
        Continuously compounded rate and dividend yield (decimals).

    Returns
    -------
    float
        Price in the currency of ``spot``, certified to about
        ``RANGE_TOL x spot`` (1e-10 x spot) by the COS series, or to
        QUADPACK's tolerance by the fallback (module notes).

    Raises
    ------
    InputError
        Bad arguments, or an arithmetic-average product (no closed form).
    FourierConvergenceError
        When neither the series nor the fallback can be certified (module
        notes).

    Notes
    -----
    With ``Y = (1/N) sum_j ln(S_{t_j} / S_0)`` and ``G = S_0 e^Y``, the joint
    characteristic function gives ``phi_Y(u) = E[e^{iuY}]`` with all weights
    ``z_j = iu / N`` (:func:`rootvar.core.fourier.joint_cf.joint_log_mgf`, Kim & Wee
    2014).  The put ``e^{-r t_N} E[(K - G)^+]`` is the COS series of
    Fang & Oosterlee (2008) on ``phi_Y``, certified as described in the
    module notes; the call follows from parity with
    ``E[G] = S_0 E[e^Y]``, the joint moment generating function at real
    weights ``1/N``.

    References
    ----------
    Kim, B. & Wee, I.-S. (2014). Pricing of geometric Asian options under
    Heston's stochastic volatility model. Quantitative Finance 14(10).
    Fang, F. & Oosterlee, C. W. (2008). A novel pricing method for European
    options based on Fourier-cosine series expansions. SIAM J. Sci. Comput.
    31(2), 826-848.
    """
    spot, rate, div_yield = _common(params, spot, rate, div_yield)
    if not isinstance(product, AsianOption):
        raise InputError(f"product must be an AsianOption, got {type(product).__name__}")
    if product.average != "geometric":
        raise InputError(
            f"product.average must be 'geometric' for the Fourier price, got {product.average!r}"
        )
    dates = np.asarray(product.fixings)
    n = dates.size
    drift = rate - div_yield

    def log_cf(u):
        weights = np.repeat((1j * np.asarray(u, dtype=complex) / n)[:, None], n, axis=1)
        return joint_log_mgf(weights, dates, params, drift)

    # E[G] / S_0 = E[e^Y]: the joint moment generating function at weights 1/N
    mean_y = joint_log_mgf(np.full((1, n), 1.0 / n), dates, params, drift)[0].real
    mean = spot * float(np.exp(mean_y))
    strike = product.strike
    put = _certified_put(
        log_cf, np.log(spot / strike), strike, mean / spot, spot, "geometric Asian"
    )
    return _from_put(product.kind, put, mean, strike, np.exp(-rate * product.maturity))


def forward_start_log_cf(params, t0, big_t, drift):
    """``u -> log E~[e^{iuR}]``, ``R = ln(S_T / S_t0)`` under the ``S_t0`` measure."""
    dates = np.array([t0, big_t]) if t0 > 0 else np.array([big_t])

    def log_cf(u):
        iu = 1j * np.asarray(u, dtype=complex)
        weights = np.stack([1.0 - iu, iu], axis=1) if t0 > 0 else iu[:, None]
        return joint_log_mgf(weights, dates, params, drift) - drift * t0

    return log_cf


def forward_start_price(params, spot, product, rate=0.0, div_yield=0.0):
    """Forward-start call or put under Heston, by Fourier.

    Parameters
    ----------
    params : HestonParams
    spot : float
        Spot today, > 0.
    product : ForwardStartOption
        Strike ``k S_t0`` set at ``start = t0``, paid at ``maturity = T``.
    rate, div_yield : float
        Continuously compounded rate and dividend yield (decimals).

    Returns
    -------
    float
        Price in the currency of ``spot``, certified to about
        ``RANGE_TOL x spot`` (1e-10 x spot) by the COS series, or to
        QUADPACK's tolerance by the fallback (module notes).

    Raises
    ------
    InputError
        Bad arguments.
    FourierConvergenceError
        When neither the series nor the fallback can be certified (module
        notes).

    Notes
    -----
    At ``t0`` the option is ``S_t0`` times a European on a unit spot with
    strike ``k``, maturity ``tau = T - t0`` and initial variance ``v_t0``, so
    its price is the expectation of that European price over the law of
    ``v_t0`` (Kruse & Nögel 2005).  Taking ``S_t0`` as numeraire,

    .. math::
        V = e^{-rT} S_0 e^{(r-q) t_0}\\,\\tilde E\\big[(e^R - k)^+\\big],\\quad
        R = \\ln(S_T / S_{t_0}),

    and the characteristic function of ``R`` under that measure is the joint
    one at weights ``(1 - iu, iu)`` on ``(ln S_t0, ln S_T)``:

    .. math::
        \\tilde E[e^{iuR}] = e^{A_2(u) + A_1 + B_1 v_0 - (r-q) t_0},

    where ``(A_2, B_2)`` is the Heston exponent over ``tau`` at ``iu`` and
    ``(A_1, B_1)`` the step over ``t0`` with log-price weight 1 and variance
    weight ``B_2``.  ``e^{A_1 + B_1 v_0 - (r-q) t_0}`` is the moment generating
    function ``E[e^{B_2 v_t0}]`` of the variance under the share measure, a
    CIR law with speed ``kappa - rho sigma`` and the same ``kappa theta``:
    the scaled noncentral chi-square mixing of Kruse & Nögel in closed form.
    The put ``E~[(k - e^R)^+]`` is the certified COS series; the call comes
    from parity with ``E~[e^R] = e^{(r-q) tau}``:

    .. math:: C - P = S_0 e^{-qT} - k S_0 e^{-q t_0} e^{-r (T - t_0)}.

    References
    ----------
    Kruse, S. & Nögel, U. (2005). On the pricing of forward starting options
    in Heston's model on stochastic volatility. Mathematical Methods of
    Operations Research 62.
    Fang, F. & Oosterlee, C. W. (2008). SIAM J. Sci. Comput. 31(2), 826-848.
    """
    spot, rate, div_yield = _common(params, spot, rate, div_yield)
    if not isinstance(product, ForwardStartOption):
        raise InputError(f"product must be a ForwardStartOption, got {type(product).__name__}")
    drift = rate - div_yield
    t0, big_t, share = product.start, product.maturity, product.strike_share
    log_cf = forward_start_log_cf(params, t0, big_t, drift)
    # unit spot at t0: the series prices E~[k (1 - e^{R - ln k})^+]
    mean = np.exp(drift * (big_t - t0))  # E~[e^R]
    put = _certified_put(log_cf, -np.log(share), share, mean, 1.0, "forward-start")
    scale = spot * np.exp(drift * t0)  # E[S_t0]: the numeraire's value
    return scale * _from_put(product.kind, put, mean, share, np.exp(-rate * big_t))
