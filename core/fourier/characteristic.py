"""Characteristic function of the Heston log-price, in the form without branch-cut jumps."""

from __future__ import annotations

import numpy as np

from rootvar.core.fourier.cos_kernels import log_cf_array
from rootvar.core.params import HestonParams

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
    Heston's (1993) original form.  Evaluated by the compiled kernel
    :func:`rootvar.core.fourier.cos_kernels.log_cf_array`, with the principal square
    root and logarithm from real operations (numpy's complex log takes a slow
    extra-precision path near ``|z| = 1``, where this argument lives).

    References
    ----------
    Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
    Heston trap. Wilmott Magazine, January 2007, 83-92.
    """
    p = params
    u, t = np.broadcast_arrays(np.asarray(u, dtype=complex), np.asarray(maturity, dtype=float))
    model = np.array([p.kappa, p.theta, p.vol_of_vol, p.rho, p.v0])
    flat = log_cf_array(u.ravel(), t.ravel(), model, float(drift))
    return flat.reshape(u.shape)


def log_return_cumulants(params: HestonParams, maturity, drift=0.0):
    """First two cumulants of ``ln(S_T / S_0)``: mean and variance.

    The mean is closed form (Fang & Oosterlee 2008, Table 11).  The variance
    is the second derivative of the log characteristic function at zero taken
    by a central difference: the published closed form loses every digit to
    cancellation when ``kappa T`` is small (1 day at kappa 0.05), and the
    cumulants only place the truncation range, which is verified afterwards.
    Where the difference is below a thousandth of the expected integrated
    variance (the characteristic function has lost its digits), that variance
    is used instead.
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
    # where the characteristic function itself has lost its small real part
    # (vol_of_vol 1e-3 over 25 years at kappa 24: kappa theta / sigma^2 times a
    # difference of order sigma^2), the difference comes out near 0 and the
    # range would have no width; the expected integrated variance, the leading
    # term of the variance, places it instead (the range is verified anyway)
    c2 = np.where(c2 > 1e-3 * m, c2, m)
    c2 = np.maximum(c2, 1e-300)
    return c1, c2
