"""Compiled kernels of the Fourier Greeks: the COS sums of a put and of its derivatives.

Three kernels, with the formulas of :mod:`rootvar.core.fourier.greeks` (see
its docstring):

* :func:`greek_coefficients`: the characteristic function with its five
  parameter derivatives (:data:`rootvar.core.fourier.gradient_kernels.log_cf_gradient_at`)
  and its derivative in maturity, times the phase ``e^{-i w a}``, on the
  doubled (certified) range's frequencies, and on the certified range's,
  which are the doubled range's even ones: one evaluation serves both.  They
  depend on the model and the range only, so a column of cells at one
  maturity pays for them once (the caller caches them).
* :func:`greek_payoff_sums`: the nine sums per strike the Greeks are read from.
* :func:`greek_tails`: bounds on the terms each sum leaves out past a frequency.

The kernels release the GIL.
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from rootvar.core.fourier.gradient_kernels import log_cf_gradient_at
from rootvar.core.runtime import njit

__all__ = [
    "COLUMNS",
    "SUMS",
    "greek_coefficients",
    "greek_payoff_sums",
    "greek_tails",
    "maturity_derivative_at",
]

#: The sums :func:`greek_payoff_sums` returns per range and strike, in order; the
#: first seven are also the coefficient columns of :func:`greek_coefficients`.
SUMS = (
    "put",
    "d_v0",
    "d_kappa",
    "d_theta",
    "d_vol_of_vol",
    "d_rho",
    "d_maturity",
    "delta",
    "density",
)

#: Columns of a coefficient row: the seven sums' coefficients, then ``w``,
#: ``1 / w`` (0 at ``w = 0``) and ``1 / (1 + w^2)``.
COLUMNS = 10

#: Terms between exact restarts of a running phase product (rounding grows with it).
_RESTART = 32


@njit(cache=True, inline="always")
def maturity_derivative_at(u, kappa, theta, sig, rho, v0, drift, b):
    """``d ln phi / dT`` from ``b = d ln phi / d v0`` (the Riccati equations).

    ``ln phi = i u mu T + A(T) + B(T) v0`` with ``A' = kappa theta B`` and
    ``B' = sig^2 B^2 / 2 - (kappa - rho sig i u) B - (u^2 + i u) / 2``.
    """
    iu = 1j * u
    riccati = 0.5 * sig * sig * b * b - (kappa - rho * sig * iu) * b - 0.5 * (u * u + iu)
    return iu * drift + kappa * theta * b + v0 * riccati


@njit(cache=True, nogil=True)
def greek_coefficients(step, count, t, model, drift, lower):
    """Coefficient rows of the Greeks' COS sums on a range and on its double.

    Parameters
    ----------
    step : float
        Frequency spacing of the doubled range (half the certified range's).
    count : int
        Frequencies ``j step``, ``j < count``, of the doubled range; the
        certified range has the even ones (``count // 2`` rows; ``count`` even).
    t, model, drift
        Maturity (years), ``(v0, kappa, theta, vol_of_vol, rho)``, ``rate - div_yield``.
    lower : array of 2
        Lower ends ``a`` of the certified range and of its double.

    Returns
    -------
    base, wide : ndarray, shape (terms, COLUMNS)
        Per frequency ``w``: ``Re[phi e^{-i w a}]`` and ``Re[phi (d ln phi / dp) e^{-i w a}]``
        for the five parameters and the maturity (first row halved: the primed
        sum), then ``w``, ``1 / w`` and ``1 / (1 + w^2)``.
    """
    v0, kappa, theta, sig, rho = model[0], model[1], model[2], model[3], model[4]
    wide = np.empty((count, COLUMNS))
    base = np.empty((count // 2, COLUMNS))
    for j in range(count):
        w = j * step
        r = log_cf_gradient_at(w, t, kappa, theta, sig, rho, v0, drift)
        d_t = maturity_derivative_at(w, kappa, theta, sig, rho, v0, drift, r[1])
        cf = cmath.exp(r[0])
        for g in range(2):
            if g == 0 and j % 2 == 1:  # the certified range owns the even frequencies
                continue
            row = wide[j] if g == 1 else base[j // 2]
            z = cf * cmath.exp(complex(0.0, -w * lower[g]))
            if j == 0:
                z *= 0.5
            row[0] = z.real
            for p in range(1, 6):
                row[p] = (r[p] * z).real
            row[6] = (d_t * z).real
            row[7] = w
            row[8] = 1.0 / w if w > 0.0 else 0.0
            row[9] = 1.0 / (1.0 + w * w)
    return base, wide


@njit(cache=True, inline="always")
def _range_sums(coef, a, b, log_moneyness, strike, out):
    """The nine sums of every strike on one range ``[a, b]`` into ``out`` (9, strikes)."""
    n = coef.shape[0]
    step = coef[1, 7] if n > 1 else 0.0
    scale = 2.0 / (b - a)
    exp_a = math.exp(a)
    for s in range(strike.size):
        x = log_moneyness[s]
        cut = min(max(-x, a), b)
        exp_cut = math.exp(cut)
        exp_x = math.exp(x)
        theta = step * (cut - a)
        turn = cmath.exp(1j * theta)
        acc = np.zeros(9)
        wave = 1.0 + 0j
        for k in range(n):
            if k % _RESTART == 0:
                wave = cmath.exp(1j * (k * theta))
            else:
                wave *= turn
            c = coef[k]
            sin_arg, cos_arg = wave.imag, wave.real
            psi = sin_arg * c[8] if k > 0 else cut - a
            chi = (cos_arg * exp_cut - exp_a + c[7] * sin_arg * exp_cut) * c[9]
            v = psi - exp_x * chi
            for p in range(7):
                acc[p] += c[p] * v
            acc[7] += c[0] * chi
            acc[8] += c[0] * cos_arg
        for p in range(7):
            out[p, s] = scale * strike[s] * acc[p]
        out[7, s] = -scale * acc[7]
        out[8, s] = scale * acc[8] if a < -x < b else 0.0


@njit(cache=True, nogil=True)
def greek_payoff_sums(base, wide, lower, upper, log_moneyness, strike, cdf_points):
    """The Greeks' COS sums on a range and its double, and the double's cdf.

    Parameters
    ----------
    base, wide : ndarray
        Coefficient rows from :func:`greek_coefficients`.
    lower, upper : arrays of 2
        ``[a, b]`` of ``ln(S_T / S_0)``: the certified range, then its double.
    log_moneyness, strike : 1-d arrays
        ``x = ln(S_0 / K)`` and ``K`` per strike.
    cdf_points : 1-d array
        Points at which the doubled range's cdf of ``ln(S_T / S_0)`` is returned.

    Returns
    -------
    sums : ndarray, shape (2, 9, strikes)
        Per range (certified, doubled) the sums named in :data:`SUMS`: the
        undiscounted put ``sum' Re[phi e^{-i w a}] V_k``, ``V_k = (2 / (b - a))
        K (psi_k - e^x chi_k)`` (Fang & Oosterlee 2008, eqs. 22-23, the kink
        ``-x`` clipped to the range); the same with ``phi`` times
        ``d ln phi / dp`` for the five parameters and the maturity;
        ``d put / d S_0 = -(2 / (b - a)) sum' Re[phi e^{-i w a}] chi_k``; and
        the COS density of ``ln(S_T / S_0)`` at ``-x`` (0 outside the range).
    cdf : ndarray
        ``(2 / (b - a)) sum' Re[phi e^{-i w a}] sin(w (c - a)) / w`` on the
        doubled range (its first term ``c - a``).

    Notes
    -----
    ``e^{i w_k (c - a)}`` is a running product restarted exactly every
    ``_RESTART`` terms, so that no trigonometric function is taken per term
    and the rounding of the phases stays some 30 roundings.
    """
    out = np.empty((2, 9, strike.size))
    _range_sums(base, lower[0], upper[0], log_moneyness, strike, out[0])
    _range_sums(wide, lower[1], upper[1], log_moneyness, strike, out[1])
    cdf = np.empty(cdf_points.size)
    a = lower[1]
    for q in range(cdf_points.size):
        span = cdf_points[q] - a
        total = wide[0, 0] * span
        for k in range(1, wide.shape[0]):
            total += wide[k, 0] * math.sin(wide[k, 7] * span) * wide[k, 8]
        cdf[q] = 2.0 / (upper[1] - lower[1]) * total
    return out, cdf


@njit(cache=True, nogil=True)
def greek_tails(u, t, model, drift, spot, max_strike, disc):
    """Bounds on the terms each of the nine sums leaves out past each ``u``, shape (9, n).

    ``u`` is increasing.  The envelopes (discounted, in the unit of the Greek
    each sum gives; see :func:`rootvar.core.fourier.greeks.heston_greeks`)
    are ``(4 K / pi) |phi d ln phi / dp| / u^2`` for the put-like sums
    (``d ln phi / dp = 1`` for the put itself),
    ``(2 / pi) (K / S_0) |phi| (2 + u) / (1 + u^2)`` for delta and
    ``(2 / pi) (K / S_0^2) |phi|`` for gamma, integrated from ``u[i]`` to
    ``u[-1]``, each interval at its larger end.
    """
    v0, kappa, theta, sig, rho = model[0], model[1], model[2], model[3], model[4]
    n = u.size
    f = np.empty((9, n))
    for i in range(n):
        w = u[i]
        r = log_cf_gradient_at(w, t, kappa, theta, sig, rho, v0, drift)
        d_t = maturity_derivative_at(w, kappa, theta, sig, rho, v0, drift, r[1])
        size = math.exp(r[0].real)
        price_like = disc * 4.0 * max_strike / (math.pi * w * w) * size
        f[0, i] = price_like
        for p in range(1, 6):
            f[p, i] = price_like * abs(r[p])
        f[6, i] = price_like * abs(d_t)
        f[7, i] = disc * 2.0 / math.pi * (max_strike / spot) * size * (2.0 + w) / (1.0 + w * w)
        f[8, i] = disc * 2.0 / math.pi * (max_strike / (spot * spot)) * size
    tail = np.zeros((9, n))
    for i in range(n - 2, -1, -1):
        width = u[i + 1] - u[i]
        for p in range(9):
            tail[p, i] = tail[p, i + 1] + max(f[p, i], f[p, i + 1]) * width
    return tail
