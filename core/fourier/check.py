"""The slow check method: Lewis's single integral, integrated adaptively.

Shares no pricing code with the COS method: the characteristic function is
written again here in the form of Cui, del Baño Rollin & Germano (2017), and
the integral is handed to QUADPACK (``scipy.integrate.quad``) with its
oscillatory weights.  It is meant for verification and for the rare inputs
the COS method cannot certify, not for surfaces.
"""

from __future__ import annotations

import itertools
import warnings

import numpy as np
from scipy import integrate

__all__ = ["FourierCheckError", "lewis_call_price", "martingale_cf"]


class FourierCheckError(ArithmeticError):
    """The adaptive integral did not reach its tolerance."""


def martingale_cf(u, params, maturity):
    """``E[exp(i u X_T)]`` with ``X_T = ln(S_T / S_0) - (r - q) T``.

    Notes
    -----
    With ``xi = kappa - sigma rho i u`` and ``d = sqrt(xi^2 + sigma^2 (u^2 + i u))``,

    .. math::
        \\ln\\varphi = -\\frac{\\kappa\\theta\\rho T i u}{\\sigma} - v_0 A
        + \\frac{2\\kappa\\theta}{\\sigma^2} D,\\quad
        A = \\frac{(u^2 + iu)\\sinh(dT/2)}{d\\cosh(dT/2) + \\xi\\sinh(dT/2)},

    ``D = ln d + (kappa - d) T / 2 - ln((d + xi)/2 + (d - xi)/2 e^{-dT})``;
    the hyperbolic functions are divided through by ``e^{dT/2}`` so nothing
    overflows at long maturities.

    References
    ----------
    Cui, Y., del Baño Rollin, S. & Germano, G. (2017). Full and fast
    calibration of the Heston stochastic volatility model. European Journal
    of Operational Research 263(2), 625-638, eq. (18).
    """
    p = params
    u = np.asarray(u, dtype=complex)
    xi = p.kappa - p.vol_of_vol * p.rho * 1j * u
    d = np.sqrt(xi * xi + p.vol_of_vol**2 * (u * u + 1j * u))
    e = np.exp(-d * maturity)
    a = (u * u + 1j * u) * (1.0 - e) / (d * (1.0 + e) + xi * (1.0 - e))
    big_d = np.log(d) + 0.5 * (p.kappa - d) * maturity - np.log(0.5 * (d + xi) + 0.5 * (d - xi) * e)
    log_phi = (
        -p.kappa * p.theta * p.rho * maturity * 1j * u / p.vol_of_vol
        - p.v0 * a
        + 2.0 * p.kappa * p.theta / p.vol_of_vol**2 * big_d
    )
    return np.exp(log_phi)


def _upper_limit(params, maturity, tol=1e-17):
    """First u at which |cf(u - i/2)| / (u^2 + 1/4) stays below ``tol``."""
    u = np.geomspace(1.0, 1e8, 600)
    size = np.abs(martingale_cf(u - 0.5j, params, maturity)) / (u * u + 0.25)
    above = np.nonzero(size >= tol)[0]
    return float(u[min(above[-1] + 1, u.size - 1)]) if above.size else 1.0


#: Geometric pieces of ``[0, upper]`` for the second try of the integral.
PIECES = 40


def _lewis_integral(g, k, upper, epsabs, pieces):
    """``int_0^upper Re[e^{iuk} g(u)] du`` by QUADPACK, over ``pieces`` geometric pieces.

    One piece: QAGS, or QAWO for the cos and sin parts when ``|k| upper >= 1``.
    More: the same rules on ``[0, u_1], [u_1, u_2], ...`` with ``u_j``
    geometric from ``1e-2`` to ``upper``, summed.  Raises
    ``IntegrationWarning`` when any piece misses its tolerance.
    """
    edges = [0.0, upper] if pieces == 1 else [0.0, *np.geomspace(1e-2, upper, pieces)]
    tol = epsabs / (len(edges) - 1)
    opts = {"epsabs": tol, "epsrel": 1e-13, "limit": 2000}
    total = 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("error", integrate.IntegrationWarning)
        for a, b in itertools.pairwise(edges):
            if abs(k) * upper < 1.0:
                total += integrate.quad(lambda u: (np.exp(1j * u * k) * g(u)).real, a, b, **opts)[0]
            else:  # QUADPACK's oscillatory rule (QAWO) for the cos and sin parts
                re = integrate.quad(lambda u: g(u).real, a, b, weight="cos", wvar=k, **opts)[0]
                im = integrate.quad(lambda u: g(u).imag, a, b, weight="sin", wvar=k, **opts)[0]
                total += re - im
    return total


def lewis_call_price(params, spot, strike, maturity, rate=0.0, div_yield=0.0, epsabs=1e-13):
    """Call prices by Lewis's formula and adaptive quadrature.

    Parameters
    ----------
    params : HestonParams
    spot : float
        Spot price, > 0.
    strike : array_like
        Strikes, > 0.
    maturity : float
        Years, > 0.
    rate, div_yield : float
        Continuous decimals.
    epsabs : float
        Absolute tolerance on the integral (which is multiplied by
        ``sqrt(S K) e^{-(r+q)T/2} / pi``).

    Returns
    -------
    ndarray
        Call prices.

    Raises
    ------
    FourierCheckError
        When QUADPACK reports that the tolerance was not reached, on the
        whole interval and then on ``PIECES`` geometric pieces of it.

    Notes
    -----
    .. math:: C = S e^{-qT} - \\frac{\\sqrt{SK}\\,e^{-(r+q)T/2}}{\\pi}
              \\int_0^\\infty \\mathrm{Re}\\big[e^{iuk}\\varphi(u - i/2)\\big]
              \\frac{du}{u^2 + 1/4},\\qquad k = \\ln(S/K) + (r - q)T.

    References
    ----------
    Lewis, A. L. (2001). A simple option formula for general jump-diffusion
    and other exponential Lévy processes. Envision Financial Systems.
    Piessens, R. et al. (1983). QUADPACK. Springer (QAG and QAWO routines).
    """
    strike = np.atleast_1d(np.asarray(strike, dtype=float))
    upper = _upper_limit(params, maturity)

    def g(u):
        return martingale_cf(u - 0.5j, params, maturity) / (u * u + 0.25)

    out = np.empty(strike.shape)
    for i, k_strike in enumerate(strike):
        k = np.log(spot / k_strike) + (rate - div_yield) * maturity
        try:
            val = _lewis_integral(g, k, upper, epsabs, pieces=1)
        except integrate.IntegrationWarning:
            # one adaptive rule over [0, upper] can stall where the integrand
            # decays over six decades of u (vol_of_vol 5.9, v0 9e-6: found by a
            # sweep); the same rules on geometric pieces, summed, converge there
            try:
                val = _lewis_integral(g, k, upper, epsabs, pieces=PIECES)
            except integrate.IntegrationWarning as exc:
                raise FourierCheckError(
                    f"adaptive Fourier integral did not converge for strike {k_strike!r}, "
                    f"maturity {maturity!r}: {exc}"
                ) from exc
        scale = np.sqrt(spot * k_strike) * np.exp(-0.5 * (rate + div_yield) * maturity) / np.pi
        out[i] = spot * np.exp(-div_yield * maturity) - scale * val
    return out
