"""Compiled kernels of the Fourier pricer: the characteristic function and the COS sums.

The formulas are those of :func:`rootvar.core.fourier.characteristic.heston_log_cf` and
``rootvar.core.fourier.series.fourier_sums`` (see their docstrings), evaluated one
number at a time instead of on whole-array temporaries: no intermediate
arrays; the kernels release the GIL.
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from rootvar.core.runtime import njit

__all__ = [
    "cf_array",
    "cos_coefficients",
    "cos_puts",
    "flat_coefficients",
    "flat_sums",
    "log_cf_array",
    "principal_log",
    "principal_sqrt",
]


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


@njit(cache=True, nogil=True, inline="always")
def _finish(out, m, cols, near_n, angle, part_re, part_im):
    """``out[m, p] = sum_j e^{i j angle} partial[j, p]``, the near waves as running products."""
    near_step = cmath.exp(1j * angle)
    wave = 1.0 + 0j
    for j in range(near_n):
        for p in range(cols):
            out[m, p] += wave * complex(part_re[j * cols + p], part_im[j * cols + p])
        wave *= near_step


@njit(cache=True, nogil=True)
def flat_coefficients(coef):
    """``coef`` (``N x cols``, complex) as the real and imaginary arrays
    :func:`flat_sums` reads: row after row, zero-padded to ``J ceil(N / J)`` rows."""
    n, cols = coef.shape
    near_n = max(1, math.ceil(math.sqrt(n)))
    size = -(-n // near_n) * near_n * cols
    flat_re = np.zeros(size)
    flat_im = np.zeros(size)
    for k in range(n):
        for p in range(cols):
            flat_re[k * cols + p] = coef[k, p].real
            flat_im[k * cols + p] = coef[k, p].imag
    return flat_re, flat_im


@njit(cache=True, nogil=True)
def flat_sums(angle, flat_re, flat_im, n, cols):
    """``sum_k coef[k, p] exp(i k angle[m])`` for every m and column p, on the
    coefficients ``coef`` laid out by :func:`flat_coefficients`.

    Splits ``k = l J + j`` with ``J = ceil(sqrt(N))``: for each ``l`` the
    coefficients are multiplied by the far wave ``e^{i l J angle}`` and added
    per ``j``; the near waves ``e^{i j angle}`` finish the sum.  Both waves
    are running products (``J + N / J`` numbers, each carrying about
    ``sqrt(N)`` roundings), so only two complex exponentials are taken per
    angle instead of ``N``.

    The coefficients are held as separate real and imaginary arrays and,
    when there are three or more left, four angles go through them together,
    so that the inner loop is plain real arithmetic over contiguous numbers,
    which the compiler turns into vector instructions, and each coefficient
    is loaded once per four angles.  The operations are those of the complex
    product, in the same order, so every angle's sum has the same bits
    however the angles are grouped.
    """
    near_n = max(1, math.ceil(math.sqrt(n)))
    far_n = -(-n // near_n)
    width = near_n * cols
    out = np.zeros((angle.size, cols), dtype=np.complex128)
    part_re = np.empty((4, width))
    part_im = np.empty((4, width))
    far = np.empty(4, dtype=np.complex128)
    far_step = np.empty(4, dtype=np.complex128)
    first = 0
    while angle.size - first >= 3:
        count = min(4, angle.size - first)
        for b in range(4):  # a lane past the last angle runs on angle 0 and is dropped
            far_step[b] = cmath.exp(1j * (near_n * (angle[first + b] if b < count else 0.0)))
            far[b] = 1.0
        part_re[:] = 0.0
        part_im[:] = 0.0
        for ell in range(far_n):
            base = ell * width
            f0r, f0i = far[0].real, far[0].imag
            f1r, f1i = far[1].real, far[1].imag
            f2r, f2i = far[2].real, far[2].imag
            f3r, f3i = far[3].real, far[3].imag
            for q in range(min(width, n * cols - base)):
                cr = flat_re[base + q]
                ci = flat_im[base + q]
                part_re[0, q] += f0r * cr - f0i * ci
                part_im[0, q] += f0r * ci + f0i * cr
                part_re[1, q] += f1r * cr - f1i * ci
                part_im[1, q] += f1r * ci + f1i * cr
                part_re[2, q] += f2r * cr - f2i * ci
                part_im[2, q] += f2r * ci + f2i * cr
                part_re[3, q] += f3r * cr - f3i * ci
                part_im[3, q] += f3r * ci + f3i * cr
            for b in range(4):
                far[b] *= far_step[b]
        for b in range(count):
            _finish(out, first + b, cols, near_n, angle[first + b], part_re[b], part_im[b])
        first += count
    for m in range(first, angle.size):  # one or two left: one lane each
        step = cmath.exp(1j * (near_n * angle[m]))
        one_re, one_im = part_re[0], part_im[0]
        one_re[:] = 0.0
        one_im[:] = 0.0
        wave = 1.0 + 0j
        for ell in range(far_n):
            base = ell * width
            fr, fi = wave.real, wave.imag
            for q in range(min(width, n * cols - base)):
                cr = flat_re[base + q]
                ci = flat_im[base + q]
                one_re[q] += fr * cr - fi * ci
                one_im[q] += fr * ci + fi * cr
            wave *= step
        _finish(out, m, cols, near_n, angle[m], one_re, one_im)
    return out


@njit(cache=True, nogil=True)
def cos_coefficients(cf, step, a, b):
    """The COS density coefficients of ``cf[::step]`` on ``[a, b]`` and the put's sums' inputs.

    ``cf[k step]`` is the characteristic function at ``omega_k = k pi / (b - a)``.
    Returns ``omega``, ``coef = Re[cf e^{-i omega a}]`` (first term halved,
    Fang & Oosterlee 2008, eq. 9), the two payoff columns ``coef / omega``
    (0 at ``omega = 0``) and ``coef (1 - i omega) / (1 + omega^2)`` laid out
    for :func:`flat_sums` (real parts, imaginary parts), and the real sum of
    the second column.  The phases ``e^{-i omega_k a}`` are
    products of a far and a near wave, as in ``rootvar.core.fourier.series.phases``.
    """
    n = -(-cf.size // step)
    width = np.pi / (b - a)
    turn = -a * width
    near_n = max(1, math.ceil(math.sqrt(n)))
    near = np.empty(near_n, dtype=np.complex128)
    for j in range(near_n):
        near[j] = cmath.exp(1j * (turn * j))
    omega = np.empty(n)
    coef = np.empty(n)
    size = -(-n // near_n) * near_n * 2
    payoff_re = np.zeros(size)
    payoff_im = np.zeros(size)
    edge = 0.0
    for ell in range(-(-n // near_n)):
        far = cmath.exp(1j * (turn * near_n * ell))
        for k in range(ell * near_n, min(n, (ell + 1) * near_n)):
            w = k * width
            value = (cf[k * step] * (far * near[k - ell * near_n])).real
            if k == 0:
                value *= 0.5  # the primed sum halves the first term
            omega[k] = w
            coef[k] = value
            payoff_re[2 * k] = value / w if w > 0.0 else 0.0
            # value (1 - i w) / (1 + w^2) in real arithmetic (the complex
            # operations reduce to these same roundings)
            scale = 1.0 + w * w
            payoff_re[2 * k + 1] = value / scale
            payoff_im[2 * k + 1] = -(value * w) / scale
            edge += payoff_re[2 * k + 1]
    return omega, coef, payoff_re, payoff_im, edge


@njit(cache=True, nogil=True)
def cos_puts(a, b, coef0, payoff_re, payoff_im, n, chi_edge, log_moneyness, strike):
    """Undiscounted COS puts ``E[K (1 - e^{x + R})^+]`` on ``[a, b]``, ``x = ln(S_0 / K)``.

    The payoff coefficients of Fang & Oosterlee (2008), eqs. 22-23, with the
    payoff cut at ``R = -x`` clipped to the range; ``coef0`` is the first
    density coefficient and the payoff columns are laid out as
    :func:`flat_sums` reads them.  Each strike is priced alone, so slicing
    the strikes changes no bit.
    """
    width = b - a
    cut = np.empty(strike.size)
    angle = np.empty(strike.size)
    for m in range(strike.size):
        cut[m] = min(max(-log_moneyness[m], a), b)
        angle[m] = np.pi * (cut[m] - a) / width
    sums = flat_sums(angle, payoff_re, payoff_im, n, 2)
    out = np.empty(strike.size)
    edge = math.exp(a) * chi_edge
    for m in range(strike.size):
        psi_sum = coef0 * (cut[m] - a) + sums[m, 0].imag
        chi_sum = math.exp(cut[m]) * sums[m, 1].real - edge
        out[m] = 2.0 / width * strike[m] * (psi_sum - math.exp(log_moneyness[m]) * chi_sum)
    return out
