"""Compiled Monte Carlo kernel for path-dependent payoffs: one block of full log-price paths.

One call runs a block of paths through every step of a non-uniform time
grid, keeping the log-price on the grid, and returns the block's payoff
sums for the product and its control variate.  The block draws from its
own numpy ``Generator`` (as in :mod:`rootvar.core.montecarlo.kernels`), and on every
step the same kinds of numbers in the same order whether used or not: the
scheme's variance draws (Euler: one normal; QE: one normal and one uniform;
exact variance sampling: one noncentral chi-square per path), then one
normal for the log-price.  So a path depends only on the seed and its block,
never on the product, the chunk size or the thread count.

Every step of length ``dt`` moves the log-price by

    ``(r - q) dt + a - dI / 2 + rho dM + sqrt((1 - rho^2) dI) Z``

with, as in :mod:`rootvar.core.montecarlo.schemes`:

* Euler: ``dI = f3(v) dt`` and ``dM = sqrt(f3(v) dt) Z_v``, the very normal
  that drove the variance (the discrete Itô step);
* QE and exact variance sampling: the trapezoid ``dI = dt (v + v') / 2`` and
  the Broadie-Kaya identity ``dM = (v' - v - kappa theta dt + kappa dI) /
  sigma``, which is Andersen's (2008) log-price step with ``gamma1 = gamma2
  = 1/2``;
* ``a`` is zero except for the martingale-corrected QE step, where it is
  ``K0* - K0`` (Andersen 2008, eqs. 36-37; left at zero where ``K0*`` does
  not exist, and counted).

Continuous barriers use the Brownian-bridge probability of crossing within
a step given its end points (see :func:`exotic_block`); the path carries
the product of the step survival probabilities as a weight.
"""

from __future__ import annotations

import math

import numpy as np

from rootvar.core.montecarlo.kernels import (
    EULER,
    EXACT,
    QE_MARTINGALE,
    fill_normals,
    fill_uniforms,
    fixed_variance,
    qe_martingale_shift,
    qe_scalar,
)
from rootvar.core.runtime import njit

__all__ = ["exotic_block"]


# payoff codes (entry 0 of ``pay`` and of ``ctrl``)
NONE, VANILLA, ARITHMETIC, GEOMETRIC, FORWARD, DIGITAL, SAME = 0, 1, 2, 3, 4, 5, 6
# entries of ``pay``
(
    P_CODE,
    P_SIGN,
    P_STRIKE,
    P_EXTRA,
    P_DISC,
    P_SIDE,
    P_LOG_BARRIER,
    P_CONTINUOUS,
    P_KNOCK_IN,
    P_REBATE,
) = range(10)
PAY_SIZE = 10
#: Past this exponent ``p = e^{-x} < 2^-54`` and ``1 - p`` is exactly 1 in double precision.
_FAR = 38.0


@njit(cache=True, inline="always")
def _payoff(code, sign, strike, extra, xs, i, n_obs):
    """Undiscounted payoff of path ``i`` from its log-prices ``xs[i, :]`` at the observed nodes."""
    if code == VANILLA:
        return max(sign * (math.exp(xs[i, n_obs - 1]) - strike), 0.0)
    if code == DIGITAL:
        return extra if sign * (math.exp(xs[i, n_obs - 1]) - strike) > 0.0 else 0.0
    if code == FORWARD:
        return max(sign * (math.exp(xs[i, 1]) - extra * math.exp(xs[i, 0])), 0.0)
    if code == ARITHMETIC:
        total = 0.0
        for m in range(n_obs):
            total += math.exp(xs[i, m])
        return max(sign * (total / n_obs - strike), 0.0)
    if code == GEOMETRIC:
        total = 0.0
        for m in range(n_obs):
            total += xs[i, m]
        return max(sign * (math.exp(total / n_obs) - strike), 0.0)
    return 0.0


@njit(cache=True, nogil=True)
def exotic_block(
    gen, size, anti, kind, fmap, consts, which, v0, x0, mu, rho, slot, watch, disc, pay, ctrl
):
    """Payoff sums of one block of full paths; runs without the GIL.

    Parameters
    ----------
    gen : numpy.random.Generator
        The block's own stream.
    size : int
        Paths in the block.
    anti : bool
        Mirror the normal and uniform draws within the block.
    kind : int
        ``EULER``, ``QE``, ``QE_MARTINGALE`` or ``EXACT``.
    fmap : int64 array of 3
        Euler ``f1, f2, f3`` codes.
    consts : float64 array (rows, constants)
        One row of scheme constants per distinct step length
        (``mc_schemes.kernel_constants``).
    which : int64 array (steps,)
        Row of ``consts`` for each step.
    v0, x0 : float
        Initial variance and log-spot.
    mu : float
        ``rate - div_yield``.
    rho : float
        Correlation.
    slot : int64 array (steps + 1,)
        Column of the observation table for each grid node, -1 where the
        node is not observed; columns in date order.
    watch : int64 array (steps + 1,)
        1 at the nodes where a discretely monitored barrier is checked.
    disc : float64 array (steps + 1,)
        Discount factor to each grid node.
    pay : float64 array (``PAY_SIZE``,)
        Product: code, sign (+1 call, -1 put), strike, extra (digital cash
        or forward-start strike share), discount factor at payment, barrier
        side (+1 down, -1 up, 0 no barrier), log barrier, continuous flag
        (1.0; otherwise checked at the nodes ``watch`` marks), knock-in
        flag, rebate.
    ctrl : float64 array (3,)
        Control: code (``NONE``, ``VANILLA``, ``GEOMETRIC`` or ``SAME``),
        sign, strike; discounted with the product's factor.

    Returns
    -------
    sums : float64 array (5,)
        Sums of ``Y``, ``Y^2``, ``C``, ``C^2``, ``Y C`` over the paths (over
        pair averages with ``anti``), ``Y`` the discounted payoff and ``C``
        the discounted control.
    counts : int64 array (4,)
        Values summed, paths whose variance touched zero, negative Euler
        updates, path-steps without the martingale correction.

    Notes
    -----
    Continuous barrier, per step with log-price end points ``x0, x1`` on the
    live side at distances ``d0, d1`` from the log barrier and step variance
    ``dI``, the probability that the bridge crosses is
    ``exp(-2 d0 d1 / dI)`` (Glasserman 2004, section 6.4;
    Beaglehole, Dybvig & Zhou 1997); a step ending on the knock side has
    crossed.  The path's survival weight is the product of ``1 - p`` over
    the steps, and a knock-out rebate is paid with the weight lost in a
    step, discounted from the step's end.
    """
    steps = which.size
    n_obs = 0
    for k in range(steps + 1):
        n_obs += slot[k] >= 0
    xs = np.empty((size, n_obs))
    v = np.full(size, v0)
    x = np.full(size, x0)
    alive = np.ones(size)
    rebate_paid = np.zeros(size)
    hit = np.zeros(size, dtype=np.bool_)
    z = np.empty(size)
    u = np.empty(size)
    zx = np.empty(size)
    negatives = 0
    adj_failed = 0
    side, log_b = pay[P_SIDE], pay[P_LOG_BARRIER]
    continuous, rebate = pay[P_CONTINUOUS] != 0.0, pay[P_REBATE]
    one_rho2 = 1.0 - rho * rho
    if slot[0] >= 0:
        for i in range(size):
            xs[i, slot[0]] = x0
    for k in range(steps):
        c = consts[which[k]]
        dt, kappa, theta, sigma = c[0], c[1], c[2], c[3]
        carry = mu * dt
        column = slot[k + 1]
        d_end = disc[k + 1]
        # the variance draws of the scheme, then the log-price normal: every step, every path
        if kind == EULER:
            fill_normals(gen, z, size, anti)
        elif kind != EXACT:
            fill_normals(gen, z, size, anti)
            fill_uniforms(gen, u, size, anti)
        else:
            for i in range(size):
                u[i] = gen.noncentral_chisquare(c[6], v[i] * c[7])
        fill_normals(gen, zx, size, anti)
        for i in range(size):
            old = v[i]
            adj = 0.0
            if kind == EULER:
                out = fixed_variance(fmap[2], old)
                root_z = math.sqrt(out) * z[i]
                new = (
                    fixed_variance(fmap[0], old)
                    + c[4] * (theta - fixed_variance(fmap[1], old))
                    + c[6] * root_z
                )
                negatives += new < 0.0
                d_int = out * dt
                d_mart = c[5] * root_z
            else:
                if kind == EXACT:
                    new = c[5] * u[i]
                else:
                    new, hot, q, m, one_b2 = qe_scalar(old, u[i], z[i], c)
                    if kind == QE_MARTINGALE:
                        adj = qe_martingale_shift(hot, q, m, one_b2, old, c)
                        if math.isnan(adj):  # left uncorrected, and counted
                            adj = 0.0
                            adj_failed += 1
                d_int = 0.5 * dt * (old + new)
                d_mart = (new - old - kappa * theta * dt + kappa * d_int) / sigma
            hit[i] |= new <= 0.0
            v[i] = new
            start = x[i]
            end = start + carry + adj - 0.5 * d_int + rho * d_mart
            end += math.sqrt(max(one_rho2 * d_int, 0.0)) * zx[i]
            x[i] = end
            if column >= 0:
                xs[i, column] = end
            if side != 0.0 and alive[i] > 0.0:
                d1 = side * (end - log_b)
                if continuous:
                    d0 = side * (start - log_b)
                    if d0 <= 0.0 or d1 <= 0.0:
                        keep = 0.0
                    elif 2.0 * d0 * d1 < _FAR * d_int:
                        keep = 1.0 - math.exp(-2.0 * d0 * d1 / d_int)
                    else:  # 1 - p rounds to 1 exactly: skip the exp (also d_int = 0)
                        keep = 1.0
                    lost = alive[i] * (1.0 - keep)
                    alive[i] -= lost
                    rebate_paid[i] += rebate * lost * d_end
                elif watch[k + 1] and d1 <= 0.0:
                    rebate_paid[i] += rebate * alive[i] * d_end
                    alive[i] = 0.0

    code, sign, strike, extra = pay[P_CODE], pay[P_SIGN], pay[P_STRIKE], pay[P_EXTRA]
    d_pay = pay[P_DISC]
    knock_in = pay[P_KNOCK_IN] != 0.0
    c_code, c_sign, c_strike = ctrl[0], ctrl[1], ctrl[2]
    y = np.empty(size)
    cv = np.empty(size)
    for i in range(size):
        if not (math.isfinite(x[i]) and math.isfinite(v[i])):
            # a diverged path (an Euler variance blown up by a step far too coarse
            # for the mean reversion) poisons the sums: the caller reports it
            y[i] = cv[i] = math.nan
            continue
        value = d_pay * _payoff(code, sign, strike, extra, xs, i, n_obs)
        if side != 0.0:
            if knock_in:  # priced on the paths: alive until the hit, rebate at expiry if never hit
                value = value * (1.0 - alive[i]) + rebate * alive[i] * d_pay
            else:
                value = value * alive[i] + rebate_paid[i]
        y[i] = value
        if c_code == SAME:
            cv[i] = value
        else:
            cv[i] = d_pay * _payoff(c_code, c_sign, c_strike, 0.0, xs, i, n_obs)
    sums = np.zeros(5)
    half = size // 2
    used = half if anti else size
    for i in range(used):
        a = 0.5 * (y[i] + y[half + i]) if anti else y[i]
        b = 0.5 * (cv[i] + cv[half + i]) if anti else cv[i]
        sums[0] += a
        sums[1] += a * a
        sums[2] += b
        sums[3] += b * b
        sums[4] += a * b
    counts = np.zeros(4, dtype=np.int64)
    counts[0] = used
    counts[1] = hit.sum()
    counts[2] = negatives
    counts[3] = adj_failed
    return sums, counts
