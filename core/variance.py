"""Feller ratio and the one-step behaviour of the Euler scheme for CIR variance.

All functions broadcast over numpy arrays and return a float for scalar input.
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtr, ndtri

from .validation import cir_parameters, scalar_or_array

__all__ = ["euler_max_step", "euler_negative_probability", "feller_ratio", "regime_label"]


def feller_ratio(kappa, theta, vol_of_vol):
    """Return the Feller ratio ``2 kappa theta / vol_of_vol**2``.

    Parameters
    ----------
    kappa : array_like
        Mean-reversion speed, per year, > 0.
    theta : array_like
        Long-run variance (annualised), > 0.
    vol_of_vol : array_like
        Volatility of variance, per sqrt(year), > 0.

    Returns
    -------
    float or ndarray
        Dimensionless ratio; the Feller condition holds when it is >= 1, and
        zero is then never reached by the exact process.

    References
    ----------
    Feller, W. (1951). Two singular diffusion problems. Annals of Mathematics
    54(1), 173-182.
    """
    kappa, theta, vol_of_vol = cir_parameters(kappa, theta, vol_of_vol)
    return scalar_or_array(2.0 * kappa * theta / vol_of_vol**2)


def regime_label(ratio) -> str:
    """Plain-words description of a Feller ratio (house convention).

    ``>= 1``: "Feller holds" (zero is never reached); ``[0.5, 1)``: "mild
    breach"; ``[0.2, 0.5)``: "marked breach"; ``< 0.2``: "severe breach".
    Below 1 zero is reachable and the density of the variance behaves like
    ``v**(ratio - 1)`` near zero, so mass piles up there faster the smaller
    the ratio.  The cut-offs are a rootvar convention,
    not a published standard.
    """
    ratio = float(ratio)
    if ratio >= 1.0:
        return "Feller holds"
    if ratio >= 0.5:
        return "mild breach"
    if ratio >= 0.2:
        return "marked breach"
    return "severe breach"


def euler_negative_probability(v, kappa, theta, vol_of_vol, dt):
    """Probability that one Euler step of the CIR variance ends below zero.

    Parameters
    ----------
    v : array_like
        Variance at the start of the step (annualised), >= 0.
    kappa, theta, vol_of_vol : array_like
        CIR parameters (per year, annualised variance, per sqrt(year)), > 0.
    dt : array_like
        Step size in years, > 0.

    Returns
    -------
    float or ndarray
        ``P(v + kappa (theta - v) dt + vol_of_vol sqrt(v dt) Z < 0)``, in [0, 1].

    Notes
    -----
    With ``Z`` standard normal the step is negative exactly when
    ``Z < -(v + kappa (theta - v) dt) / (vol_of_vol sqrt(v dt))``, so

    .. math:: p = \\Phi\\left(-\\frac{v + \\kappa(\\theta - v)\\Delta t}
                                   {\\sigma\\sqrt{v\\,\\Delta t}}\\right).

    At ``v = 0`` the step is the deterministic ``kappa theta dt > 0`` and the
    probability is exactly 0.  For ``v > 0`` it is strictly positive.  The
    tail is evaluated with ``scipy.special.ndtr``, which keeps full relative
    precision far below 1e-300.

    References
    ----------
    Lord, R., Koekkoek, R. & van Dijk, D. (2010). A comparison of biased
    simulation schemes for stochastic volatility models. Quantitative Finance
    10(2), 177-194.
    """
    kappa, theta, vol_of_vol, v, dt = cir_parameters(
        kappa, theta, vol_of_vol, v=(v, ">=0"), dt=(dt, ">0")
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        drift = v + kappa * (theta - v) * dt
        z = -drift / (vol_of_vol * np.sqrt(v * dt))
    prob = np.where(v > 0, ndtr(z), 0.0)
    return scalar_or_array(prob)


def euler_max_step(v, kappa, theta, vol_of_vol, tolerance):
    """Largest Euler step whose negative-step probability stays within a tolerance.

    Parameters
    ----------
    v : array_like
        Variance at the start of the step (annualised), >= 0.
    kappa, theta, vol_of_vol : array_like
        CIR parameters, > 0.
    tolerance : array_like
        Acceptable one-step probability of a negative variance, in (0, 1).

    Returns
    -------
    float or ndarray
        The largest ``dt`` (years) such that *every* step size in ``(0, dt]``
        has :func:`euler_negative_probability` ``<= tolerance``; ``math.inf``
        when no step size breaches it (always so at ``v = 0``).

    Notes
    -----
    Write ``s = sqrt(dt)`` and ``c = Phi^{-1}(1 - tolerance)``.  The
    probability is ``<= tolerance`` exactly when

    .. math:: f(s) = \\kappa(\\theta - v) s^2 - c\\sigma\\sqrt{v}\\, s + v \\ge 0 .

    ``f(0) = v > 0``, so the answer is the first positive root of ``f``:

    * ``theta < v``: ``f`` is a downward parabola with one positive root;
    * ``theta = v``: ``f`` is linear, root ``sqrt(v) / (c sigma)``;
    * ``theta > v``: an upward parabola.  If its discriminant
      ``D = c^2 sigma^2 v - 4 kappa (theta - v) v`` is negative the
      probability never reaches the tolerance (``inf``); otherwise it rises
      above the tolerance between the two roots and falls back below it for
      larger steps (the drift towards theta then dominates the noise), and
      the answer is the smaller root.

    All three cases are the one root formula written without cancellation,

    .. math:: s^* = \\frac{2v}{c\\sigma\\sqrt{v} + \\sqrt{D}}, \\qquad
              \\Delta t^* = (s^*)^2,

    valid when ``D >= 0`` and the denominator is positive; otherwise the
    answer is ``inf`` (this also covers ``tolerance >= 0.5`` with
    ``theta >= v``).
    """
    kappa, theta, vol_of_vol, v, tolerance = cir_parameters(
        kappa, theta, vol_of_vol, v=(v, ">=0"), tolerance=(tolerance, "(0,1)")
    )
    c = -ndtri(tolerance)  # Phi^{-1}(1 - tol) without losing digits for tiny tol
    b = c * vol_of_vol * np.sqrt(v)
    disc = b * b - 4.0 * kappa * (theta - v) * v
    with np.errstate(divide="ignore", invalid="ignore"):
        denom = b + np.sqrt(disc)
        root = 2.0 * v / denom
    breach = (v > 0) & (disc >= 0) & (denom > 0)
    return scalar_or_array(np.where(breach, root * root, np.inf))
