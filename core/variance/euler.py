"""Feller ratio and the one-step behaviour of the Euler scheme for CIR variance.

All functions broadcast over numpy arrays and return a float for scalar input.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from scipy.special import ndtr, ndtri

from rootvar.core.validation import cir_parameters, scalar_or_array

__all__ = [
    "EulerWorstCase",
    "euler_max_step",
    "euler_negative_probability",
    "euler_worst_case",
    "feller_ratio",
    "regime_label",
]


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


class EulerWorstCase(NamedTuple):
    """The worst one-step negative probability over all variance levels, and where it sits."""

    probability: float | np.ndarray
    level: float | np.ndarray


def euler_worst_case(kappa, theta, vol_of_vol, dt) -> EulerWorstCase:
    """Worst case over all variance levels of the one-step Euler negative probability.

    Parameters
    ----------
    kappa, theta, vol_of_vol : array_like
        CIR parameters (per year, annualised variance, per sqrt(year)), > 0.
    dt : array_like
        Step size in years, > 0.

    Returns
    -------
    EulerWorstCase
        ``(probability, level)``: the largest :func:`euler_negative_probability`
        over every starting variance ``v >= 0`` (in [0, 1]) and the variance
        ``v*`` (annualised) where it is reached.  When ``kappa dt >= 1`` the
        largest value is approached only as ``v`` grows without bound: the
        probability is then the supremum (1/2 at ``kappa dt = 1``, 1 above)
        and the level is ``inf``.

    Notes
    -----
    Write ``a = kappa dt`` and ``b = kappa theta dt``.  One Euler step from
    ``v > 0`` is negative with probability ``Phi(-g(v))``, where

    .. math:: g(v) = \\frac{v(1 - a) + b}{\\sigma\\sqrt{v\\,\\Delta t}}
              = \\frac{(1 - a)\\sqrt{v} + b / \\sqrt{v}}{\\sigma\\sqrt{\\Delta t}} .

    ``Phi`` is increasing, so the worst level minimises ``g``.

    * ``a < 1``: ``g`` is the sum of a rising and a falling term and tends to
      ``+inf`` at both ends.  ``g'(v) = 0`` gives
      ``(1 - a) / (2 sqrt v) = b / (2 v^{3/2})``, that is

      .. math:: v^* = \\frac{b}{1 - a} = \\frac{\\kappa\\theta\\Delta t}{1 - \\kappa\\Delta t},

      where the two terms are equal, so
      ``g(v*) = 2 sqrt((1 - a) b) / (sigma sqrt(dt)) = 2 sqrt(kappa theta (1 - kappa dt)) / sigma``.
      With the Feller ratio ``F = 2 kappa theta / sigma^2`` this is
      ``sqrt(2 F (1 - kappa dt))``, and the worst case is

      .. math:: p^* = \\Phi\\left(-\\sqrt{2F(1 - \\kappa\\Delta t)}\\right).

      It depends on the step only through ``1 - kappa dt``: as ``dt -> 0`` it
      tends to ``Phi(-sqrt(2F))``, not to zero.  Whatever the step, some
      variance level carries that risk; the step only moves the level
      (``v*`` shrinks with ``dt``) and so how often the process visits it,
      which the exact law gives as ``P(v_t <= v*)``.
    * ``a = 1``: ``g(v) = b / (sigma sqrt(v dt))`` falls to 0 as ``v`` grows:
      the supremum is ``Phi(0) = 1/2``, not attained.
    * ``a > 1``: the first term of ``g`` is negative and ``g -> -inf``: the
      supremum is 1, not attained (the step overshoots the mean so far that
      a high variance is more likely than not to come out negative).

    References
    ----------
    Lord, R., Koekkoek, R. & van Dijk, D. (2010). A comparison of biased
    simulation schemes for stochastic volatility models. Quantitative Finance
    10(2), 177-194 (the Euler step).  Feller, W. (1951). Two singular
    diffusion problems. Annals of Mathematics 54(1), 173-182.

    Examples
    --------
    >>> from rootvar.core import euler_worst_case
    >>> p, level = euler_worst_case(0.5, 0.04, 1.0, 1 / 252)
    >>> round(p, 4), round(level * 1e5, 4)
    (0.3888, 7.9523)
    """
    kappa, theta, vol_of_vol, dt = cir_parameters(kappa, theta, vol_of_vol, dt=(dt, ">0"))
    a = kappa * dt
    one_minus = 1.0 - a
    with np.errstate(divide="ignore", invalid="ignore"):
        level = kappa * theta * dt / one_minus
        prob = ndtr(-2.0 * np.sqrt(kappa * theta * one_minus) / vol_of_vol)
    below = one_minus > 0
    prob = np.where(below, prob, np.where(one_minus == 0, 0.5, 1.0))
    level = np.where(below, level, np.inf)
    return EulerWorstCase(scalar_or_array(prob), scalar_or_array(level))
