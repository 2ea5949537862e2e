"""Joint characteristic function of Heston log-prices at several dates.

``E[exp(sum_j z_j ln(S_{t_j} / S_0))]`` for complex weights ``z_j``: the
building block of the geometric Asian and forward-start Fourier pricers
(:mod:`rootvar.core.fourier.exotics`).
"""

from __future__ import annotations

import numpy as np


def _principal_sqrt(z):
    """Principal square root (``Re >= 0``) of an array, from real operations.

    The half-sum form has no cancellation for either sign of ``Re z``; the
    same formula as the compiled kernel's ``principal_sqrt``, for arrays.
    Valid for ``1e-150 < |z| < 1e150``.
    """
    re, im = z.real, z.imag
    t = np.sqrt(0.5 * (np.abs(re) + np.sqrt(re * re + im * im)))
    half = np.divide(0.5 * im, t, out=np.zeros_like(t), where=t > 0)
    right = re >= 0
    return np.where(right, t, np.abs(half)) + 1j * np.where(right, half, np.copysign(t, im))


def _principal_log(z):
    """Principal logarithm (argument in ``(-pi, pi]``) of an array, from real operations.

    numpy's complex log takes a slow extra-precision path near ``|z| = 1``,
    where these arguments live; this form stays within ~1e-16 absolute.
    """
    re, im = z.real, z.imag
    return 0.5 * np.log(re * re + im * im) + 1j * np.arctan2(im, re)


__all__ = ["affine_step", "joint_log_mgf"]


def _expm1_ratio(d, tau):
    """``(1 - e^{-d tau}) / d``, equal to ``tau`` at ``d = 0``, without cancellation."""
    x = d * tau
    small = np.abs(x) < 1e-8
    safe = np.where(small, 1.0, d)
    return np.where(small, tau * (1.0 - 0.5 * x), -np.expm1(-x) / safe)


def _log1p(z):
    """Principal ``log(1 + z)`` for complex ``z``, accurate for small ``|z|``."""
    x, y = z.real, z.imag
    return 0.5 * np.log1p(x * (2.0 + x) + y * y) + 1j * np.arctan2(y, 1.0 + x)


def _winding(d, p, tau, big_d):
    """``2 pi i n`` that turns the principal ``log D`` into the log continuous in ``tau``.

    ``D(t) = a + b e^{-d t}`` with ``a = (d + p) / (2d)``, ``b = (d - p) / (2d)``
    (``a + b = 1``, ``Re d >= 0``) is followed from ``t = 0`` (``D = 1``, log 0)
    to ``tau``.  With ``g = b / a``:

    * ``|g| <= 1``: ``1 + g e^{-dt}`` stays in the right half-plane, so
      ``log D = Log(1 + g e^{-d tau}) - Log(1 + g)`` (principal logs).
    * ``|g| > 1``: with ``h = 1 / g``, ``D = b e^{-dt} (1 + h e^{dt})``; the
      bracket stays in the right half-plane up to ``t* = ln|g| / Re d``, so
      ``log D = Log(1 + h e^{d tau}) - Log(1 + h) - d tau`` up to ``t*``;
      past it the first form takes over, its constant matched at ``t*``.

    Each ``1 + .`` is written as a product, not a sum, so that nothing cancels
    when ``d`` is small.  ``D`` never vanishes where the expectation is finite.
    """
    two_d = 2.0 * d
    d_plus, d_minus = d + p, d - p
    first = np.abs(d_minus) <= np.abs(d_plus)  # |g| <= 1
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        one_plus_ge = two_d * big_d / d_plus
        one_plus_g = two_d / d_plus
        one_plus_h = two_d / d_minus
        log_first = _principal_log(one_plus_ge) - _principal_log(one_plus_g)
        re_d = d.real
        t_star = np.where(re_d > 0, np.log(np.abs(d_minus / d_plus)) / re_d, np.inf)
        before = tau <= t_star
        # before t*: 1 + h e^{d tau} = 2 d D e^{d tau} / (d - p)
        e_tau = np.exp(d * np.where(before, tau, 0.0))
        log_before = (
            _principal_log(one_plus_h * big_d * e_tau) - _principal_log(one_plus_h) - d * tau
        )
        # after t*: y = h e^{d t*} has |y| = 1
        ts = np.where(before | ~np.isfinite(t_star), 0.0, t_star)
        y = d_plus / d_minus * np.exp(d * ts)
        log_after = (
            _principal_log(1.0 + y)
            - _principal_log(one_plus_h)
            - d * ts
            - _principal_log(1.0 + 1.0 / y)
            + _principal_log(one_plus_ge)
        )
    continuous = np.where(first, log_first, np.where(before, log_before, log_after))
    turns = np.round((continuous.imag - np.angle(big_d)) / (2.0 * np.pi))
    # d = 0 exactly: D is linear in t and its principal log is the continuous one
    turns = np.where((d == 0) | ~np.isfinite(turns), 0.0, turns)
    return 2j * np.pi * turns


def affine_step(params, s, w, tau, drift=0.0):
    """Exponent of ``E[exp(s x_tau + w v_tau)]`` over one interval: ``(A, B)``.

    ``E_t[exp(s ln S_{t+tau} + w v_{t+tau})] = exp(s ln S_t + A + B v_t)``.

    Parameters
    ----------
    params : HestonParams
    s, w : array_like of complex
        Weights on the log-price and on the variance at the end of the
        interval (broadcast together).
    tau : float
        Interval length in years, >= 0.
    drift : float
        ``rate - div_yield``, continuous decimal per year.

    Returns
    -------
    (ndarray, ndarray)
        ``A`` and ``B``, complex.

    Notes
    -----
    ``B`` solves the Riccati equation
    ``B' = sigma^2 B^2 / 2 - beta B + q / 2``, ``B(0) = w``, with
    ``beta = kappa - rho sigma s`` and ``q = s^2 - s``, and
    ``A' = s mu + kappa theta B``, ``A(0) = 0``.  With
    ``d = sqrt(beta^2 - sigma^2 q)`` (``Re d >= 0``),
    ``Q = (beta - d) / sigma^2 = q / (beta + d)`` (the stable root),
    ``e = e^{-d tau}`` and
    ``D = 1 + sigma^2 (Q - w) (1 - e) / (2 d)``:

    .. math::
        B = Q - e (Q - w) / D,\\qquad
        A = s\\mu\\tau + \\kappa\\theta Q\\tau - \\frac{2\\kappa\\theta}{\\sigma^2}\\ln D.

    (Substitute ``B = -(2/sigma^2) phi'/phi``: ``phi`` solves
    ``phi'' + beta phi' + sigma^2 q phi / 4 = 0``, ``phi(0) = 1``,
    ``phi'(0) = -sigma^2 w / 2``, and ``phi = e^{-sigma^2 Q tau / 2} D``.)
    ``Q`` and ``D - 1`` are written without dividing by ``sigma^2`` so the
    step stays accurate as vol_of_vol tends to 0.  ``ln D`` must be the log
    that is continuous along the interval, not the principal one, since it
    is multiplied by ``2 kappa theta / sigma^2``; :func:`_winding` follows it.
    With ``w = 0`` this is the usual Heston exponent (Albrecher et al. 2007).

    References
    ----------
    Heston, S. L. (1993). A closed-form solution for options with stochastic
    volatility. Review of Financial Studies 6(2), 327-343.
    Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
    Heston trap. Wilmott Magazine, January 2007, 83-92.
    """
    p_ = params
    sig2 = p_.vol_of_vol**2
    s = np.asarray(s, dtype=complex)
    w = np.asarray(w, dtype=complex)
    beta = p_.kappa - p_.rho * p_.vol_of_vol * s
    q = s * s - s
    d = _principal_sqrt(beta * beta - sig2 * q)
    # Q = (beta - d) / sigma^2, from whichever form does not cancel
    plus = beta + d
    good = np.abs(plus) >= np.abs(beta - d)
    with np.errstate(divide="ignore", invalid="ignore"):
        big_q = np.where(good, q / np.where(good, plus, 1.0), (beta - d) / sig2)
    e = np.exp(np.maximum(-(d.real * tau), -700.0) - 1j * (d.imag * tau))
    half_jump = 0.5 * sig2 * (big_q - w) * _expm1_ratio(d, tau)  # D - 1
    big_d = 1.0 + half_jump
    log_d = _log1p(half_jump) + _winding(d, beta - sig2 * w, tau, big_d)
    b = big_q - e * (big_q - w) / big_d
    k_theta = p_.kappa * p_.theta
    a = s * drift * tau + k_theta * big_q * tau - 2.0 * k_theta * log_d / sig2
    return a, b


def joint_log_mgf(weights, dates, params, drift=0.0):
    """``log E[exp(sum_j z_j ln(S_{t_j} / S_0))]`` under Heston.

    Parameters
    ----------
    weights : array_like of complex, shape (..., n)
        ``z_j``, one column per date.  The expectation must be finite (for
        example purely imaginary weights, or real parts that make the sum a
        combination of log-prices with weights in [0, 1]).
    dates : array_like of float, shape (n,)
        Increasing dates in years, the first >= 0.
    params : HestonParams
    drift : float
        ``rate - div_yield``.

    Returns
    -------
    ndarray of complex, shape (...)

    Notes
    -----
    Backward recursion on the affine exponent (the joint characteristic
    function of Kim & Wee 2014).  Write ``x_t = ln(S_t / S_0)``,
    ``t_0 = 0``, and let ``S_j = z_j + ... + z_n`` be the weight still
    carried by the log-price on ``(t_{j-1}, t_j]``.  By the tower property
    and :func:`affine_step`,

    .. math::
        E_{t_{j-1}}\\Big[e^{S_j x_{t_j} + w_j v_{t_j}}\\Big]
        = e^{S_j x_{t_{j-1}} + A_j + w_{j-1} v_{t_{j-1}}},\\quad
        (A_j, w_{j-1}) = \\text{step}(S_j, w_j, t_j - t_{j-1}),

    starting from ``w_n = 0``; then ``z_{j-1} x_{t_{j-1}}`` joins the
    exponent (``S_{j-1} = z_{j-1} + S_j``) and the recursion goes on, so that

    .. math:: \\log E\\Big[e^{\\sum_j z_j x_{t_j}}\\Big] = \\sum_j A_j + w_0 v_0.

    References
    ----------
    Kim, B. & Wee, I.-S. (2014). Pricing of geometric Asian options under
    Heston's stochastic volatility model. Quantitative Finance 14(10).
    """
    z = np.asarray(weights, dtype=complex)
    t = np.asarray(dates, dtype=float)
    gaps = np.diff(np.concatenate([[0.0], t]))
    carried = np.zeros(z.shape[:-1], dtype=complex)
    w = np.zeros_like(carried)
    total = np.zeros_like(carried)
    for j in range(t.size - 1, -1, -1):
        carried = carried + z[..., j]
        a, w = affine_step(params, carried, w, gaps[j], drift)
        total = total + a
    return total + w * params.v0
