"""Compiled kernels of the Fourier pricer: the characteristic function and the COS sums.

The formulas are those of :func:`rootvar.core.heston_cf.heston_log_cf` and
``rootvar.core.fourier._fourier_sums`` (see their docstrings), evaluated one
number at a time instead of on whole-array temporaries: no intermediate
arrays; the kernels release the GIL.
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from .numba_setup import numba

__all__ = ["cf_array", "fourier_sums", "log_cf_array", "principal_log", "principal_sqrt"]

njit = numba.njit


@njit(cache=True, inline="always")
def principal_sqrt(z):
    """Principal square root (``Re >= 0``) from real operations.

    The half-sum form has no cancellation for either sign of ``Re z``.  Valid
    for ``1e-150 < |z| < 1e150`` (the squares must not under- or overflow),
    far wider than the arguments of the characteristic function.
    """
    re, im = z.real, z.imag
    t = math.sqrt(0.5 * (abs(re) + math.sqrt(re * re + im * im)))
    half = 0.5 * im / t if t > 0.0 else 0.0
    if re >= 0.0:
        return complex(t, half)
    return complex(abs(half), math.copysign(t, im))


@njit(cache=True, inline="always")
def principal_log(z):
    """Principal logarithm (argument in ``(-pi, pi]``) from real operations.

    ``0.5 ln(re^2 + im^2)`` stays within ~1e-16 absolute near ``|z| = 1``,
    where this argument lives, which is what the exponent needs.  Valid for
    ``1e-150 < |z| < 1e150``.
    """
    re, im = z.real, z.imag
    return complex(0.5 * math.log(re * re + im * im), math.atan2(im, re))


@njit(cache=True, inline="always")
def _log_cf(u, t, kappa, theta, sigma, rho, v0, drift):
    """``log E[exp(i u ln(S_T / S_0))]`` in the form of Albrecher et al. (2007)."""
    sig2 = sigma * sigma
    xi = kappa - rho * sigma * 1j * u
    d = principal_sqrt(xi * xi + sig2 * (u * u + 1j * u))
    xi_minus_d = xi - d
    g = xi_minus_d / (xi + d)
    # exp(-d T) with its modulus floored at e^-700: it only enters next to 1,
    # and the floor keeps the exponential off the slow subnormal path
    e = cmath.exp(complex(max(-(d.real * t), -700.0), -(d.imag * t)))
    one_minus_ge = 1.0 - g * e
    c = kappa * theta / sig2 * (xi_minus_d * t - 2.0 * principal_log(one_minus_ge / (1.0 - g)))
    dpart = xi_minus_d / sig2 * (1.0 - e) / one_minus_ge
    return 1j * u * drift * t + c + v0 * dpart


@njit(cache=True, nogil=True)
def log_cf_array(u, t, model, drift):
    """The log characteristic function at each ``(u[i], t[i])``; ``model`` is
    ``(kappa, theta, vol_of_vol, rho, v0)``."""
    out = np.empty(u.size, dtype=np.complex128)
    kappa, theta, sigma, rho, v0 = model[0], model[1], model[2], model[3], model[4]
    for i in range(u.size):
        out[i] = _log_cf(u[i], t[i], kappa, theta, sigma, rho, v0, drift)
    return out


@njit(cache=True, nogil=True)
def cf_array(omega, t, model, drift):
    """The characteristic function at real ``omega``, one maturity ``t``."""
    out = np.empty(omega.size, dtype=np.complex128)
    kappa, theta, sigma, rho, v0 = model[0], model[1], model[2], model[3], model[4]
    for i in range(omega.size):
        out[i] = cmath.exp(_log_cf(omega[i] + 0j, t, kappa, theta, sigma, rho, v0, drift))
    return out


@njit(cache=True, nogil=True)
def fourier_sums(angle, coef):
    """``sum_k coef[k, p] exp(i k angle[m])`` for every m and column p.

    Splits ``k = l J + j`` with ``J = ceil(sqrt(N))``: for each ``l`` the
    coefficients are multiplied by the far wave ``e^{i l J angle}`` and added
    per ``j``; the near waves ``e^{i j angle}`` finish the sum.  Both waves
    are running products (``J + N / J`` numbers, each carrying about
    ``sqrt(N)`` roundings), so only two complex exponentials are taken per
    angle instead of ``N``.
    """
    n, cols = coef.shape
    near_n = max(1, math.ceil(math.sqrt(n)))
    far_n = -(-n // near_n)
    out = np.zeros((angle.size, cols), dtype=np.complex128)
    for m in range(angle.size):
        near_step = cmath.exp(1j * angle[m])
        far_step = cmath.exp(1j * (near_n * angle[m]))
        partial = np.zeros((near_n, cols), dtype=np.complex128)
        far = 1.0 + 0j
        for ell in range(far_n):
            base = ell * near_n
            for j in range(min(near_n, n - base)):
                for p in range(cols):
                    partial[j, p] += far * coef[base + j, p]
            far *= far_step
        wave = 1.0 + 0j
        for j in range(near_n):
            for p in range(cols):
                out[m, p] += wave * partial[j, p]
            wave *= near_step
    return out
