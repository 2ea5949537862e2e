"""Compiled kernel of the contour Greeks: the price's integral and its derivatives on one contour.

One call gives the price and every Greek of one maturity's strikes
(:func:`contour_greeks`).  Per strike it takes the price's own contour
(:func:`rootvar.core.fourier.contour_kernels.pick_contour`: the damping of
Lord & Kahl 2007 inside the moment strip of Andersen & Piterbarg 2007, the turn
of Andersen & Lake 2018) and its sinh-sinh trapezoid levels, and sums nine
integrands at every node: Lewis's (2001) integrand times ``1``, ``-iz``,
``(-iz)^2`` (the log-strike derivatives), the five parameter derivatives of
``ln psi`` and its derivative in maturity, each at the node's complex argument
``z - i``.  Each integral keeps its own level differences, tail and rounding
bound; each Greek is a fixed linear combination of them, and its estimate the
same combination of their estimates in absolute value.  The formulas and the
references are in :mod:`rootvar.core.fourier.contour_greeks`; this module holds
the arithmetic only.  Compiled with ``cache=True`` through
:func:`rootvar.core.runtime.njit`; the entry releases the GIL.
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from rootvar.core.fourier.contour_kernels import (
    CERTIFIED,
    H0,
    MAX_LEVEL,
    MIN_LEVEL,
    NO_DECAY,
    NON_FINITE,
    NOT_CONVERGED,
    ROUNDING,
    T_CAP,
    finish_price,
    maturity_scales,
    pick_contour,
)
from rootvar.core.fourier.gradient_kernels import log_cf_gradient_at
from rootvar.core.fourier.greeks_kernels import maturity_derivative_at
from rootvar.core.runtime import njit

__all__ = [
    "INTEGRALS",
    "OUTPUTS",
    "ROWS",
    "ROW_ALPHA",
    "ROW_ANGLE",
    "ROW_ERROR",
    "ROW_FAILED",
    "ROW_LEVEL",
    "ROW_NODES",
    "ROW_STATUS",
    "contour_greeks",
]

#: The integrals summed at every node: Lewis's integrand times these weights.
INTEGRALS = ("price", "d_k", "d_k2", "d_v0", "d_kappa", "d_theta", "d_vol_of_vol", "d_rho", "d_t")
#: What each strike gets, in order (the price, then ``rootvar.core.GREEK_NAMES``).
OUTPUTS = (
    "price",
    "delta",
    "gamma",
    "theta",
    "vega",
    "rho_rate",
    "rho_div",
    "d_v0",
    "d_kappa",
    "d_theta",
    "d_vol_of_vol",
    "d_rho",
)
_NI = 9
_NO = 12
#: Rows of the kernel's output: the outputs' values (rows 0-11), their error
#: estimates (from ROW_ERROR), then per strike the status, the contour's alpha
#: and angle, the nodes summed (the alpha search included), the last level and
#: a bit mask of the outputs whose estimate exceeds their tolerance.
ROW_ERROR = _NO
ROW_STATUS = 2 * _NO
ROW_ALPHA = ROW_STATUS + 1
ROW_ANGLE = ROW_STATUS + 2
ROW_NODES = ROW_STATUS + 3
ROW_LEVEL = ROW_STATUS + 4
ROW_FAILED = ROW_STATUS + 5
ROWS = ROW_FAILED + 1

_HALF_PI = 0.5 * math.pi
_EPS = 2.220446049250313e-16


@njit(cache=True, inline="always")
def _l1(z):
    """``|Re z| + |Im z|``: at least ``|z|``, without the square root."""
    return abs(z.real) + abs(z.imag)


@njit(cache=True, inline="always")
def _greek_node(tau, s, alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0, f, m, r, wt, er):
    """The nine integrands' ``Re``, moduli and rounding bounds at ``v = s sinh(pi/2 sinh tau)``.

    Lewis's integrand ``G dv/dtau`` as in the price's ``_node``, times the
    weights ``1, -iz, (-iz)^2, d ln psi / dp (z - i), d ln psi / dT (z - i)``,
    into ``f``, ``m``, ``r`` (9 each); ``wt`` and ``er`` are scratch.  The
    rounding bound of a weighted integrand is the price's relative bound times
    its modulus plus ``|G|`` times a bound on the weight's own rounding: the
    absolute rounding of ``ln psi`` (``cancel``, as in the price) carried
    through the weight's dependence on its parameter, plus ``8 + 4 R`` roundings
    of the weight's terms, ``R = (|xi| + |d|) / |xi - d|`` the cancellation of
    ``xi - d`` (large when ``vol_of_vol |u| << kappa``), from which every
    derivative is built (bounded above without ``d`` itself).  Returns False
    where an integrand is not finite.
    """
    inner = _HALF_PI * math.sinh(tau)
    v = s * math.sinh(inner)
    jac = s * math.cosh(inner) * _HALF_PI * math.cosh(tau)
    root = math.sqrt(v * v + bend * bend)
    lift = tilt * (v * v / (root + bend))
    z = complex(v, lift - alpha)
    u = complex(v, lift - alpha - 1.0)  # z - i
    dz = complex(1.0, tilt * v / root)
    lc, g_v0, g_kappa, g_theta, g_sig, g_rho = log_cf_gradient_at(
        u, t, kappa, theta, sigma, rho, v0, 0.0
    )
    d_t = maturity_derivative_at(u, kappa, theta, sigma, rho, v0, 0.0, g_v0)
    zk = -1j * z * k
    lg = lc + zk
    base = cmath.exp(lg) / (-(z * u)) * dz * jac
    size_base = abs(base)
    # the price's rounding bound (see contour_kernels._node)
    sig2 = sigma * sigma
    xi = kappa - rho * sigma * 1j * u
    xi_size = _l1(xi)
    cancel_a = kappa * theta * (t * xi_size + 2.0) / sig2  # in kappa theta / sigma^2 (...)
    cancel_b = xi_size / sig2  # per unit v0, in v0 / sigma^2 (...)
    cancel = cancel_a + v0 * cancel_b
    rel = _EPS * (8.0 + 4.0 * cancel + _l1(zk) + _l1(lg))
    quad = u * u + 1j * u
    # R <= (|xi| + |d|)^2 / (sigma^2 |quad|), since xi - d = sigma^2 quad / (xi + d)
    # and |d|^2 <= |xi|^2 + sigma^2 |quad|: no square root of a complex number
    # (|.|_1 >= |.| where a modulus is an upper bound, |.|_1 / sqrt 2 where a lower one)
    quad_abs = abs(quad)
    d_abs = math.sqrt(xi_size * xi_size + sig2 * quad_abs)
    terms = 8.0 + 4.0 * (xi_size + d_abs) ** 2 / max(sig2 * quad_abs, 1e-300)
    w1 = -1j * z
    z_abs = abs(z)
    wt[0] = 1.0
    wt[1] = w1
    wt[2] = w1 * w1
    wt[3] = g_v0
    wt[4] = g_kappa
    wt[5] = g_theta
    wt[6] = g_sig
    wt[7] = g_rho
    wt[8] = d_t
    # the weights' moduli (m, below) and their own rounding bounds (er)
    m[0] = 1.0
    m[1] = z_abs
    m[2] = z_abs * z_abs
    for j in range(3, _NI):
        m[j] = abs(wt[j])
    a_v0, a_theta = m[3], m[5]
    er[0] = 0.0
    er[1] = 4.0 * _EPS * z_abs
    er[2] = 8.0 * _EPS * m[2]
    er[3] = _EPS * (4.0 * cancel_b + terms * a_v0)
    er[4] = _EPS * (4.0 * cancel_a / kappa + terms * (theta / kappa * a_theta + m[4]))
    er[5] = _EPS * (4.0 * cancel_a / theta + terms * a_theta)
    er[6] = _EPS * (
        8.0 * cancel / sigma + terms * (2.0 / sigma * (theta * a_theta + v0 * a_v0) + m[6])
    )
    er[7] = _EPS * (4.0 * cancel * sigma * _l1(u) / max(0.7071 * xi_size, 1e-300) + terms * m[7])
    # d_t = kappa theta B + v0 (sigma^2 B^2 / 2 - xi B - quad / 2), B = d ln psi / d v0
    er[8] = (kappa * theta + v0 * (sig2 * a_v0 + xi_size)) * er[3] + 8.0 * _EPS * (
        kappa * theta * a_v0 + v0 * (0.5 * sig2 * a_v0 * a_v0 + xi_size * a_v0 + 0.5 * quad_abs)
    )
    check = 0.0
    for j in range(_NI):
        w = wt[j]
        f[j] = base.real * w.real - base.imag * w.imag
        size = size_base * m[j]
        m[j] = size
        r[j] = size * rel + size_base * er[j]
        check += f[j] + size + r[j]
    # one test for all: a NaN or an infinity anywhere leaves the sum not finite
    return math.isfinite(check)


@njit(cache=True)
def greek_integrals(
    alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0, s, coef, tol, small, work, wt, value, est
):
    """The nine integrals ``Re int_0^inf G w_j dv`` on one contour, halving the step.

    The price's rules (``contour_integral``) for each integral: level 0 walks
    out until every integrand's weighted modulus is below its ``small`` and
    falling; the estimate of integral ``j`` at a level is its level difference
    (plus the previous one unless the differences fell fourfold), its tail and
    its rounding bound.  The outputs' estimates are ``|coef| @ est``; certified
    from level ``MIN_LEVEL`` on when every one is within its ``tol``.
    ``work`` (``(12, 12)`` floats) and ``wt`` (9 complex) are scratch.  Fills
    ``value`` and ``est`` (the last level's) and returns ``(nodes, status, level)``.
    """
    f, m, r = work[0], work[1], work[2]
    total, round_total, prev_m = work[3], work[4], work[5]
    last, last_diff, tail, rounding = work[6], work[7], work[8], work[9]
    er, errors = work[10], work[11]
    nodes = 1
    if not _greek_node(
        0.0, s, alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0, f, m, r, wt, er
    ):
        return nodes, NON_FINITE, 0
    for j in range(_NI):
        total[j] = 0.5 * f[j]
        round_total[j] = 0.5 * r[j]
        prev_m[j] = m[j]
    j_hi = 0
    while True:
        j_hi += 1
        tau = j_hi * H0
        if tau > T_CAP:
            return nodes, NO_DECAY, 0
        ok = _greek_node(
            tau, s, alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0, f, m, r, wt, er
        )
        nodes += 1
        if not ok:
            return nodes, NON_FINITE, 0
        done = True
        for j in range(_NI):
            total[j] += f[j]
            round_total[j] += r[j]
            if not (m[j] * H0 <= small[j] and m[j] <= prev_m[j]):
                done = False
            prev_m[j] = m[j]
        if done:
            break
    t_end = j_hi * H0
    h = H0
    for j in range(_NI):
        tail[j] = m[j] * H0
        last[j] = h * total[j]
        last_diff[j] = math.inf
    for level in range(1, MAX_LEVEL + 1):
        h *= 0.5
        count = round(t_end / h)
        for i in range(1, count, 2):
            ok = _greek_node(
                i * h, s, alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0, f, m, r, wt, er
            )
            if not ok:
                return nodes + 1, NON_FINITE, level
            for j in range(_NI):
                total[j] += f[j]
                round_total[j] += r[j]
        nodes += count // 2
        for j in range(_NI):
            value[j] = h * total[j]
            rounding[j] = h * round_total[j]
            diff = abs(value[j] - last[j])
            est[j] = diff + tail[j] + rounding[j]
            if diff > 0.25 * last_diff[j]:  # convergence not yet visible
                est[j] += last_diff[j]
            last[j] = value[j]
            last_diff[j] = diff
        if level >= MIN_LEVEL:
            _combine(coef, est, errors)
            good = True
            for g in range(_NO):
                if not errors[g] <= tol[g]:
                    good = False
            if good:
                return nodes, CERTIFIED, level
    _combine(coef, rounding, errors)
    for g in range(_NO):
        if errors[g] > tol[g]:
            return nodes, ROUNDING, MAX_LEVEL
    return nodes, NOT_CONVERGED, MAX_LEVEL


@njit(cache=True, inline="always")
def _combine(coef, est, errors):
    """``errors = |coef| @ est``: each output's bound from the integrals' bounds."""
    for g in range(_NO):
        e = 0.0
        for j in range(_NI):
            e += abs(coef[g, j]) * est[j]
        errors[g] = e


@njit(cache=True)
def _coefficients(scale, spot, t, rate, div_yield, v0, theta):
    """Each output as a combination of the nine raw integrals (``1/pi`` included).

    ``scale = e^{-rT} F = S e^{-qT}``.  With ``J_j`` the integrals over ``pi``
    and the residues left out (they are added per strike): call ``C = scale
    J_0``, ``delta = e^{-qT} (J_0 - J_1)``, ``gamma = e^{-qT} (J_2 - J_1) /
    S``, ``theta = q C + scale ((r - q) J_1 - J_8)``, ``rho_rate = -T scale
    J_1``, ``rho_div = -T scale (J_0 - J_1)``, ``d_p = scale J_{3..7}``,
    ``vega = 2 sqrt(v0) d_v0 + 2 sqrt(theta) d_theta``.
    """
    c = np.zeros((_NO, _NI))
    sc = scale / math.pi
    eq = sc / spot
    c[0, 0] = sc
    c[1, 0], c[1, 1] = eq, -eq
    c[2, 1], c[2, 2] = -eq / spot, eq / spot
    c[3, 0], c[3, 1], c[3, 8] = div_yield * sc, (rate - div_yield) * sc, -sc
    c[4, 3], c[4, 5] = 2.0 * math.sqrt(v0) * sc, 2.0 * math.sqrt(theta) * sc
    c[5, 1] = -t * sc
    c[6, 0], c[6, 1] = -t * sc, t * sc
    for p in range(5):
        c[7 + p, 3 + p] = sc
    return c


@njit(cache=True, nogil=True)
def contour_greeks(model, market, strike, tol, out):
    """Price and Greeks of one maturity's strikes on the contour route, a contour per strike.

    ``model`` is ``(kappa, theta, vol_of_vol, rho, v0)``; ``market`` is
    ``(spot, maturity, rate, div_yield, put, max_tilt, side)`` (``put`` 1.0
    for puts); ``tol`` the 12 tolerances of ``OUTPUTS`` in their units.  Fills
    ``out`` (``ROWS x (n + 1)``): per strike the outputs (NaN where the strike
    is not certified), their estimates, status, alpha, angle, nodes, level and
    the bit mask of outputs past their tolerance; the last column holds the
    strip's ends ``w_-, w_+`` and the characteristic-function evaluations.
    """
    kappa, theta, sigma, rho, v0 = model[0], model[1], model[2], model[3], model[4]
    spot, t, rate, div_yield = market[0], market[1], market[2], market[3]
    put, max_tilt, side = market[4] != 0.0, market[5], int(market[6])
    n = strike.size
    for row in range(ROWS):
        out[row, n] = math.nan
    forward = spot * math.exp((rate - div_yield) * t)
    disc = math.exp(-rate * t)
    scale = disc * forward
    spot_df = spot * math.exp(-div_yield * t)
    coef = _coefficients(scale, spot, t, rate, div_yield, v0, theta)
    # each integral's end threshold: a hundredth of the least share of a
    # tolerance it may take (an output's tolerance split over its integrals)
    small = np.full(_NI, math.inf)
    for g in range(_NO):
        used = 0
        for j in range(_NI):
            used += coef[g, j] != 0.0
        for j in range(_NI):
            if coef[g, j] != 0.0:
                small[j] = min(small[j], 0.01 * tol[g] / (abs(coef[g, j]) * used))
    _, freq, big_c, damp, bend = maturity_scales(t, kappa, theta, sigma, rho, v0)
    ends = np.full(2, math.nan)
    work = np.empty((12, _NO))
    wt = np.empty(_NI, np.complex128)
    value = np.empty(_NI)
    est = np.empty(_NI)
    errors = np.empty(_NO)
    evals = 0
    eq = scale / spot
    for q in range(n):
        for g in range(_NO):
            out[g, q] = math.nan
            out[ROW_ERROR + g, q] = math.inf
        out[ROW_ANGLE, q] = 0.0
        out[ROW_LEVEL, q] = 0.0
        out[ROW_FAILED, q] = (1 << _NO) - 1
        k = math.log(strike[q] / forward)
        a, ev, code, phi, s = pick_contour(
            k, side, ends, t, kappa, theta, sigma, rho, v0, freq, big_c, damp, max_tilt
        )
        out[ROW_ALPHA, q] = a
        evals += ev
        out[ROW_NODES, q] = ev
        out[ROW_STATUS, q] = code
        if code != CERTIFIED:
            continue
        out[ROW_ANGLE, q] = phi
        used, code, level = greek_integrals(
            a, math.tan(phi), bend, k, t, kappa, theta, sigma, rho, v0, s,
            coef, tol, small, work, wt, value, est,
        )  # fmt: skip
        evals += used
        out[ROW_NODES, q] = ev + used
        out[ROW_STATUS, q] = code
        out[ROW_LEVEL, q] = level
        if level == 0:
            continue
        _combine(coef, est, errors)
        failed = 0
        for g in range(_NO):
            out[ROW_ERROR + g, q] = errors[g]
            if not errors[g] <= tol[g]:
                failed |= 1 << g
        out[ROW_FAILED, q] = failed
        if code != CERTIFIED:
            continue
        # the residues crossed (Lord & Kahl 2007, eq. 3.6): R0 = 0, 1 or 1 - K/F,
        # R1 = dR0/dk (R0'' = R1: gamma has none)
        ek = math.exp(k)
        r0 = 0.0 if a > 0.0 else (1.0 if a > -1.0 else 1.0 - ek)
        r1 = -ek if a < -1.0 else 0.0
        for g in range(1, _NO):
            total = 0.0
            for j in range(_NI):
                total += coef[g, j] * value[j]
            out[g, q] = total
        # inside the bounds stated in the discounted spot and strike, as
        # heston_price states its prices (finish_price clips in forward terms,
        # which round differently)
        strike_df = strike[q] * disc
        if put:
            low, high = max(strike_df - spot_df, 0.0), strike_df
        else:
            low, high = max(spot_df - strike_df, 0.0), spot_df
        out[0, q] = min(max(finish_price(value[0], a, k, put, scale), low), high)
        out[1, q] += eq * (r0 - r1)
        out[3, q] += div_yield * scale * r0 + (rate - div_yield) * scale * r1
        out[5, q] += -t * scale * r1
        out[6, q] += -t * scale * (r0 - r1)
        if put:  # put-call parity P = C - S e^{-qT} + K e^{-rT}, differentiated
            out[1, q] -= eq
            out[3, q] -= div_yield * scale - rate * strike_df
            out[5, q] -= t * strike_df
            out[6, q] += t * scale
    out[0, n] = ends[0]
    out[1, n] = ends[1]
    out[2, n] = evals
