"""Compiled kernels of the calibration: the characteristic function with its five
parameter derivatives, and the COS sums of prices and gradients for a surface.

The formulas are those of :func:`rootvar.core.fourier.gradient.log_cf_gradient`
(see its docstring), evaluated one frequency at a time: no intermediate
arrays, and the six COS sums (price and five derivatives) of every strike of
a maturity are accumulated in the same pass over its frequencies.  The
kernels release the GIL, so the start points of a multi-start fit run side by
side on threads.  The plain numpy version they replaced is kept in
``tests/gradient_reference.py`` as their oracle.
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from rootvar.core.fourier.cos_kernels import principal_log, principal_sqrt
from rootvar.core.runtime import njit

__all__ = ["log_cf_gradient_array", "log_cf_gradient_at", "put_coefficients", "surface_sums"]


@njit(cache=True, inline="always")
def _pieces(dxi, dd, g, e, t, a, frac, inv_b, inv_one_ge, inv_one_g):
    """Derivatives of ``A T - 2 L`` and of ``A (1 - e) / (1 - g e)`` from ``dxi`` and ``dd``."""
    da = dxi - dd
    dg = (da - g * (dxi + dd)) * inv_b
    de = -t * e * dd
    dge = dg * e + g * de
    dl = -dge * inv_one_ge + dg * inv_one_g
    dfrac = (-de + frac * dge) * inv_one_ge
    return da * t - 2.0 * dl, da * frac + a * dfrac


@njit(cache=True, inline="always")
def _log_cf_gradient(u, t, kappa, theta, sig, rho, v0, drift):
    """``ln phi`` at real ``u`` and its derivatives in (v0, kappa, theta, vol_of_vol, rho)."""
    sig2 = sig * sig
    iu = 1j * u
    xi = kappa - rho * sig * iu
    quad = u * u + iu
    d = principal_sqrt(xi * xi + sig2 * quad)
    inv_d = 1.0 / d
    a = xi - d
    inv_b = 1.0 / (xi + d)
    g = a * inv_b
    # exp(-d T) with its modulus floored at e^-700, as in the pricer
    e = cmath.exp(complex(max(-(d.real * t), -700.0), -(d.imag * t)))
    one_ge = 1.0 - g * e
    inv_one_ge = 1.0 / one_ge
    inv_one_g = 1.0 / (1.0 - g)
    big_l = principal_log(one_ge * inv_one_g)
    frac = (1.0 - e) * inv_one_ge
    c_core = a * t - 2.0 * big_l
    kt = kappa * theta / sig2
    v_s2 = v0 / sig2
    a_frac = a * frac
    log_cf = iu * drift * t + kt * c_core + v_s2 * a_frac
    dc_k, dq_k = _pieces(1.0 + 0j, xi * inv_d, g, e, t, a, frac, inv_b, inv_one_ge, inv_one_g)
    dxi_s = -rho * iu
    dc_s, dq_s = _pieces(
        dxi_s, (xi * dxi_s + sig * quad) * inv_d, g, e, t, a, frac, inv_b, inv_one_ge, inv_one_g
    )
    dxi_r = -sig * iu
    dc_r, dq_r = _pieces(dxi_r, xi * dxi_r * inv_d, g, e, t, a, frac, inv_b, inv_one_ge, inv_one_g)
    g_v0 = a_frac / sig2
    g_kappa = theta / sig2 * c_core + kt * dc_k + v_s2 * dq_k
    g_theta = kappa / sig2 * c_core
    g_sig = -2.0 / sig * (kt * c_core + v_s2 * a_frac) + kt * dc_s + v_s2 * dq_s
    g_rho = kt * dc_r + v_s2 * dq_r
    return log_cf, g_v0, g_kappa, g_theta, g_sig, g_rho


@njit(cache=True, nogil=True)
def log_cf_gradient_array(u, t, model, drift):
    """``ln phi`` and its five derivatives at each ``(u[i], t[i])``, shape (6, n).

    ``model`` is ``(v0, kappa, theta, vol_of_vol, rho)``; row 0 is ``ln phi``,
    rows 1-5 its derivatives in that order.
    """
    out = np.empty((6, u.size), dtype=np.complex128)
    v0, kappa, theta, sig, rho = model[0], model[1], model[2], model[3], model[4]
    for i in range(u.size):
        r = _log_cf_gradient(u[i], t[i], kappa, theta, sig, rho, v0, drift)
        out[0, i], out[1, i], out[2, i] = r[0], r[1], r[2]
        out[3, i], out[4, i], out[5, i] = r[3], r[4], r[5]
    return out


@njit(cache=True, nogil=True)
def put_coefficients(omega, a, b, log_moneyness, strike):
    """Cosine coefficients (times ``2 / (b - a)``) of the put payoff, shape (terms, strikes).

    ``V_k = 2 / (b - a) K (psi_k(a, c) - e^x chi_k(a, c))`` with the cut
    ``c = clip(-x, a, b)`` (Fang & Oosterlee 2008, eqs. 22-23).
    """
    m = strike.size
    out = np.empty((omega.size, m))
    scale = 2.0 / (b - a)
    exp_a = math.exp(a)
    for s in range(m):
        cut = min(max(-log_moneyness[s], a), b)
        exp_cut = math.exp(cut)
        exp_x = math.exp(log_moneyness[s])
        for k in range(omega.size):
            w = omega[k]
            arg = w * (cut - a)
            sin_arg = math.sin(arg)
            psi = sin_arg / w if w > 0.0 else cut - a
            chi = (math.cos(arg) * exp_cut - exp_a + w * sin_arg * exp_cut) / (1.0 + w * w)
            out[k, s] = scale * strike[s] * (psi - exp_x * chi)
    return out


@njit(cache=True, nogil=True)
def surface_sums(omega, times, phase, term_ends, payoff, payoff_starts, quotes, quote_ends, model):
    """COS sums of the price and its five derivatives for every quote, shape (6, n_quotes).

    Parameters
    ----------
    omega, times, phase : 1-d arrays, one entry per frequency
        Every maturity's frequencies laid end to end (maturity ``i`` owns
        ``term_ends[i]:term_ends[i + 1]``), the maturity of each, and the
        factor ``e^{-i omega a}`` (first term of each maturity halved).
    payoff : 1-d array
        Maturity ``i``'s payoff coefficients (discounted), row-major
        (frequency, strike), from ``payoff_starts[i]``.
    quotes, quote_ends : int arrays
        The quotes of maturity ``i`` are ``quotes[quote_ends[i]:quote_ends[i + 1]]``,
        in the order of the payoff's columns.
    model : array
        ``(v0, kappa, theta, vol_of_vol, rho, drift)``.

    Notes
    -----
    ``P = sum'_k Re[phi(w_k) e^{-i w_k a}] V_k`` and
    ``dP/dp = sum'_k Re[phi(w_k) (d ln phi / dp)(w_k) e^{-i w_k a}] V_k``.
    """
    v0, kappa, theta, sig, rho, drift = model[0], model[1], model[2], model[3], model[4], model[5]
    n_quotes = quotes.size
    out = np.zeros((6, n_quotes))
    most = 0
    for i in range(quote_ends.size - 1):
        most = max(most, quote_ends[i + 1] - quote_ends[i])
    acc = np.empty((most, 6))
    coef = np.empty(6)
    for i in range(term_ends.size - 1):
        first, count = quote_ends[i], quote_ends[i + 1] - quote_ends[i]
        if count == 0:
            continue
        acc[:count, :] = 0.0
        base = payoff_starts[i]
        for k in range(term_ends[i], term_ends[i + 1]):
            r = _log_cf_gradient(omega[k], times[k], kappa, theta, sig, rho, v0, drift)
            cf = cmath.exp(r[0]) * phase[k]
            coef[0] = cf.real
            coef[1] = (r[1] * cf).real
            coef[2] = (r[2] * cf).real
            coef[3] = (r[3] * cf).real
            coef[4] = (r[4] * cf).real
            coef[5] = (r[5] * cf).real
            row = base + (k - term_ends[i]) * count
            for s in range(count):
                v = payoff[row + s]
                for j in range(6):
                    acc[s, j] += coef[j] * v
        for s in range(count):
            q = quotes[first + s]
            for j in range(6):
                out[j, q] = acc[s, j]
    return out


#: The per-frequency formula of :func:`log_cf_gradient_array`, for the compiled
#: kernels of other modules (the Greeks' sums in ``greeks_kernels``).
log_cf_gradient_at = _log_cf_gradient
