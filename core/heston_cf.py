"""Characteristic function of the Heston log-price, in the form without branch-cut jumps."""

from __future__ import annotations

import numpy as np

from .params import HestonParams

__all__ = ["heston_log_cf", "log_return_cumulants"]


def heston_log_cf(u, params: HestonParams, maturity, drift=0.0):
    """``log E[exp(i u ln(S_T / S_0))]`` under Heston.

    Parameters
    ----------
    u : array_like of complex
        Fourier argument(s).
    params : HestonParams
    maturity : float or array_like
        Years, > 0 (broadcast against ``u``).
    drift : float
        ``(rate - div_yield)``, continuous decimal per year.

    Notes
    -----
    With ``xi = kappa - rho sigma i u``, ``d = sqrt(xi^2 + sigma^2 (u^2 + i u))``
    (principal root, ``Re d >= 0``) and ``g = (xi - d) / (xi + d)``:

    .. math::
        \\ln\\varphi = i u \\mu T + \\frac{\\kappa\\theta}{\\sigma^2}\\Big[(\\xi - d)T
        - 2\\ln\\frac{1 - g e^{-dT}}{1 - g}\\Big]
        + \\frac{v_0}{\\sigma^2}(\\xi - d)\\frac{1 - e^{-dT}}{1 - g e^{-dT}}.

    Written with ``e^{-dT}`` (which never overflows) and ``|g| <= 1``, the
    principal logarithm never crosses its branch cut for real ``u``, unlike
    Heston's (1993) original form.

    References
    ----------
    Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
    Heston trap. Wilmott Magazine, January 2007, 83-92.
    """
    p = params
    u = np.asarray(u, dtype=complex)
    t = np.asarray(maturity, dtype=float)
    sig2 = p.vol_of_vol**2
    xi = p.kappa - p.rho * p.vol_of_vol * 1j * u
    d = _principal_sqrt(xi * xi + sig2 * (u * u + 1j * u))
    xi_minus_d = xi - d
    g = xi_minus_d / (xi + d)
    # exp(-d T) with its modulus floored at e^-700: it only enters next to 1,
    # and the floor keeps the exponential off the slow subnormal path
    e = np.exp(np.maximum(-(d.real * t), -700.0) - 1j * (d.imag * t))
    one_minus_ge = 1.0 - g * e
    c = p.kappa * p.theta / sig2 * (xi_minus_d * t - 2.0 * _principal_log(one_minus_ge / (1.0 - g)))
    dpart = xi_minus_d / sig2 * (1.0 - e) / one_minus_ge
    return 1j * u * drift * t + c + p.v0 * dpart


def _principal_sqrt(z):
    """Principal square root (``Re >= 0``) from real operations.

    Same branch as ``numpy.sqrt`` on complex input, about three times faster
    here; the half-sum form has no cancellation for either sign of ``Re z``.
    Valid for ``1e-150 < |z| < 1e150`` (the squares must not under- or
    overflow), far wider than the arguments of the characteristic function.
    """
    re, im = z.real, z.imag
    t = np.sqrt(0.5 * (np.abs(re) + np.sqrt(re * re + im * im)))
    half = np.divide(0.5 * im, t, out=np.zeros_like(t), where=t > 0)
    right = re >= 0
    return np.where(right, t, np.abs(half)) + 1j * np.where(right, half, np.copysign(t, im))


def _principal_log(z):
    """Principal logarithm (argument in ``(-pi, pi]``) from real operations.

    ``numpy.log`` on complex input takes a slow extra-precision path near
    ``|z| = 1``, where this argument lives (measured up to 8 times slower);
    the real form loses only relative accuracy of ``ln|z|`` near zero, i.e.
    stays within ~1e-16 absolute, which is what the exponent needs.  Valid
    for ``1e-150 < |z| < 1e150``, as :func:`_principal_sqrt`.
    """
    re, im = z.real, z.imag
    return 0.5 * np.log(re * re + im * im) + 1j * np.arctan2(im, re)


def log_return_cumulants(params: HestonParams, maturity, drift=0.0):
    """First two cumulants of ``ln(S_T / S_0)``: mean and variance.

    The mean is closed form (Fang & Oosterlee 2008, Table 11).  The variance
    is the second derivative of the log characteristic function at zero taken
    by a central difference: the published closed form loses every digit to
    cancellation when ``kappa T`` is small (1 day at kappa 0.05), and the
    cumulants only place the truncation range, which is verified afterwards.
    """
    p = params
    t = np.asarray(maturity, dtype=float)
    kt = p.kappa * t
    one_minus = -np.expm1(-kt)
    c1 = drift * t + one_minus * (p.theta - p.v0) / (2.0 * p.kappa) - 0.5 * p.theta * t
    # expected integrated variance sets the scale of the difference step
    m = p.theta * t + (p.v0 - p.theta) * one_minus / p.kappa
    h = 1e-3 / np.sqrt(np.maximum(m, 1e-300))
    h = np.minimum(h, 1e-2)
    # log cf(0) = 0 and the real part is even in u: c2 = -(Re lcf(h) + Re lcf(-h)) / h^2
    c2 = -(heston_log_cf(h, p, t).real + heston_log_cf(-h, p, t).real) / (h * h)
    c2 = np.maximum(c2, 1e-300)
    return c1, c2
