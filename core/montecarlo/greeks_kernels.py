"""Compiled kernels of the Monte Carlo Greeks: paths with their tangents, on the price's draws.

Two block kernels, each the twin of a price kernel:

* :func:`european_greeks_block` runs the paths of
  :func:`rootvar.core.montecarlo.kernels.price_block` with ``conditional=True``
  (the same draws in the same order, the same arithmetic for the price) and
  returns the sums of the conditional (mixing) value and of its Greeks;
* :func:`exotic_greeks_block` runs the full log-price paths of
  :func:`rootvar.core.montecarlo.exotic_kernels.exotic_block` (a continuous
  barrier on a call or put, or a cash digital) and returns the sums of the
  price of those paths and of the Greeks' estimators.

Beside each Euler path the kernels carry its *tangent process*: the
derivative of the discretised variance in ``v0``, ``kappa``, ``theta`` and
``vol_of_vol``, propagated through the scheme's own step

    ``v' = f1(v) + kappa dt (theta - f2(v)) + sigma sqrt(f3(v) dt) Z``,
    ``dv'/dp = (f1'(v) - kappa dt f2'(v) + sigma sqrt(dt) Z f3'(v) / (2 sqrt(f3(v)))) dv/dp``
    ``+ (the step's own derivative in p)``,

with ``max(v, 0)' = 1{v > 0}`` and ``|v|' = sign(v)`` (the maps are
differentiable everywhere but at ``v = 0``, which the chain hits with
probability zero), and with it the tangents of the integrated variance
``I = sum f3(v_j) dt`` and of the martingale part ``M = sum sqrt(f3(v_j) dt) Z_j``.
The maturity needs no tangent of its own: with the step count fixed the
chain depends on ``T`` only through ``kappa T`` and ``vol_of_vol sqrt(T)``
(``kappa dt`` and ``sigma sqrt(dt)``), so ``dV/dT`` is
``(kappa / T) dV/dkappa + (sigma / 2T) dV/dsigma`` plus the derivative in the
explicit scaling ``I ~ T``, ``M ~ sqrt(T)``, ``t_k ~ T`` of everything else.
The quadratic-exponential and exact schemes have no such tangent here (QE's
step jumps where it switches branch; the exact step is a Poisson-mixed
chi-square draw); their kernels carry none and the caller leaves those
Greeks out.

No kernel draws a number the price kernel does not draw, and the price is
computed by the price kernel's own operations, so a block's price has the
same bits as the price kernel's on that block.

For speed (issue 22: the Greeks at most 1.5x the price) the tangents run in
vector loops beside the price's scalar ones; full truncation, the default
Greeks scheme, has loops of its own with :func:`_coefficients` written out at
its weights, and a European's variance step and tangents share one pass; each
path's values go into the block's sums as they are formed, with no table of
them.  These change the order in which paths are visited, never the
operations on one path, so no number changes.  Some work is left out where
an identity gives its bits: without a rebate (or for a knock-in, whose
Greeks never read them) the rebates' tangents, which stay +0.0; ``exp(0)``
and ``N(+-inf)`` in the last step's Gaussian integrals; the last step's
``ln K`` and ``b``, formed once a path rather than once a stencil point;
full truncation's ``dI = max(v, 0) dt``, ``sqrt(f3(v))`` and log-price
deviation formed again in its barrier tangent loop rather than stored (the
same operations on the same number: the same bits, and fewer streams
through the caches, which two threads on one core share); a step that
loses no weight (``keep`` exactly 1) stores neither the weight nor the
rebates back, and without a rebate the rebates are not updated (they add
+0.0 to +0.0).  For a knock-out without rebate, the last step's survival
integral, read only times the rebate, is not formed, and a path knocked
out before the last step is given Greeks 0 without its closed form: there
every Greek is a sum of exact zeros times finite numbers (checked; a
non-finite one sends the path through the formulas, whose NaN it keeps),
and a zero's sign never reaches the sums, which start at +0.0.
"""

from __future__ import annotations

import math

import numpy as np

from rootvar.core.greeks import GREEK_NAMES
from rootvar.core.montecarlo.exotic_kernels import (
    DIGITAL,
    P_CODE,
    P_CONTINUOUS,
    P_DISC,
    P_EXTRA,
    P_KNOCK_IN,
    P_LOG_BARRIER,
    P_REBATE,
    P_SIDE,
    P_SIGN,
    P_STRIKE,
)
from rootvar.core.montecarlo.kernels import (
    ABS,
    EULER,
    EXACT,
    POS,
    QE_MARTINGALE,
    SAME,
    block_paths,
    fill_normals,
    fill_uniforms,
    fixed_variance,
    normal_cdf,
    qe_martingale_shift,
    qe_scalar,
)
from rootvar.core.runtime import njit

__all__ = ["CROSS", "N_SUMS", "QUANTITIES", "european_greeks_block", "exotic_greeks_block"]

#: What the kernels' sums hold, in order: the price, the Greeks of
#: :data:`rootvar.core.greeks.GREEK_NAMES` in that order, then a second
#: (likelihood-ratio) estimator of delta and of gamma (barriers; a copy of the
#: first elsewhere).  The sums have :data:`CROSS` more entries: the sums of
#: the products of the two estimators of delta and of gamma.
QUANTITIES = ("price", *GREEK_NAMES, "delta_lr", "gamma_lr")
N_Q = len(QUANTITIES)
(
    Q_PRICE,
    Q_DELTA,
    Q_GAMMA,
    Q_THETA,
    Q_VEGA,
    Q_RHO_RATE,
    Q_RHO_DIV,
    Q_V0,
    Q_KAPPA,
    Q_THETA_PARAM,
    Q_SIGMA,
    Q_RHO,
    Q_DELTA_LR,
    Q_GAMMA_LR,
) = range(N_Q)
if QUANTITIES[Q_DELTA_LR] != "delta_lr" or QUANTITIES[Q_RHO] != "d_rho":  # the names' order
    raise ImportError("greeks_kernels: QUANTITIES out of step with GREEK_NAMES")
#: Pairs of columns whose products are summed too, after the ``N_Q`` sums.
CROSS = ((Q_DELTA, Q_DELTA_LR), (Q_GAMMA, Q_GAMMA_LR))
N_SUMS = N_Q + len(CROSS)

# the tangents of an Euler path (of v, I, M, the log-price: one row each) are in
# v0, kappa, theta and vol_of_vol
N_TV = 4
# directions of a barrier path's tangents: spot (ln S0), rate, dividend yield,
# the four variance parameters, rho, and the time scale (see the module notes)
D_U, D_R, D_Q, D_V0, D_KAPPA, D_THETA, D_SIGMA, D_RHO, D_SCALE = range(9)
N_D = 9
# market entries of both kernels
(
    M_LOG_SPOT,
    M_CARRY,
    M_SIGN,
    M_DISC,
    M_SPOT,
    M_RATE,
    M_MATURITY,
    M_STRIKE,
    M_VEGA_V0,
    M_VEGA_THETA,
    M_KAPPA,
    M_SIGMA,
) = range(12)
M_SIZE = 12
#: sqrt(f3) below this is taken as 0 in its derivative (sqrt of the least
#: positive double is 2.2e-162, so no positive f3 falls below it)
_TINY_ROOT = 1e-300
_INV_SQRT_2PI = 0.3989422804014327
#: exotic_block's cut-off of the bridge exponent (``keep = 1`` past it).  Past about 36.7
#: ``1 - exp(-x)`` rounds to 1 anyway, so the price's bits do not depend on the value.
_BRIDGE_CUT = 38.0
_SQRTH = 0.7071067811865476  # 1 / sqrt(2)
#: Finite-difference steps of the closed-form last step of a barrier path (a smooth
#: function of four numbers): in the log-price, as a share of the step's standard
#: deviation, and relative in dI and 1 - rho^2.  Truncation ~ (2e-3)^2 / 6 relative,
#: rounding ~ 1e-16 / (2e-3)^2 relative.
_FD_SHARE = 2e-3
_FD_REL = 1e-4
#: Below this first-step survival the likelihood-ratio estimator leaves out the
#: first bridge's own terms (dividing by it would lose them to rounding).
_LEAST_K0 = 1e-9


@njit(cache=True, inline="always")
def map_weights(fmap):
    """0/1 weights of the Euler maps: ``(f1 pos, f1 abs, f2 pos, f2 abs, f3 abs)``.

    ``f3`` is ``max(v, 0)`` or ``|v|`` in every Euler scheme.
    """
    return (
        1.0 if fmap[0] == POS else 0.0,
        1.0 if fmap[0] == ABS else 0.0,
        1.0 if fmap[1] == POS else 0.0,
        1.0 if fmap[1] == ABS else 0.0,
        1.0 if fmap[2] == ABS else 0.0,
    )


@njit(cache=True, inline="always")
def full_truncation(fmap):
    """Whether the maps are full truncation's, ``(x, max(x, 0), max(x, 0))``."""
    return fmap[0] == SAME and fmap[1] == POS and fmap[2] == POS


@njit(cache=True, inline="always")
def _coefficients(x, root, z, w, c):
    """One Euler step's tangent coefficients at ``v = x``, ``sqrt(f3(x)) = root``, draw ``z``.

    Returns ``(a, b, m, e_kappa, e_sigma)``: ``dv'/dv = a``, the step's
    ``dI`` and ``dM`` move by ``b`` and ``m`` times the tangent of ``v``, and
    the step's own derivatives in ``kappa`` and ``vol_of_vol`` (that in
    ``theta`` is the constant ``kappa dt``).  Branch-free (the maps by their
    0/1 weights ``w``), so that loops of it run on vector instructions.
    """
    dt, theta, kdt, sq_dt, sq = c[0], c[2], c[4], c[5], c[6]
    pos1, abs1, pos2, abs2, abs3 = w
    same1 = 1.0 - pos1 - abs1
    same2 = 1.0 - pos2 - abs2
    p = np.float64(x > 0.0)
    sg = p - np.float64(x < 0.0)
    s3 = abs3 * sg + (1.0 - abs3) * p
    s1 = same1 + pos1 * p + abs1 * sg
    s2 = same2 + pos2 * p + abs2 * sg
    f2x = same2 * x + pos2 * max(x, 0.0) + abs2 * abs(x)
    # d sqrt(f3(x)) / dx; 0 where f3 = 0, whose slope is 0 there too
    g = 0.5 * s3 / max(root, _TINY_ROOT)
    a = s1 - kdt * s2 + sq * z * g
    return a, dt * s3, sq_dt * z * g, dt * (theta - f2x), sq_dt * root * z


# The vector loops below read their per-path inputs from one array (rows: v and
# sqrt(f3(v)) at the step's start, the variance normal, and for the log-price the
# normal over the step's deviation) and write at most two: LLVM then needs few
# run-time overlap checks and runs them on vector instructions.
IN_X, IN_ROOT, IN_Z, IN_NOISE, IN_RHO, IN_SCALE = range(6)
# an Euler barrier path's step also keeps its log-price normal and deviation there,
# and its dI, from which :func:`_barrier_tangents` forms what rows IN_NOISE .. IN_SCALE
# hold for the other schemes
IN_ZX, IN_SROOT, IN_DINT = 6, 7, 8


@njit(cache=True, nogil=True, error_model="numpy")
def _mart_step(n, inp, w, c, tv, tim):
    """Add one Euler step to the tangents of M (``tim`` rows 4-7), before :func:`_tangents_i`.

    A loop of its own: with the updates of v and I in the same loop LLVM
    leaves it scalar.
    """
    xo, ro, z = inp[IN_X], inp[IN_ROOT], inp[IN_Z]
    tv0, tv1, tv2, tv3 = tv[0], tv[1], tv[2], tv[3]
    tm0, tm1, tm2, tm3 = tim[4], tim[5], tim[6], tim[7]
    for i in range(n):
        _, _, m, _, _ = _coefficients(xo[i], ro[i], z[i], w, c)
        tm0[i] += m * tv0[i]
        tm1[i] += m * tv1[i]
        tm2[i] += m * tv2[i]
        tm3[i] += m * tv3[i]


@njit(cache=True, nogil=True, error_model="numpy")
def _tangents_i(n, inp, w, c, tv, tim):
    """Advance the tangents of v and I (``tim`` rows 0-3) of ``n`` paths by one Euler step.

    Those of M follow from :func:`_mart_step` (called first), or for full
    truncation at the end from :func:`_mart_tangents`.
    """
    kdt = c[4]
    xo, ro, z = inp[IN_X], inp[IN_ROOT], inp[IN_Z]
    tv0, tv1, tv2, tv3 = tv[0], tv[1], tv[2], tv[3]
    ti0, ti1, ti2, ti3 = tim[0], tim[1], tim[2], tim[3]
    for i in range(n):
        a, b, _, e_k, e_s = _coefficients(xo[i], ro[i], z[i], w, c)
        t = tv0[i]
        ti0[i] += b * t
        tv0[i] = a * t
        t = tv1[i]
        ti1[i] += b * t
        tv1[i] = a * t + e_k
        t = tv2[i]
        ti2[i] += b * t
        tv2[i] = a * t + kdt
        t = tv3[i]
        ti3[i] += b * t
        tv3[i] = a * t + e_s


@njit(cache=True, nogil=True, error_model="numpy")
def _tangents_x(n, inp, w, c, rho, one_rho2, tv, tx):
    """Advance the tangents of v and of the log-price of ``n`` paths by one Euler step.

    The log-price step ``-dI/2 + rho dM + sqrt((1 - rho^2) dI) Zx`` moves by
    ``(-b/2 + rho m + (1 - rho^2) b Zx / (2 s)) dv`` for a tangent ``dv`` of
    ``v`` (``s`` the step's log-price deviation, ``inp[IN_NOISE] = Zx / s``).
    """
    kdt = c[4]
    xo, ro, z, noise = inp[IN_X], inp[IN_ROOT], inp[IN_Z], inp[IN_NOISE]
    tv0, tv1, tv2, tv3 = tv[0], tv[1], tv[2], tv[3]
    tx0, tx1, tx2, tx3 = tx[0], tx[1], tx[2], tx[3]
    for i in range(n):
        a, b, m, e_k, e_s = _coefficients(xo[i], ro[i], z[i], w, c)
        slope = -0.5 * b + rho * m + 0.5 * one_rho2 * b * noise[i]
        t = tv0[i]
        tx0[i] += slope * t
        tv0[i] = a * t
        t = tv1[i]
        tx1[i] += slope * t
        tv1[i] = a * t + e_k
        t = tv2[i]
        tx2[i] += slope * t
        tv2[i] = a * t + kdt
        t = tv3[i]
        tx3[i] += slope * t
        tv3[i] = a * t + e_s


@njit(cache=True, nogil=True, error_model="numpy")
def _shift_x(n, inp, tx):
    """Add the step's increments of the log-price's tangents in rho and the time scale."""
    inc_rho, inc_scale = inp[IN_RHO], inp[IN_SCALE]
    tx_rho, tx_scale = tx[4], tx[5]
    for i in range(n):
        tx_rho[i] += inc_rho[i]
        tx_scale[i] += inc_scale[i]


@njit(cache=True, inline="always")
def _euler_increments(d_int, root, zi, zxi, s_root, c5, rho, carry, inv_t):
    """An Euler step's ``Zx / s`` and log-price increments in rho and in the time scale.

    By the operations of :func:`exotic_greeks_block`'s step loop for the
    other schemes, from the step's ``dI``, ``root = sqrt(f3(v))``, its two
    normals, ``s`` (the log-price deviation) and ``c5 = sqrt(dt)`` (``dM``
    is the price kernel's ``c5 (root z)``).
    """
    d_mart = c5 * (root * zi)
    noise = zxi / s_root if s_root > 0.0 else 0.0
    inc_rho = d_mart - rho * d_int * noise
    inc_scale = carry - 0.5 * d_int + 0.5 * rho * d_mart + 0.5 * s_root * zxi
    return noise, inc_rho, inc_scale * inv_t


# The two loops below read the scheme's constants before the loop: a loop of
# _euler_increments reading them from ``c`` inside it (an array the compiler cannot
# tell from those written) stayed scalar.
@njit(cache=True, nogil=True, error_model="numpy")
def _barrier_increments(n, inp, c, rho, carry, inv_t):
    """Rows IN_NOISE, IN_RHO, IN_SCALE of ``n`` Euler paths (:func:`_euler_increments`)."""
    c5 = c[5]
    ro, z, zx, sr, di = inp[IN_ROOT], inp[IN_Z], inp[IN_ZX], inp[IN_SROOT], inp[IN_DINT]
    noise, inc_rho, inc_scale = inp[IN_NOISE], inp[IN_RHO], inp[IN_SCALE]
    for i in range(n):
        noise[i], inc_rho[i], inc_scale[i] = _euler_increments(
            di[i], ro[i], z[i], zx[i], sr[i], c5, rho, carry, inv_t
        )


@njit(cache=True, nogil=True, error_model="numpy")
def _barrier_tangents(n, inp, fmap, w, c, rho, one_rho2, carry, inv_t, tv, tx):
    """Advance the tangents of v and of the log-price of ``n`` Euler paths by one step.

    The step's increments are formed here, in vector loops, rather than in
    the scalar step loop.  Full truncation runs :func:`_tangents_x`,
    :func:`_shift_x` and the increments in one loop, with
    :func:`_coefficients` written out at its weights as in
    :func:`_full_truncation_step` (same bits); the other maps run them in turn.
    """
    if not full_truncation(fmap):
        _barrier_increments(n, inp, c, rho, carry, inv_t)
        _tangents_x(n, inp, w, c, rho, one_rho2, tv, tx)
        _shift_x(n, inp, tx)
        return
    dt, theta, kdt, sq_dt, sq = c[0], c[2], c[4], c[5], c[6]
    xo, z, zx = inp[IN_X], inp[IN_Z], inp[IN_ZX]
    tv0, tv1, tv2, tv3 = tv[0], tv[1], tv[2], tv[3]
    tx0, tx1, tx2, tx3, tx_rho, tx_scale = tx[0], tx[1], tx[2], tx[3], tx[4], tx[5]
    for i in range(n):
        x, zi = xo[i], z[i]
        # the step's dI, sqrt(f3(v)) and log-price deviation, formed again by the step
        # loop's operations (f3 = max(v, 0)): three streams fewer to store there and to
        # load here, for two square roots on vector instructions
        d_int = max(x, 0.0) * dt
        root = math.sqrt(max(x, 0.0))
        s_root = math.sqrt(max(one_rho2 * d_int, 0.0))
        noise, inc_rho, inc_scale = _euler_increments(
            d_int, root, zi, zx[i], s_root, sq_dt, rho, carry, inv_t
        )
        p = np.float64(x > 0.0)
        g = 0.5 * p / max(root, _TINY_ROOT)
        a = 1.0 - kdt * p + sq * zi * g
        b = dt * p
        m = sq_dt * zi * g
        e_k = dt * (theta - max(x, 0.0))
        e_s = sq_dt * root * zi
        slope = -0.5 * b + rho * m + 0.5 * one_rho2 * b * noise
        t = tv0[i]
        tx0[i] += slope * t
        tv0[i] = a * t
        t = tv1[i]
        tx1[i] += slope * t
        tv1[i] = a * t + e_k
        t = tv2[i]
        tx2[i] += slope * t
        tv2[i] = a * t + kdt
        t = tv3[i]
        tx3[i] += slope * t
        tv3[i] = a * t + e_s
        tx_rho[i] += inc_rho
        tx_scale[i] += inc_scale


@njit(cache=True, nogil=True, error_model="numpy")
def _mart_tangents(size, v, v0, int_var, mart, c, maturity, tv, tim):
    """Full truncation's tangents of M from those of ``v_n`` and ``I``.

    With ``f1(v) = v`` and ``f2 = f3 = max(v, 0)`` the steps add up to
    ``sigma M = v_n - v0 - kappa theta T + kappa I`` exactly, so
    ``sigma dM = dv_n - dv0 - d(kappa theta T) + I dkappa + kappa dI - M dsigma``.
    """
    kappa, theta, sigma = c[1], c[2], c[3]
    ti, tm = tim[:N_TV], tim[N_TV:]
    for i in range(size):
        tm[0, i] = (tv[0, i] - 1.0 + kappa * ti[0, i]) / sigma
        tm[1, i] = (tv[1, i] - theta * maturity + int_var[i] + kappa * ti[1, i]) / sigma
        tm[2, i] = (tv[2, i] - kappa * maturity + kappa * ti[2, i]) / sigma
        tm[3, i] = (tv[3, i] + kappa * ti[3, i] - mart[i]) / sigma


@njit(cache=True, inline="always")
def _conditional_terms(digital, sign, cash, log_fwd, log_k, strike, root, disc):
    """The conditional value given the variance path and its derivatives.

    With ``l = ln F`` (the conditional forward) and ``w = root^2`` (the
    conditional total variance) returns ``(P, dP/dl, d2P/dl2 - dP/dl,
    dP/dw)``: Black-Scholes for a call (``sign`` +1) or put (-1), or a
    digital paying ``cash``, discounted by ``disc``.  ``P`` of a call or put
    is computed by the operations of
    :func:`rootvar.core.montecarlo.kernels.price_block`.
    """
    fwd = math.exp(log_fwd)
    if root > 0.0:
        d1 = (log_fwd - log_k) / root + 0.5 * root
        d2 = d1 - root
        if digital:
            pdf = math.exp(-0.5 * d2 * d2) * _INV_SQRT_2PI
            p_l = disc * cash * sign * pdf / root
            value = disc * cash * normal_cdf(sign * d2)
            return value, p_l, -p_l * (d2 / root + 1.0), -0.5 * p_l * d1 / root
        nd1 = normal_cdf(sign * d1)
        pay = sign * (fwd * nd1 - strike * normal_cdf(sign * d2))
        pdf = math.exp(-0.5 * d1 * d1) * _INV_SQRT_2PI
        curv = disc * fwd * pdf / root  # d2P/dl2 - dP/dl, and twice dP/dw
        return disc * pay, disc * sign * fwd * nd1, curv, 0.5 * curv
    # no log-price noise left (I = 0): the payoff itself, whose kink is a null set
    won = sign * (fwd - strike) > 0.0
    if digital:
        return (disc * cash if won else 0.0), 0.0, 0.0, 0.0
    p_l = disc * sign * fwd if won else 0.0
    return disc * max(sign * (fwd - strike), 0.0), p_l, 0.0, 0.0


@njit(cache=True, inline="always")
def _market_scalars(market):
    """The market entries :func:`_conditional_greeks` reads, as numbers read once a block.

    ``(S0, r, T, 1 / T, (r - q) T, kappa, vol_of_vol, 2 sqrt(v0), 2 sqrt(theta))``:
    read from the array on every path they could not be kept in registers
    (the compiler cannot tell the array from the rows written).
    """
    maturity = market[M_MATURITY]
    return (
        market[M_SPOT],
        market[M_RATE],
        maturity,
        1.0 / maturity,
        market[M_CARRY],
        market[M_KAPPA],
        market[M_SIGMA],
        market[M_VEGA_V0],
        market[M_VEGA_THETA],
    )


@njit(cache=True, inline="always")
def _conditional_greeks(out, i, terms, rho, int_var, mart, ti, tm, j, tangents, mk):
    """Row ``i`` of ``out``: the conditional estimator's price and Greeks on path ``j``.

    ``terms`` is :func:`_conditional_terms`, ``mk`` :func:`_market_scalars`;
    ``ln F = ln S0 + (r - q) T + A + rho M - rho^2 I / 2`` and
    ``w = (1 - rho^2) I`` carry the path's dependence on every input (see
    :func:`european_greeks_block`); ``ti[:, j]``, ``tm[:, j]`` hold the
    tangents of ``I`` and ``M`` (Euler, ``tangents`` True).
    """
    value, p_l, curv, p_w = terms
    spot, rate, maturity, inv_t, carry, kappa, sigma, vega_v0, vega_theta = mk
    one_rho2 = 1.0 - rho * rho
    delta = p_l / spot
    gamma = curv / (spot * spot)
    out[i, Q_PRICE] = value
    out[i, Q_DELTA] = delta
    out[i, Q_GAMMA] = gamma
    out[i, Q_RHO_RATE] = maturity * (p_l - value)
    out[i, Q_RHO_DIV] = -maturity * p_l
    out[i, Q_RHO] = p_l * (mart - rho * int_var) - 2.0 * rho * int_var * p_w
    out[i, Q_DELTA_LR] = delta
    out[i, Q_GAMMA_LR] = gamma
    if not tangents:
        for q in (Q_V0, Q_KAPPA, Q_THETA_PARAM, Q_SIGMA, Q_THETA, Q_VEGA):
            out[i, q] = 0.0
        return
    by_p = p_w * one_rho2
    t_int, t_mart = ti[0, j], tm[0, j]
    d_v0 = p_l * (rho * t_mart - 0.5 * rho * rho * t_int) + by_p * t_int
    t_int, t_mart = ti[1, j], tm[1, j]
    d_kappa = p_l * (rho * t_mart - 0.5 * rho * rho * t_int) + by_p * t_int
    t_int, t_mart = ti[2, j], tm[2, j]
    d_theta = p_l * (rho * t_mart - 0.5 * rho * rho * t_int) + by_p * t_int
    t_int, t_mart = ti[3, j], tm[3, j]
    d_sigma = p_l * (rho * t_mart - 0.5 * rho * rho * t_int) + by_p * t_int
    # dP/dT: through kappa T and sigma sqrt(T), then the explicit I ~ T, M ~ sqrt(T)
    scale = (
        p_l * (carry + 0.5 * rho * mart - 0.5 * rho * rho * int_var) + by_p * int_var
    ) * inv_t - rate * value
    d_mat = kappa * inv_t * d_kappa
    d_mat += 0.5 * sigma * inv_t * d_sigma + scale
    out[i, Q_V0] = d_v0
    out[i, Q_KAPPA] = d_kappa
    out[i, Q_THETA_PARAM] = d_theta
    out[i, Q_SIGMA] = d_sigma
    out[i, Q_THETA] = -d_mat
    out[i, Q_VEGA] = vega_v0 * d_v0 + vega_theta * d_theta


@njit(cache=True, inline="always")
def _add_value(rows, anti, pair, sums, squares):
    """Add one value to a block's sums: of every column, of its square, then the CROSS products.

    The value is the pair average of ``rows``'s two rows (paths ``i`` and
    ``half + i``) with ``anti``, else its row 0.  Called in path order it
    adds the numbers a table of the block's values summed column by column
    would, in the same order, without the table (14 numbers a path written
    and read back through the caches).  ``squares`` has the length of
    ``sums`` (its last entries 0); ``pair`` is scratch of ``N_Q``.
    """
    for q in range(N_Q):
        x = 0.5 * (rows[0, q] + rows[1, q]) if anti else rows[0, q]
        pair[q] = x
        sums[q] += x
        squares[q] += x * x
    for j in range(len(CROSS)):
        sums[N_Q + j] += pair[CROSS[j][0]] * pair[CROSS[j][1]]


@njit(cache=True, nogil=True, error_model="numpy")
def _full_truncation_step(n, z, c, vim, tv, ti):
    """One full-truncation Euler step of ``n`` paths and of their tangents, in one loop.

    The price kernel's step with ``f1(v) = v`` and ``f2 = f3 = max(v, 0)``
    (same bits), then :func:`_tangents_i`'s update with the coefficients of
    :func:`_coefficients` at these maps' weights written out (``s1 = 1``,
    ``s2 = s3 = 1{v > 0}``, ``f2(v) = max(v, 0)``): for a finite ``v`` the
    general form only adds exact zeros to these, so the tangents keep their
    bits at half the operations, and one pass over the paths replaces two.
    ``vim`` holds v, I and M as rows: LLVM vectorises the loop with the state
    in these three arrays (with all eleven rows in one array it does not).
    """
    dt, theta, kdt, sq_dt, sq = c[0], c[2], c[4], c[5], c[6]
    vs, int_var, mart = vim[0], vim[1], vim[2]
    tv0, tv1, tv2, tv3 = tv[0], tv[1], tv[2], tv[3]
    ti0, ti1, ti2, ti3 = ti[0], ti[1], ti[2], ti[3]
    for i in range(n):
        x = vs[i]
        out = max(x, 0.0)
        root = math.sqrt(out)
        zi = z[i]
        root_z = root * zi
        vs[i] = x + kdt * (theta - out) + sq * root_z
        int_var[i] += out * dt
        mart[i] += sq_dt * root_z
        p = np.float64(x > 0.0)
        g = 0.5 * p / max(root, _TINY_ROOT)
        a = 1.0 - kdt * p + sq * zi * g
        b = dt * p
        e_k = dt * (theta - out)
        e_s = sq_dt * root * zi
        t = tv0[i]
        ti0[i] += b * t
        tv0[i] = a * t
        t = tv1[i]
        ti1[i] += b * t
        tv1[i] = a * t + e_k
        t = tv2[i]
        ti2[i] += b * t
        tv2[i] = a * t + kdt
        t = tv3[i]
        ti3[i] += b * t
        tv3[i] = a * t + e_s


@njit(cache=True, nogil=True, error_model="numpy")
def _euler_paths(gen, size, anti, fmap, c, v0, steps):
    """The Euler paths of :func:`block_paths` (same draws, same bits) and their tangents.

    Full truncation runs :func:`_full_truncation_step`; the other maps run
    the price kernel's own loop each step (keeping each path's ``v`` and
    ``sqrt(f3(v))``), then the tangents' vector loops.
    """
    vim = np.zeros((3, size))  # v, I, M
    vim[0, :] = v0
    v, int_var, mart = vim[0], vim[1], vim[2]
    tv = np.zeros((N_TV, size))
    tv[0, :] = 1.0  # dv0/dv0
    tim = np.zeros((2 * N_TV, size))
    inp = np.empty((3, size))
    z = inp[IN_Z]
    w = map_weights(fmap)
    full = full_truncation(fmap)
    dt, theta, kdt, sq_dt, sq = c[0], c[2], c[4], c[5], c[6]
    f1, f2, f3 = fmap[0], fmap[1], fmap[2]
    for _ in range(steps):
        fill_normals(gen, z, size, anti)
        if full:
            _full_truncation_step(size, z, c, vim, tv, tim)
            continue
        for i in range(size):
            x = v[i]
            out = fixed_variance(f3, x)
            root = math.sqrt(out)
            root_z = root * z[i]
            new = fixed_variance(f1, x) + kdt * (theta - fixed_variance(f2, x)) + sq * root_z
            int_var[i] += out * dt
            mart[i] += sq_dt * root_z
            inp[IN_X, i] = x
            inp[IN_ROOT, i] = root
            v[i] = new
        _mart_step(size, inp, w, c, tv, tim)
        _tangents_i(size, inp, w, c, tv, tim)
    if full:
        _mart_tangents(size, v, v0, int_var, mart, c, dt * steps, tv, tim)
    return int_var, mart, tim[:N_TV], tim[N_TV:]


# numpy's error model: no division here can be by 0 (S0 > 0, T > 0, and the
# conditional terms divide by the path's deviation only where it is > 0), and
# without the checks the compiler keeps more in registers; no bit changes
@njit(cache=True, nogil=True, error_model="numpy")
def european_greeks_block(gen, size, anti, kind, fmap, c, v0, steps, market, rho):
    """Per-block sums of the conditional (mixing) estimator's price and Greeks.

    Parameters
    ----------
    gen, size, anti, kind, fmap, c, v0, steps
        As :func:`rootvar.core.montecarlo.kernels.block_paths`.
    market : float64 array (``M_SIZE``,)
        ``ln S0``, ``(r - q) T``, sign (+1 call, -1 put), ``e^{-rT}``, ``S0``,
        ``r``, ``T``, the strike, the vega weights ``2 sqrt(v0)`` and
        ``2 sqrt(theta)``, ``kappa`` and ``vol_of_vol``.
    rho : float
        Correlation, in (-1, 1).

    Returns
    -------
    sums, squares : float64 array (``N_SUMS``,)
        Per :data:`QUANTITIES` (pair averages with ``anti``), then the
        :data:`CROSS` products.  The variance Greeks (``theta``, ``vega``,
        ``d_v0`` .. ``d_vol_of_vol``) are 0 for kinds other than Euler: the
        caller drops them.
    counts : int64 array (2,)
        Values summed, paths whose value is not finite (diverged).

    Notes
    -----
    Given the variance path, ``ln S_T`` is normal with total variance
    ``w = (1 - rho^2) I`` and mean ``ln F - w / 2``,
    ``ln F = ln S0 + (r - q) T + A + rho M - rho^2 I / 2``, so the path's
    conditional value is Black-Scholes at forward ``F`` and total variance
    ``w`` (Willard 1997).  With ``P_l = dP/d ln F`` and ``P_w = dP/dw``:
    ``delta = P_l / S0``, ``gamma = (d2P/dl2 - P_l) / S0^2``,
    ``dP/dp = P_l d ln F/dp + P_w dw/dp`` for ``p`` a variance parameter
    (through the tangents of ``I`` and ``M``) or ``rho``
    (``d ln F/d rho = M - rho I``, ``dw/d rho = -2 rho I``: the variance path
    does not depend on ``rho``), ``dP/dr = T (P_l - P)``, ``dP/dq = -T P_l``,
    and ``theta = -dP/dT`` with
    ``dP/dT = (kappa/T) dP/dkappa + (sigma/2T) dP/dsigma
    + [P_l ((r - q) T + rho M / 2 - rho^2 I / 2) + P_w w] / T - r P``.
    """
    if kind == EULER:
        int_var, mart, ti, tm = _euler_paths(gen, size, anti, fmap, c, v0, steps)
        adj = np.zeros(size)
    else:
        _, int_var, mart, adj, _, _, _ = block_paths(gen, size, anti, kind, fmap, c, v0, steps)
        ti = np.zeros((N_TV, 1))
        tm = np.zeros((N_TV, 1))
    log_spot, carry, sign = market[M_LOG_SPOT], market[M_CARRY], market[M_SIGN]
    disc, strike = market[M_DISC], market[M_STRIKE]
    log_k = math.log(strike)
    mk = _market_scalars(market)
    bad = 0
    for i in range(size):
        if not (math.isfinite(int_var[i]) and math.isfinite(mart[i])):
            bad += 1
    # each path (pair) is valued and added to the sums at once: a table of every
    # path's values (14 a path) would be written and read back through the caches
    sums = np.zeros(N_SUMS)
    squares = np.zeros(N_SUMS)
    rows = np.empty((2, N_Q))
    pair = np.empty(N_Q)
    half = size // 2
    used = half if anti else size
    for i in range(used):
        for r in range(2 if anti else 1):
            j = i + r * half
            if not (math.isfinite(int_var[j]) and math.isfinite(mart[j])):
                for q in range(N_Q):
                    rows[r, q] = math.nan
                continue
            # the operations of price_block's conditional branch, in its order
            root = math.sqrt(max((1.0 - rho * rho) * int_var[j], 0.0))
            log_fwd = log_spot + carry + adj[j] + rho * mart[j] - 0.5 * rho * rho * int_var[j]
            terms = _conditional_terms(False, sign, 0.0, log_fwd, log_k, strike, root, disc)
            _conditional_greeks(
                rows, r, terms, rho, int_var[j], mart[j], ti, tm, j, kind == EULER, mk
            )
        _add_value(rows, anti, pair, sums, squares)
    counts = np.zeros(2, dtype=np.int64)
    counts[0] = used
    counts[1] = bad
    return sums, squares, counts


@njit(cache=True, error_model="numpy")
def _erfcx(x):
    """``exp(x^2) erfc(x)`` for ``x >= 0`` (an asymptotic series past 25, where erfc underflows)."""
    if x < 25.0:
        return math.exp(x * x) * math.erfc(x)
    # Abramowitz & Stegun 7.1.23; the first term left out is below 1e-15 relative at x = 25
    t = 1.0 / (2.0 * x * x)
    series = 1.0 - t * (1.0 - 3.0 * t * (1.0 - 5.0 * t * (1.0 - 7.0 * t * (1.0 - 9.0 * t))))
    return series / (x * 1.7724538509055159)


@njit(cache=True, error_model="numpy")
def _ndtr_diff(a, b):
    """``N(b) - N(a)`` for ``a <= b``, from the upper tails when both are positive.

    An infinite end is not evaluated: ``normal_cdf`` gives exactly 0 at
    ``-inf`` and 1 at ``+inf`` (``erfc(inf) = 0``), so the constants have its bits.
    """
    if a > 0.0:
        if b == math.inf:
            return normal_cdf(-a)
        return normal_cdf(-a) - normal_cdf(-b)
    if b == math.inf:
        return 1.0 - normal_cdf(a)
    if a == -math.inf:
        return normal_cdf(b)
    return normal_cdf(b) - normal_cdf(a)


@njit(cache=True, error_model="numpy")
def _tail_up(c, bound, mu, s):
    """``E[e^{c y} 1{y > bound}]``, ``y ~ N(mu, s^2)``, for ``c < 0`` and ``bound >= 0``.

    ``e^{c mu + c^2 s^2 / 2} N(h)``, ``h = (mu + c s^2 - bound) / s``; for
    ``h < -1`` in the form ``e^{c bound - (mu - bound)^2 / (2 s^2)} erfcx(-h / sqrt 2) / 2``,
    which neither overflows nor loses the tail (its exponent is <= 0).
    """
    if bound == math.inf:
        return 0.0
    h = (mu + c * s * s - bound) / s
    if h >= -1.0:
        return math.exp(c * (mu + 0.5 * c * s * s)) * normal_cdf(h)
    gap = mu - bound
    power = c * bound - gap * gap / (2.0 * s * s)
    if power < -745.0:  # below the least double (erfcx is at most 1 here)
        return 0.0
    return math.exp(power) * 0.5 * _erfcx(-h * _SQRTH)


@njit(cache=True, error_model="numpy")
def _tail_low(c, bound, mu, s):
    """``E[e^{c y} 1{y < bound}]``, ``y ~ N(mu, s^2)``, for ``c > 0`` and ``bound <= 0``."""
    if bound == -math.inf:
        return 0.0
    h = (bound - mu - c * s * s) / s
    if h >= -1.0:
        return math.exp(c * (mu + 0.5 * c * s * s)) * normal_cdf(h)
    gap = bound - mu
    power = c * bound - gap * gap / (2.0 * s * s)
    if power < -745.0:  # below the least double (erfcx is at most 1 here)
        return 0.0
    return math.exp(power) * 0.5 * _erfcx(-h * _SQRTH)


@njit(cache=True, error_model="numpy")
def _gauss_exp(c, lo, hi, mu, s):
    """``E[e^{c y} 1{lo < y < hi}]``, ``y ~ N(mu, s^2)``, ``s > 0``; ``lo``, ``hi`` may be infinite.

    A large ``|c|`` (the bridge's ``-2 d0 / dI``) comes only with a range on
    the side where ``c y <= 0``, so the tail forms keep every exponent <= 0.
    """
    if lo >= hi:
        return 0.0
    if abs(c) <= 2.0:
        shift = mu + c * s * s
        lo_h, hi_h = (lo - shift) / s, (hi - shift) / s
        if c == 0.0:  # exp(0 x) is exactly 1 for a finite x: no exp, the same bits
            return _ndtr_diff(lo_h, hi_h)
        return math.exp(c * (mu + 0.5 * c * s * s)) * _ndtr_diff(lo_h, hi_h)
    if c < 0.0:
        return _tail_up(c, lo, mu, s) - _tail_up(c, hi, mu, s)
    return _tail_low(c, hi, mu, s) - _tail_low(c, lo, mu, s)


@njit(cache=True, error_model="numpy")
def _last_step(
    xp, drift, d_int, one_rho2, side, log_b, sign, strike, knock_in, k_rel, spot_b, need_keep
):
    """The last step of a barrier path integrated over its log-price normal, in closed form.

    Given the path up to the last step's start ``xp`` (log-price) and the
    step's variance draws, ``x_n = xp + drift + s Z`` with
    ``s^2 = (1 - rho^2) dI``, and the step survives with the bridge
    probability ``keep = 1 - exp(-2 d0 d1 / dI)``, ``d0 = side (xp - ln b)``,
    ``d1 = side (x_n - ln b)`` (0 when ``d1 <= 0``).  Returns
    ``(E[pay keep], E[keep], E[pay])``, ``pay`` the undiscounted call or put
    payoff at ``x_n`` (``E[pay]`` only for a knock-in, else 0); with
    ``y = x_n - ln b ~ N(mu, s^2)`` each is a sum of
    ``E[e^{c y} 1{lo < y < hi}]``.  The price kernel's cut-off (``keep = 1``
    once ``2 d0 d1 >= 38 dI``, where ``1 - keep < 6e-9``) is not applied: the
    difference is below that.  ``k_rel = ln K - ln b`` and ``spot_b = b`` are
    the caller's (the same for every call on a path).  Without ``need_keep``
    ``E[keep]`` is returned as 0 and not formed: a knock-out without rebate
    reads it only times the rebate, 0 (two of the six Gaussian integrals).
    """
    mu = xp + drift - log_b
    pay_lo, pay_hi = (k_rel, math.inf) if sign > 0.0 else (-math.inf, k_rel)
    live_lo, live_hi = (0.0, math.inf) if side > 0.0 else (-math.inf, 0.0)
    d0 = side * (xp - log_b)
    s = math.sqrt(max(one_rho2 * d_int, 0.0))
    if s <= 0.0 or d_int <= 0.0:  # no noise: the step is its drift
        x_n = xp + drift
        pay = max(sign * (math.exp(x_n) - strike), 0.0)
        keep = 1.0 if (d0 > 0.0 and side * (x_n - log_b) > 0.0) else 0.0
        return pay * keep, keep, pay
    plain = 0.0
    if knock_in:
        plain = spot_b * _gauss_exp(1.0, pay_lo, pay_hi, mu, s)
        plain = sign * (plain - strike * _gauss_exp(0.0, pay_lo, pay_hi, mu, s))
    if d0 <= 0.0:
        return 0.0, 0.0, plain
    lo, hi = max(pay_lo, live_lo), min(pay_hi, live_hi)
    c = -2.0 * d0 * side / d_int
    live = spot_b * _gauss_exp(1.0, lo, hi, mu, s) - strike * _gauss_exp(0.0, lo, hi, mu, s)
    crossed = spot_b * _gauss_exp(1.0 + c, lo, hi, mu, s) - strike * _gauss_exp(c, lo, hi, mu, s)
    survive = 0.0
    if need_keep:
        survive = _gauss_exp(0.0, live_lo, live_hi, mu, s) - _gauss_exp(c, live_lo, live_hi, mu, s)
    return sign * (live - crossed), survive, plain


@njit(cache=True, error_model="numpy")
def _last_step_far(m, s, sign, strike, log_k):
    """``E[pay]`` of the last step, ``x_n ~ N(m, s^2)``, and its derivatives: Black's formula.

    Returns ``(P, dP/dm, d2P/dm2, dP/d(s^2))``.  Used where the step starts and
    ends so far from the barrier (see :func:`_barrier_greeks`) that the
    bridge and the knock side carry less than ``e^{-40}`` of it.  ``log_k`` is
    ``ln K``, the caller's.
    """
    var = s * s
    fwd = math.exp(m + 0.5 * var)
    d1 = (m + var - log_k) / s
    d2 = d1 - s
    nd1 = normal_cdf(sign * d1)
    pdf = math.exp(-0.5 * d1 * d1) * _INV_SQRT_2PI
    value = sign * (fwd * nd1 - strike * normal_cdf(sign * d2))
    slope = sign * fwd * nd1
    return value, slope, slope + fwd * pdf / s, 0.5 * slope + 0.5 * fwd * pdf / s


#: The last step is "far" from the barrier when its end lies on the live side by more
#: than this many deviations and the bridge exponent beyond that exceeds _FAR_EXP:
#: both neglected parts are then below e^{-40}.
_FAR_DEVIATIONS = 9.0
_FAR_EXP = 40.0


@njit(cache=True, inline="always")
def _keep_slope(scale, d0, d1, ratio, dd0, dd1, dd_int):
    """Tangent of a step survival ``1 - e``, ``e = exp(-2 d0 d1 / dI)``, with ``0 < e < 1``.

    ``scale = 2 e / dI`` and ``ratio = d0 d1 / dI``.
    """
    return scale * (dd0 * d1 + d0 * dd1 - ratio * dd_int)


@njit(cache=True, inline="always")
def _node_tangent(dn, t, inv_t, tx, i):
    """Tangent of the log-price at a node of time ``t`` in direction ``dn`` (state ``tx[:, i]``)."""
    if dn == D_U:
        return 1.0
    if dn == D_R:
        return t
    if dn == D_Q:
        return -t
    return tx[dn - 3, i]


@njit(cache=True, nogil=True, error_model="numpy")
def exotic_greeks_block(
    gen, size, anti, kind, fmap, consts, which, v0, x0, mu, rho, times, disc, pay, market
):
    """Per-block sums of an exotic's price and its Greeks' estimators on full log-price paths.

    Parameters
    ----------
    gen, size, anti, kind, fmap, consts, which, v0, x0, mu, rho, disc, pay
        As :func:`rootvar.core.montecarlo.exotic_kernels.exotic_block`, on a
        grid whose only observed node is the last: a call or put with a
        continuous barrier (``pay`` code vanilla), or a digital without one.
    times : float64 array (steps + 1,)
        Grid times (years), 0 first and the maturity last, each a fixed
        share of the maturity (one interval of equal steps).
    market : float64 array (``M_SIZE``,)
        As :func:`european_greeks_block` (its strike entry the product's).

    Returns
    -------
    sums, squares : float64 array (``N_SUMS``,)
        Per :data:`QUANTITIES` (pair averages with ``anti``), then the
        :data:`CROSS` products; the price is the price kernel's own.
    counts : int64 array (2,)
        Values summed, diverged paths.

    Notes
    -----
    *Digital*: the price is the payoff on the path; the Greeks are those of
    the conditional value given the variance path, ``cash e^{-rT} N(+-d2)``,
    with ``I``, ``M``, ``A`` the sums of the path's step quantities (as in
    :func:`european_greeks_block`).

    *Barrier*: the Greeks are derivatives of the path's *smoothed* value
    ``Y``: the survival weight before the last step times the last step
    integrated over its log-price normal in closed form (:func:`_last_step`),
    plus the rebates; ``E[Y]`` is the price.  Forward-mode tangents carry
    the weight's derivatives in ``u = ln S0``, ``r``, ``q``, the variance
    parameters, ``rho`` and the time scale (``dx_k/du = 1``,
    ``dx_k/dr = t_k``, ``dx_k/dq = -t_k``, the variance directions through
    each step's ``dI`` and ``dM`` in the log-price step
    ``x' = x + (r - q) dt + a - dI/2 + rho dM + sqrt((1 - rho^2) dI) Z``),
    and its second derivative in ``u``.  A step survival
    ``1 - exp(-2 d0 d1 / dI)`` has a kink where the step ends on the barrier
    (``d1 = 0``), but the next step's survival vanishes there like ``d0``, so
    the weight is continuously differentiable; the payoff's kink at the
    strike is smoothed by the last step's integral.  So
    ``delta = E[dY/du] / S0`` and ``gamma = E[d2Y/du2 - dY/du] / S0^2`` miss
    no mass.  (A rebate paid at the hit leaves a kink of order
    ``rebate x r dt`` per crossing.)  The second estimators differentiate
    ``Y`` by the likelihood ratio of the first log-price step, whose law
    given the variance is ``N(ln S0 + m_0, s_0^2)``: writing
    ``Y = A + k0 B`` with ``k0`` the first step's survival and ``A``, ``B``
    free of the start ``x_0 = u``,
    ``dV/du = E[Y Z_0 / s_0 + (d/du)_0 k0 B]`` and
    ``d2V/du2 = E[G Z_0 / s_0 + (d/du)_0 (dk0/du) B + (d/du)_0 k0 dB/du]``,
    ``G = dY/du`` pathwise, ``(d/du)_0`` the derivative through ``x_0`` alone.
    """
    steps = which.size
    maturity = times[steps]
    inv_t = 1.0 / maturity
    rate = market[M_RATE]
    digital = pay[P_CODE] == DIGITAL
    euler = kind == EULER
    side, log_b = pay[P_SIDE], pay[P_LOG_BARRIER]
    barrier = side != 0.0 and pay[P_CONTINUOUS] != 0.0
    rebate = pay[P_REBATE]
    one_rho2 = 1.0 - rho * rho
    w = map_weights(fmap)
    full = full_truncation(fmap)
    v = np.full(size, v0)
    x = np.full(size, x0)
    alive = np.ones(size)
    rebate_paid = np.zeros(size)
    n_e = size if euler else 1
    n_b = size if barrier else 1
    inp = np.zeros((9, max(n_e, n_b)))  # the vector loops' inputs (see IN_X)
    z = inp[IN_Z] if euler else np.empty(size)
    inc_rho, inc_scale = inp[IN_RHO], inp[IN_SCALE]
    u = np.empty(size)
    zx = inp[IN_ZX] if euler and barrier else np.empty(size)
    tv = np.zeros((N_TV, n_e))
    tv[0, :] = 1.0
    n_c = n_e if digital else 1
    tim = np.zeros((2 * N_TV, n_c))
    ti, tm = tim[:N_TV], tim[N_TV:]
    # the digital's sums of the step quantities (a barrier's Greeks do not read them)
    n_d = size if digital else 1
    int_var = np.zeros(n_d)
    mart = np.zeros(n_d)
    adj_sum = np.zeros(n_d)
    # log-price tangents (rows: v0, kappa, theta, sigma, rho, scale) and this step's
    # rho and scale increments
    tx = np.zeros((N_D - 3, n_b))
    t_alive = np.zeros((n_b, N_D))
    t_rebate = np.zeros((n_b, N_D))
    alive_uu = np.zeros(n_b)
    rebate_uu = np.zeros(n_b)
    # the paths whose bridge moves this step, and its numbers
    near = np.empty(n_b, dtype=np.int64)
    b_d0 = np.empty(n_b)
    b_d1 = np.empty(n_b)
    b_e = np.empty(n_b)
    b_keep = np.empty(n_b)
    b_base = np.empty(n_b)
    b_int = np.empty(n_b)
    b_root = np.empty(n_b)
    b_sroot = np.empty(n_b)
    # the last step's start and quantities
    last_alive = np.zeros(n_b)
    last_rebate = np.zeros(n_b)
    last_x = np.zeros(n_b)
    last_drift = np.zeros(n_b)
    last_int = np.zeros(n_b)
    last_mart = np.zeros(n_b)
    n_l = n_b if euler else 1
    last_ti = np.zeros((N_TV, n_l))
    last_tm = np.zeros((N_TV, n_l))
    # the first step: its score Z_0 / s_0 and survival k0 with its u-derivatives
    score = np.zeros(n_b)
    k0 = np.ones(n_b)
    k0_total = np.zeros(n_b)  # d k0 / du, the whole path shifted
    k0_start = np.zeros(n_b)  # (d/du)_0 k0: through x_0 = u alone
    k0_cross = np.zeros(n_b)  # (d/du)_0 of d k0 / du
    dd_int = np.zeros(N_D)
    end_t = np.zeros(N_D - 3)
    # without a rebate the rebates' tangents stay +0.0 (each update adds 0 x a finite
    # number, a signed zero, to +0.0), and a knock-in's Greeks never read them (its
    # rebate is paid at expiry), so their updates are left out: the same bits
    paid = rebate != 0.0 and pay[P_KNOCK_IN] == 0.0
    # full truncation's barrier tangents form sqrt(f3(v)) again (the digital's read it)
    keep_root = not (barrier and full)
    for k in range(steps):
        c = consts[which[k]]
        dt, kappa, theta, sigma = c[0], c[1], c[2], c[3]
        carry = mu * dt
        d_end = disc[k + 1]
        t0, t1 = times[k], times[k + 1]
        final = k == steps - 1
        # the scheme's variance draws, then the log-price normal (as exotic_block)
        if kind == EULER:
            fill_normals(gen, z, size, anti)
        elif kind != EXACT:
            fill_normals(gen, z, size, anti)
            fill_uniforms(gen, u, size, anti)
        else:
            for i in range(size):
                u[i] = gen.noncentral_chisquare(c[6], v[i] * c[7])
        fill_normals(gen, zx, size, anti)
        n_near = 0
        for i in range(size):
            old = v[i]
            adj = 0.0
            root = 0.0
            if euler:
                out = fixed_variance(fmap[2], old)
                root = math.sqrt(out)
                root_z = root * z[i]
                new = (
                    fixed_variance(fmap[0], old)
                    + c[4] * (theta - fixed_variance(fmap[1], old))
                    + c[6] * root_z
                )
                d_int = out * dt
                d_mart = c[5] * root_z
                inp[IN_X, i] = old
                if keep_root:
                    inp[IN_ROOT, i] = root
            else:
                if kind == EXACT:
                    new = c[5] * u[i]
                else:
                    new, hot, q, m, one_b2 = qe_scalar(old, u[i], z[i], c)
                    if kind == QE_MARTINGALE:
                        adj = qe_martingale_shift(hot, q, m, one_b2, old, c)
                        if math.isnan(adj):
                            adj = 0.0
                d_int = 0.5 * dt * (old + new)
                d_mart = (new - old - kappa * theta * dt + kappa * d_int) / sigma
            v[i] = new
            start = x[i]
            end = start + carry + adj - 0.5 * d_int + rho * d_mart  # exotic_block's order
            s_root = math.sqrt(max(one_rho2 * d_int, 0.0))
            end += s_root * zx[i]
            x[i] = end
            if digital:
                int_var[i] += d_int
                mart[i] += d_mart
                adj_sum[i] += adj
            if not barrier:
                continue
            if final:  # the last step is integrated at the end: keep what it needs
                last_alive[i] = alive[i]
                last_rebate[i] = rebate_paid[i]
                last_x[i] = start
                last_drift[i] = carry + adj - 0.5 * d_int + rho * d_mart
                last_int[i] = d_int
                last_mart[i] = d_mart
                if euler:
                    _, b, m, _, _ = _coefficients(old, root, z[i], w, c)
                    for p in range(N_TV):
                        last_ti[p, i] = b * tv[p, i]
                        last_tm[p, i] = m * tv[p, i]
            elif euler:  # the increments follow in _barrier_tangents, a vector loop
                if not full:  # full truncation's are formed again in _barrier_tangents
                    inp[IN_SROOT, i] = s_root
                    inp[IN_DINT, i] = d_int
                if k == 0:
                    score[i] = zx[i] / s_root if s_root > 0.0 else 0.0
            else:
                noise = zx[i] / s_root if s_root > 0.0 else 0.0
                inp[IN_NOISE, i] = noise
                if k == 0:
                    score[i] = noise
                inc_rho[i] = d_mart - rho * d_int * noise
                inc_scale[i] = carry - 0.5 * d_int + 0.5 * rho * d_mart + 0.5 * s_root * zx[i]
                inc_scale[i] *= inv_t
            if not alive[i] > 0.0:
                continue
            # the bridge, by the price kernel's operations
            d1 = side * (end - log_b)
            d0 = side * (start - log_b)
            e = 0.0
            if d0 <= 0.0 or d1 <= 0.0:
                keep = 0.0
            elif 2.0 * d0 * d1 < _BRIDGE_CUT * d_int:
                e = math.exp(-2.0 * d0 * d1 / d_int)
                keep = 1.0 - e
            else:
                keep = 1.0
            if keep >= 1.0:  # nothing lost (keep is 1 exactly): alive and the rebates keep
                continue  # their bits without the stores
            base = alive[i]
            lost = base * (1.0 - keep)
            alive[i] -= lost
            if rebate != 0.0:  # else it adds +0.0 to +0.0
                rebate_paid[i] += rebate * lost * d_end
            if final:
                continue
            # kept in list order, not by path: the loop below then reads them in sequence
            h = n_near
            near[h] = i
            n_near += 1
            b_d0[h], b_d1[h], b_e[h], b_keep[h], b_base[h], b_int[h] = d0, d1, e, keep, base, d_int
            b_root[h], b_sroot[h] = root, s_root

        # the survival weight's tangents on the paths whose bridge moved (the log-price
        # and variance tangents still at the step's start)
        for h in range(n_near):
            i = near[h]
            d0, d1, e, keep, base, d_int = b_d0[h], b_d1[h], b_e[h], b_keep[h], b_base[h], b_int[h]
            for dn in range(N_D):
                dd_int[dn] = 0.0
            for p in range(N_D - 3):
                end_t[p] = tx[p, i]
            if euler:
                x_i, root_i, z_i = inp[IN_X, i], b_root[h], z[i]
                noise, step_rho, step_scale = _euler_increments(
                    d_int, root_i, z_i, zx[i], b_sroot[h], c[5], rho, carry, inv_t
                )
                if full:  # _coefficients at full truncation's weights, as _barrier_tangents
                    p_i = np.float64(x_i > 0.0)
                    g_i = 0.5 * p_i / max(root_i, _TINY_ROOT)
                    b = c[0] * p_i
                    m = c[5] * z_i * g_i
                else:
                    _, b, m, _, _ = _coefficients(x_i, root_i, z_i, w, c)
                slope = -0.5 * b + rho * m + 0.5 * one_rho2 * b * noise
                for p in range(N_TV):
                    end_t[p] += slope * tv[p, i]
                    dd_int[D_V0 + p] = b * tv[p, i]
            else:
                step_rho, step_scale = inc_rho[i], inc_scale[i]
            end_t[D_RHO - 3] += step_rho
            end_t[D_SCALE - 3] += step_scale
            dd_int[D_SCALE] = d_int * inv_t
            smooth = keep > 0.0
            a = 2.0 / d_int if smooth else 0.0
            keep_u = side * a * (d0 + d1) * e
            keep_uu = a * e * (2.0 - a * (d0 + d1) * (d0 + d1))
            if k == 0:
                k0[i] = keep
                k0_total[i] = keep_u
                k0_start[i] = side * a * d1 * e
                k0_cross[i] = a * e * (1.0 - a * d1 * (d0 + d1))
            lost = base * (1.0 - keep)
            alive_u = t_alive[i, D_U]
            if paid:
                lost_uu = alive_uu[i] * (1.0 - keep) - 2.0 * alive_u * keep_u - base * keep_uu
                rebate_uu[i] += rebate * lost_uu * d_end
            alive_uu[i] = alive_uu[i] * keep + 2.0 * alive_u * keep_u + base * keep_uu
            scale = 2.0 * e / d_int if smooth else 0.0
            ratio = d0 * d1 / d_int if smooth else 0.0
            for dn in range(N_D):
                dk = 0.0
                if smooth:
                    if dn == D_U:
                        dd0, dd1 = 1.0, 1.0
                    elif dn == D_R:
                        dd0, dd1 = t0, t1
                    elif dn == D_Q:
                        dd0, dd1 = -t0, -t1
                    else:
                        dd0, dd1 = tx[dn - 3, i], end_t[dn - 3]
                    dk = _keep_slope(scale, d0, d1, ratio, side * dd0, side * dd1, dd_int[dn])
                t_before = t_alive[i, dn]
                t_alive[i, dn] = t_before * keep + base * dk
                if not paid:
                    continue
                d_lost = t_before * (1.0 - keep) - base * dk
                # discount to the step's end, e^{-r t1}, t1 a fixed share of T
                d_disc = 0.0
                if dn == D_R:
                    d_disc = -t1 * d_end
                elif dn == D_SCALE:
                    d_disc = -rate * t1 * inv_t * d_end
                t_rebate[i, dn] += rebate * (d_lost * d_end + lost * d_disc)

        # advance the tangents to the step's end
        if barrier and not final:
            if euler:
                _barrier_tangents(size, inp, fmap, w, c, rho, one_rho2, carry, inv_t, tv, tx)
            else:
                _shift_x(size, inp, tx)
        elif digital and euler:
            if not full:
                _mart_step(size, inp, w, c, tv, tim)
            _tangents_i(size, inp, w, c, tv, tim)
    if digital and euler and full:
        _mart_tangents(size, v, v0, int_var, mart, consts[which[0]], maturity, tv, tim)

    sign, strike, cash = pay[P_SIGN], pay[P_STRIKE], pay[P_EXTRA]
    d_pay = pay[P_DISC]
    knock_in = pay[P_KNOCK_IN] != 0.0
    spot = market[M_SPOT]
    mk = _market_scalars(market)
    log_k = math.log(strike)
    last_dt = times[steps] - times[steps - 1]
    last_t = times[steps - 1]
    dy = np.zeros(N_D)
    # a knock-out without rebate: a path knocked out before the last step has Greeks 0
    zero_dead = barrier and not knock_in and rebate == 0.0
    bad = 0
    for i in range(size):
        if not (math.isfinite(x[i]) and math.isfinite(v[i])):
            bad += 1
    # each path (pair) is valued and added to the sums at once, as in
    # european_greeks_block
    sums = np.zeros(N_SUMS)
    squares = np.zeros(N_SUMS)
    rows = np.empty((2, N_Q))
    pair = np.empty(N_Q)
    half = size // 2
    used = half if anti else size
    for h in range(used):
        for r in range(2 if anti else 1):
            i = h + r * half
            if not (math.isfinite(x[i]) and math.isfinite(v[i])):
                for q in range(N_Q):
                    rows[r, q] = math.nan
                continue
            s_t = math.exp(x[i])
            if digital:
                log_fwd = x0 + market[M_CARRY] + adj_sum[i] + rho * mart[i]
                log_fwd -= 0.5 * rho * rho * int_var[i]
                root = math.sqrt(max(one_rho2 * int_var[i], 0.0))
                terms = _conditional_terms(True, sign, cash, log_fwd, log_k, strike, root, d_pay)
                _conditional_greeks(rows, r, terms, rho, int_var[i], mart[i], ti, tm, i, euler, mk)
                # the price: the payoff on the path, by exotic_block's operations
                rows[r, Q_PRICE] = d_pay * (cash if sign * (s_t - strike) > 0.0 else 0.0)
                continue
            # the price, by exotic_block's operations
            value = d_pay * max(sign * (s_t - strike), 0.0)
            if knock_in:
                value = value * (1.0 - alive[i]) + rebate * alive[i] * d_pay
            else:
                value = value * alive[i] + rebate_paid[i]
            rows[r, Q_PRICE] = value
            if zero_dead and last_alive[i] == 0.0 and _finite_state(
                i, euler, tx, t_alive, last_ti, last_tm, alive_uu, score, k0, k0_total,
                k0_start, k0_cross, last_int, last_mart,
            ):  # fmt: skip
                # knocked out before the last step, no rebate: _barrier_greeks would form
                # every Greek as sums of exact zeros times these finite numbers, so +-0.0
                # (a zero's sign never reaches the sums, which start at +0.0); with a
                # non-finite tangent it runs, and gives its NaN
                for q in range(1, N_Q):
                    rows[r, q] = 0.0
                continue
            _barrier_greeks(
                rows, r, i, knock_in, rebate, d_pay, sign, strike, side, log_b, one_rho2, rho,
                euler, spot, maturity, inv_t, rate, mu, last_dt, last_t, disc[1], market,
                last_alive[i], last_rebate[i], last_x[i], last_drift[i], last_int[i], last_mart[i],
                last_ti, last_tm, tx, t_alive, t_rebate, alive_uu[i], rebate_uu[i],
                score[i], k0[i], k0_total[i], k0_start[i], k0_cross[i], dy,
            )  # fmt: skip
        _add_value(rows, anti, pair, sums, squares)
    counts = np.zeros(2, dtype=np.int64)
    counts[0] = used
    counts[1] = bad
    return sums, squares, counts


@njit(cache=True, inline="always")
def _finite_state(
    i, euler, tx, t_alive, last_ti, last_tm, alive_uu, score, k0, k0_total, k0_start, k0_cross,
    last_int, last_mart,
):  # fmt: skip
    """Whether every number :func:`_barrier_greeks` reads of barrier path ``i`` is finite.

    Their sum is finite when they all are (an overflowing sum only says no,
    which sends the path to the full formulas: never a wrong answer).
    """
    total = alive_uu[i] + score[i] + k0[i] + k0_total[i] + k0_start[i] + k0_cross[i]
    total += last_int[i] + last_mart[i]
    for p in range(N_D - 3):
        total += tx[p, i]
    for dn in range(N_D):
        total += t_alive[i, dn]
    if euler:
        for p in range(N_TV):
            total += last_ti[p, i] + last_tm[p, i]
    return math.isfinite(total)


@njit(cache=True, error_model="numpy")
def _barrier_greeks(
    values, row, i, knock_in, rebate, d_pay, sign, strike, side, log_b, one_rho2, rho, euler,
    spot, maturity, inv_t, rate, mu, last_dt, last_t, d_first, market,
    w, reb, xp, drift, d_int, d_mart, last_ti, last_tm, tx, t_alive, t_rebate, w_uu, reb_uu,
    score, k0, k0_total, k0_start, k0_cross, dy,
):  # fmt: skip
    """Row ``row`` of ``values``: barrier path ``i``'s Greeks from its smoothed value.

    ``w``, ``reb`` are the survival weight and rebates before the last step,
    ``xp``, ``drift``, ``d_int``, ``d_mart`` the last step's start and
    quantities; the last step's closed form (:func:`_last_step`) is
    differentiated by central differences in its four inputs (a smooth
    function: their errors are far below the Monte Carlo error).
    """
    s = math.sqrt(max(one_rho2 * d_int, 0.0))
    d0 = side * (xp - log_b)
    reach = side * (xp + drift - log_b) - _FAR_DEVIATIONS * s  # the end's least plausible distance
    if w == 0.0 and not knock_in:
        f = fx = fxx = fd = fi = fo = (0.0, 0.0, 0.0)
    elif s > 0.0 and d0 > 0.0 and reach > 0.0 and 2.0 * d0 * reach > _FAR_EXP * d_int:
        # far from the barrier: the step is a vanilla's (Black), whole on the live side
        value, slope, curv, by_var = _last_step_far(xp + drift, s, sign, strike, math.log(strike))
        f = (value, 1.0, value)
        fx = fd = (slope, 0.0, slope)
        fxx = (curv, 0.0, curv)
        fi = (by_var * one_rho2, 0.0, by_var * one_rho2)
        fo = (by_var * d_int, 0.0, by_var * d_int)
    else:
        # the log and exp every _last_step of the stencil reads, formed once
        # the survival's integral is read only times the rebate (knock-out) or for a
        # knock-in: without either its terms are exact zeros times finite numbers, +-0.0
        need_keep = knock_in or rebate != 0.0
        args = (
            side, log_b, sign, strike, knock_in, math.log(strike) - log_b, math.exp(log_b),
            need_keep,
        )  # fmt: skip
        hx = _FD_SHARE * math.sqrt(max(one_rho2 * d_int, 0.0))
        if hx == 0.0:
            hx = _FD_SHARE * 1e-3
        hi = _FD_REL * d_int
        ho = _FD_REL * one_rho2
        f = _last_step(xp, drift, d_int, one_rho2, *args)
        up = _last_step(xp + hx, drift, d_int, one_rho2, *args)
        down = _last_step(xp - hx, drift, d_int, one_rho2, *args)
        d_up = _last_step(xp, drift + hx, d_int, one_rho2, *args)
        d_down = _last_step(xp, drift - hx, d_int, one_rho2, *args)
        o_up = _last_step(xp, drift, d_int, one_rho2 + ho, *args)
        o_down = _last_step(xp, drift, d_int, one_rho2 - ho, *args)
        if euler and hi > 0.0:
            i_up = _last_step(xp, drift, d_int + hi, one_rho2, *args)
            i_down = _last_step(xp, drift, d_int - hi, one_rho2, *args)
        else:
            i_up = i_down = f
            hi = 1.0
        fx = (
            (up[0] - down[0]) / (2 * hx),
            (up[1] - down[1]) / (2 * hx),
            (up[2] - down[2]) / (2 * hx),
        )
        fxx = (
            (up[0] - 2.0 * f[0] + down[0]) / (hx * hx),
            (up[1] - 2.0 * f[1] + down[1]) / (hx * hx),
            (up[2] - 2.0 * f[2] + down[2]) / (hx * hx),
        )
        fd = (
            (d_up[0] - d_down[0]) / (2 * hx),
            (d_up[1] - d_down[1]) / (2 * hx),
            (d_up[2] - d_down[2]) / (2 * hx),
        )
        fi = (
            (i_up[0] - i_down[0]) / (2 * hi),
            (i_up[1] - i_down[1]) / (2 * hi),
            (i_up[2] - i_down[2]) / (2 * hi),
        )
        fo = (
            (o_up[0] - o_down[0]) / (2 * ho),
            (o_up[1] - o_down[1]) / (2 * ho),
            (o_up[2] - o_down[2]) / (2 * ho),
        )
    pk, keep, plain = f
    inner = pk - rebate * keep  # knock-in: what the survival weight takes away
    for dn in range(N_D):
        d_xp = _node_tangent(dn, last_t, inv_t, tx, i)
        d_drift = 0.0
        d_i = 0.0
        d_o = 0.0
        d_dpay = 0.0
        if dn == D_R:
            d_drift = last_dt
            d_dpay = -maturity * d_pay
        elif dn == D_Q:
            d_drift = -last_dt
        elif dn == D_RHO:
            d_drift = d_mart
            d_o = -2.0 * rho
        elif dn == D_SCALE:
            d_i = d_int * inv_t
            d_drift = (mu * last_dt - 0.5 * d_int + 0.5 * rho * d_mart) * inv_t
            d_dpay = -rate * d_pay
        elif dn >= D_V0 and euler:
            p = dn - D_V0
            d_i = last_ti[p, i]
            d_drift = rho * last_tm[p, i] - 0.5 * d_i
        d_pk = fx[0] * d_xp + fd[0] * d_drift + fi[0] * d_i + fo[0] * d_o
        d_keep = fx[1] * d_xp + fd[1] * d_drift + fi[1] * d_i + fo[1] * d_o
        d_plain = fx[2] * d_xp + fd[2] * d_drift + fi[2] * d_i + fo[2] * d_o
        t_w = t_alive[i, dn]
        if knock_in:
            d_inner = d_pk - rebate * d_keep
            dy[dn] = d_dpay * (plain - w * inner) + d_pay * (d_plain - t_w * inner - w * d_inner)
        else:
            dy[dn] = (
                t_w * d_pay * (pk + rebate * (1.0 - keep))
                + w * d_dpay * (pk + rebate * (1.0 - keep))
                + w * d_pay * (d_pk - rebate * d_keep)
                + t_rebate[i, dn]
            )
    w_u = t_alive[i, D_U]
    if knock_in:
        inner_x, inner_xx = fx[0] - rebate * fx[1], fxx[0] - rebate * fxx[1]
        second = d_pay * (fxx[2] - (w_uu * inner + 2.0 * w_u * inner_x + w * inner_xx))
        smooth_y = d_pay * (plain - w * inner)
        big_a, big_a_u = d_pay * plain, d_pay * fx[2]
    else:
        kept, kept_x, kept_xx = (
            pk + rebate * (1.0 - keep),
            fx[0] - rebate * fx[1],
            fxx[0] - rebate * fxx[1],
        )
        second = d_pay * (w_uu * kept + 2.0 * w_u * kept_x + w * kept_xx) + reb_uu
        smooth_y = d_pay * w * kept + reb
        big_a, big_a_u = rebate * d_first, 0.0
    g = dy[D_U]
    values[row, Q_DELTA] = g / spot
    values[row, Q_GAMMA] = (second - g) / (spot * spot)
    # the likelihood-ratio estimators: Y = A + k0 B with A and B free of x_0 = u
    if score != 0.0 and k0 > _LEAST_K0:
        big_b = (smooth_y - big_a) / k0
        big_b_u = (g - big_a_u - k0_total * big_b) / k0
        first_lr = smooth_y * score + k0_start * big_b
        second_lr = g * score + k0_cross * big_b + k0_start * big_b_u
    elif score != 0.0:
        first_lr = smooth_y * score
        second_lr = g * score
    else:  # no noise on the first step (or a single step): the pathwise estimators
        first_lr = g
        second_lr = second
    values[row, Q_DELTA_LR] = first_lr / spot
    values[row, Q_GAMMA_LR] = (second_lr - g) / (spot * spot)
    values[row, Q_RHO_RATE] = dy[D_R]
    values[row, Q_RHO_DIV] = dy[D_Q]
    values[row, Q_V0] = dy[D_V0]
    values[row, Q_KAPPA] = dy[D_KAPPA]
    values[row, Q_THETA_PARAM] = dy[D_THETA]
    values[row, Q_SIGMA] = dy[D_SIGMA]
    values[row, Q_RHO] = dy[D_RHO]
    d_mat = market[M_KAPPA] * inv_t * dy[D_KAPPA] + 0.5 * market[M_SIGMA] * inv_t * dy[D_SIGMA]
    values[row, Q_THETA] = -(d_mat + dy[D_SCALE])
    values[row, Q_VEGA] = market[M_VEGA_V0] * dy[D_V0] + market[M_VEGA_THETA] * dy[D_THETA]
