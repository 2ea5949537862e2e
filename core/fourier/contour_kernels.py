"""Compiled kernels of the contour route: Lewis's single integral on a shifted, turned contour.

One call prices the strikes of one maturity (:func:`contour_cells`, or
:func:`contour_strip` with a contour per strike): the moment strip (Andersen &
Piterbarg 2007), the damping ``alpha`` (Lord & Kahl 2007), the contour's turn
(Andersen & Lake 2018), the sinh-sinh double-exponential trapezoid with step
halving and its error estimate.  The formulas and the references are in
:func:`rootvar.core.fourier.contour.contour_prices`; this module holds the
arithmetic only.  The characteristic function is that of
:mod:`rootvar.core.fourier.cos_kernels` (the same principal square root and
logarithm, the same operations) without the drift: the route works with the
martingale part ``ln(S_T / F)``.  Every kernel is compiled with ``cache=True``
through :func:`rootvar.core.runtime.njit` and the two entries release the GIL.
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from rootvar.core.fourier.cos_kernels import principal_log, principal_sqrt
from rootvar.core.runtime import njit

__all__ = [
    "CERTIFIED",
    "CFG",
    "HEAD_COLS",
    "N_SLOTS",
    "ROWS",
    "SLOT_FIELDS",
    "STRIP_ROWS",
    "contour_cells",
    "contour_integral",
    "contour_strip",
    "explosion_time",
    "finish_price",
    "log_cf",
    "maturity_scales",
    "moment_edge",
    "pick_contour",
    "table_integral",
]

#: Rows of the kernel's output.
ROWS = 6

#: Status codes returned per strike; the reasons are in ``rootvar.core.fourier.contour.REASONS``.
CERTIFIED = 0
NO_STRIP = 1
NON_FINITE = 2
NOT_CONVERGED = 3
NO_DECAY = 4
ROUNDING = 5
BRANCH = 6

#: Largest |moment order| searched for the strip: past it the strip is treated as
#: ending there (alpha stays inside, so nothing is lost but choice).
MOMENT_CAP = 4096.0
#: Bisections of the strip's end after doubling brackets it: 2^-30 of the bracket,
#: ample, since the end only bounds the alpha search and the singularity distance.
EDGE_STEPS = 30
#: Golden-section steps per piece of the alpha search (bracket 0.618^n of its log-width).
GOLDEN_STEPS = 12
#: Share of each piece (pole to strip end) the alpha search may use, from the pole:
#: past the middle the strip's end, not the pole, is the nearest singularity and
#: the trapezoid needs ever finer steps.
EDGE_SHARE = 0.5
#: Least distance from the contour to a singularity before alpha is moved to -1/2:
#: found necessary where a strip of width 1e-5 put alpha against a pole and two
#: contours disagreed by 1e-10 x spot beyond their estimates.
DELTA_MIN = 0.05
#: Width (in moment order) below which the out-of-the-money piece gives way to a
#: wider other piece.
NARROW = 1.0
#: First DE step, the fewest halvings before certifying (h = 1/16: at 1/8 a
#: wide sweep found a price whose two coarse levels agreed better than either
#: was right), and the most halvings.
H0 = 0.5
MIN_LEVEL = 3
MAX_LEVEL = 7
#: Largest DE abscissa: v / s = sinh(pi/2 sinh 3.6), about 1.5e12.
T_CAP = 3.6

_HALF_PI = 0.5 * math.pi
_GOLD = 0.5 * (math.sqrt(5.0) - 1.0)
_EPS = 2.220446049250313e-16


@njit(cache=True, inline="always")
def log_cf(u, t, kappa, theta, sigma, rho, v0):
    """``log E[exp(i u x)]``, ``x = ln(S_T / F)``, Albrecher et al. (2007) form."""
    sig2 = sigma * sigma
    xi = kappa - rho * sigma * 1j * u
    d = principal_sqrt(xi * xi + sig2 * (u * u + 1j * u))
    xi_minus_d = xi - d
    g = xi_minus_d / (xi + d)
    e = cmath.exp(complex(max(-(d.real * t), -700.0), -(d.imag * t)))
    one_minus_ge = 1.0 - g * e
    c = kappa * theta / sig2 * (xi_minus_d * t - 2.0 * principal_log(one_minus_ge / (1.0 - g)))
    dpart = xi_minus_d / sig2 * (1.0 - e) / one_minus_ge
    return c + v0 * dpart


# --- the moment strip ---
@njit(cache=True, inline="always")
def explosion_time(w, kappa, sigma, rho):
    """Time at which ``E[(S_T / F)^w]`` becomes infinite (inf if never).

    Andersen & Piterbarg (2007), Prop. 3.1, written with ``b = kappa - rho sigma w``
    and ``D = b^2 - sigma^2 w (w - 1)``: no explosion for ``0 <= w <= 1`` or
    ``D >= 0, b > 0``; ``ln((|b| + sqrt D) / (|b| - sqrt D)) / sqrt D`` for
    ``D >= 0, b < 0``; ``2 (pi - arg(b + i sqrt(-D))) / sqrt(-D)`` for ``D < 0``.
    These are the zeros of ``1 - g e^{-dT}`` in the characteristic function.
    """
    if 0.0 <= w <= 1.0:
        return math.inf
    b = kappa - rho * sigma * w
    dd = b * b - sigma * sigma * w * (w - 1.0)
    if dd >= 0.0:
        if b >= 0.0:
            return math.inf
        sd = math.sqrt(dd)
        # log1p form: no cancellation when sqrt(D) << |b|
        return math.log1p(2.0 * sd / (-b - sd)) / sd if sd > 0.0 else 2.0 / (-b)
    gam = math.sqrt(-dd)
    return 2.0 * (math.pi - math.atan2(gam, b)) / gam


@njit(cache=True)
def moment_edge(sign, t, kappa, sigma, rho):
    """The end of the strip ``{w : E[(S_T/F)^w] < inf}`` on the side ``sign``.

    ``sign = +1``: the upper end ``w_+ > 1``; ``-1``: the lower end ``w_- < 0``.
    Doubling to bracket, then ``EDGE_STEPS`` bisections; returns the last order known
    finite (so the strip returned is inside the true one), at most
    ``MOMENT_CAP`` from its base.
    """
    base = 1.0 if sign > 0 else 0.0
    step = 1.0
    lo = base
    hi = base + sign * step
    while explosion_time(hi, kappa, sigma, rho) > t:
        lo = hi
        step *= 2.0
        if step > MOMENT_CAP:
            return lo
        hi = base + sign * step
    for _ in range(EDGE_STEPS):
        mid = 0.5 * (lo + hi)
        if explosion_time(mid, kappa, sigma, rho) > t:
            lo = mid
        else:
            hi = mid
    return lo


# --- the damping alpha (Lord & Kahl 2007) ---
@njit(cache=True, inline="always")
def log_bound(alpha, k, t, kappa, theta, sigma, rho, v0):
    """``ln |integrand at v = 0|`` = ``-alpha k + ln M(alpha + 1) - ln |alpha (alpha + 1)|``.

    Also a bound on the integrand's modulus over the whole line:
    ``|psi(v - i w)| <= M(w)``, ``|z| >= |alpha|``, ``|z - i| >= |alpha + 1|``.
    Returns inf where the moment is not a finite positive number (a wrong branch
    or overflow would show here first).
    """
    w = alpha + 1.0
    lm = log_cf(complex(0.0, -w), t, kappa, theta, sigma, rho, v0)
    if not (math.isfinite(lm.real) and math.isfinite(lm.imag)):
        return math.inf
    if abs(math.sin(lm.imag)) > 1e-9 or math.cos(lm.imag) < 0.0:
        return math.inf
    return -alpha * k + lm.real - math.log(abs(alpha * w))


@njit(cache=True)
def golden_log(sign, base, lo, hi, k, t, kappa, theta, sigma, rho, v0):
    """Minimise ``log_bound`` over ``alpha = base + sign e^y``, ``y`` in ``[lo, hi]``.

    ``log_bound`` is convex in alpha on each piece between the poles and the
    strip's ends (``ln M`` is convex, ``-ln|alpha (alpha + 1)|`` too), hence
    unimodal in ``y``.  Returns ``(alpha, value)``.
    """
    a, b = lo, hi
    x1 = b - _GOLD * (b - a)
    x2 = a + _GOLD * (b - a)
    f1 = log_bound(base + sign * math.exp(x1), k, t, kappa, theta, sigma, rho, v0)
    f2 = log_bound(base + sign * math.exp(x2), k, t, kappa, theta, sigma, rho, v0)
    for _ in range(GOLDEN_STEPS):
        if f1 <= f2:
            b, x2, f2 = x2, x1, f1
            x1 = b - _GOLD * (b - a)
            f1 = log_bound(base + sign * math.exp(x1), k, t, kappa, theta, sigma, rho, v0)
        else:
            a, x1, f1 = x1, x2, f2
            x2 = a + _GOLD * (b - a)
            f2 = log_bound(base + sign * math.exp(x2), k, t, kappa, theta, sigma, rho, v0)
    if f1 <= f2:
        return base + sign * math.exp(x1), f1
    return base + sign * math.exp(x2), f2


# --- the integral ---
@njit(cache=True, inline="always")
def _node(tau, s, alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0):
    """``Re G dv/dtau``, ``|G| dv/dtau`` and a bound on the rounding in ``G dv/dtau``
    at ``v = s sinh(pi/2 sinh tau)``.

    ``G(v) = g(z(v)) z'(v)``, ``g(z) = e^{-izk} psi(z - i) / (-z (z - i))`` on the
    contour ``z(v) = -i alpha + v + i tilt (sqrt(v^2 + bend^2) - bend)``.  The
    rounding bound is ``eps`` times the size of the terms that cancel in the
    exponent: ``kappa theta / sigma^2`` times ``(xi - d) T`` (``xi`` and ``d``
    nearly equal when ``sigma |u| << kappa``) and the logarithm, ``v0 / sigma^2``
    times ``xi - d``, and ``z k``; small vol_of_vol makes it grow as ``1/sigma^2``.
    """
    inner = _HALF_PI * math.sinh(tau)
    v = s * math.sinh(inner)
    jac = s * math.cosh(inner) * _HALF_PI * math.cosh(tau)
    root = math.sqrt(v * v + bend * bend)
    # sqrt(v^2 + c^2) - c without cancellation at small v
    lift = tilt * (v * v / (root + bend))
    z = complex(v, lift - alpha)
    u = complex(v, lift - alpha - 1.0)  # z - i
    dz = complex(1.0, tilt * v / root)
    zk = -1j * z * k
    lg = log_cf(u, t, kappa, theta, sigma, rho, v0) + zk
    g = cmath.exp(lg) / (-(z * u)) * dz
    m = abs(g) * jac
    # |re| + |im| >= |.|: bounds without the square roots
    xi = kappa - rho * sigma * 1j * u
    xi_size = abs(xi.real) + abs(xi.imag)
    cancel = (kappa * theta * (t * xi_size + 2.0) + v0 * xi_size) / (sigma * sigma)
    size = abs(zk.real) + abs(zk.imag) + abs(lg.real) + abs(lg.imag)
    rel = _EPS * (8.0 + 4.0 * cancel + size)
    return g.real * jac, m, m * rel


@njit(cache=True)
def contour_integral(alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0, s, tol):
    """``Re int_0^inf G(v) dv`` by the sinh-sinh DE trapezoid, halving the step.

    The integrand is even in ``v`` (``G(-v) = conj G(v)``), so the trapezoid on
    the whole line under ``v = s sinh(pi/2 sinh tau)`` folds onto ``tau >= 0``
    with the ``tau = 0`` node halved.  Level 0 (step ``H0``) walks out until a
    node's weighted modulus is below ``tol / 100`` and falling; each further
    level adds the odd nodes of half the step up to that end.  At level ``l``
    the estimate is ``|T_l - T_{l-1}|``, plus ``|T_{l-1} - T_{l-2}|`` unless the
    differences fell at least fourfold (the double-exponential regime, where
    the error of ``T_l`` is about the square of that of ``T_{l-1}``, not yet
    visible), plus the tail (the last level-0 node's weighted modulus) and the
    rounding bound summed over the nodes.  Certified at level
    ``l >= MIN_LEVEL`` when the estimate is at most ``tol``.
    Returns ``(value, estimate, nodes, status)``.
    """
    f0, m0, r0 = _node(0.0, s, alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0)
    nodes = 1
    if not (math.isfinite(f0) and math.isfinite(m0)):
        return math.nan, math.inf, nodes, NON_FINITE
    total = 0.5 * f0
    round_total = 0.5 * r0
    prev_m = m0
    j_hi = 0
    small = 0.01 * tol
    while True:
        j_hi += 1
        tau = j_hi * H0
        if tau > T_CAP:
            return math.nan, math.inf, nodes, NO_DECAY
        f, m, r = _node(tau, s, alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0)
        nodes += 1
        if not (math.isfinite(f) and math.isfinite(m)):
            return math.nan, math.inf, nodes, NON_FINITE
        total += f
        round_total += r
        if m * H0 <= small and m <= prev_m:
            break
        prev_m = m
    tail = m * H0
    t_end = j_hi * H0
    h = H0
    last = h * total
    last_diff = math.inf
    est = math.inf
    rounding = 0.0
    value = last
    for level in range(1, MAX_LEVEL + 1):
        h *= 0.5
        count = round(t_end / h)
        for i in range(1, count, 2):
            f, m, r = _node(i * h, s, alpha, tilt, bend, k, t, kappa, theta, sigma, rho, v0)
            if not (math.isfinite(f) and math.isfinite(m)):
                return math.nan, math.inf, nodes + 1, NON_FINITE
            total += f
            round_total += r
        nodes += count // 2
        value = h * total
        rounding = h * round_total
        diff = abs(value - last)
        est = diff + tail + rounding
        if diff > 0.25 * last_diff:  # convergence not yet visible
            est += last_diff
        if level >= MIN_LEVEL and est <= tol:
            return value, est, nodes, CERTIFIED
        last = value
        last_diff = diff
    status = ROUNDING if rounding > tol else NOT_CONVERGED
    return value, est, nodes, status


# --- the contour for one log-strike ---
@njit(cache=True, inline="always")
def _end(ends, sign, t, kappa, sigma, rho):
    """The strip's end on the side ``sign``, from ``ends`` (``w_-, w_+``, NaN
    until needed: a price on one side needs one end) or computed into it."""
    i = 0 if sign < 0 else 1
    if math.isnan(ends[i]):
        ends[i] = moment_edge(sign, t, kappa, sigma, rho)
    return ends[i]


@njit(cache=True)
def pick_contour(k, side, ends, t, kappa, theta, sigma, rho, v0, freq, big_c, damp, max_tilt):
    """The damping, angle and DE scale of the contour for log-strike ``k``.

    Lord & Kahl's alpha on the out-of-the-money side's piece (or the other,
    wider one when that piece is narrower than ``NARROW``; or the piece ``side``
    forces), kept ``DELTA_MIN`` off every singularity (else Lewis's -1/2), and
    Andersen & Lake's angle.  ``ends`` holds the strip's ends ``w_-, w_+``,
    NaN until one is needed (then computed into it: the same number whenever
    it is computed).
    Returns ``(alpha, evals, code, phi, s)``; ``code`` is ``CERTIFIED`` (0)
    when there is a contour, else ``BRANCH`` or ``NO_STRIP``.
    """
    y_lo = math.log(1e-6)
    # the out-of-the-money side's piece first: there the integral is the
    # out-of-the-money price itself, with no residue to cancel against
    call_side = k >= 0.0 if side == 0 else side > 0
    if side == 0:
        # unless that piece is narrow (alpha would sit near a singularity
        # and the trapezoid need fine steps) and the other is wider: seen
        # at 10 years in Andersen's case I, where w_- = -0.23
        if call_side:
            width = _end(ends, 1, t, kappa, sigma, rho) - 1.0
        else:
            width = -_end(ends, -1, t, kappa, sigma, rho)
        if width < NARROW:
            if call_side:
                other = -_end(ends, -1, t, kappa, sigma, rho)
            else:
                other = _end(ends, 1, t, kappa, sigma, rho) - 1.0
            if other > width:
                call_side = not call_side
    evals = 0
    best_a, best_f = -0.5, math.inf
    for attempt in range(2):
        use_call = call_side if attempt == 0 else not call_side
        if use_call:
            w_hi = _end(ends, 1, t, kappa, sigma, rho)
            hi = math.log((w_hi - 1.0) * EDGE_SHARE) if w_hi > 1.0 else -math.inf
        else:
            w_lo = _end(ends, -1, t, kappa, sigma, rho)
            hi = math.log((-w_lo) * EDGE_SHARE) if w_lo < 0.0 else -math.inf
        if hi > y_lo:
            if use_call:
                a, f = golden_log(1.0, 0.0, y_lo, hi, k, t, kappa, theta, sigma, rho, v0)
            else:
                a, f = golden_log(-1.0, -1.0, y_lo, hi, k, t, kappa, theta, sigma, rho, v0)
            evals += GOLDEN_STEPS + 2
            if f < best_f:
                best_a, best_f = a, f
        if math.isfinite(best_f) or side != 0:
            break
    if not math.isfinite(best_f):  # Lewis's line alpha = -1/2 is always inside the strip
        f = log_bound(-0.5, k, t, kappa, theta, sigma, rho, v0)
        evals += 1
        if f < best_f:
            best_a, best_f = -0.5, f
    if not math.isfinite(best_f):
        return best_a, evals, BRANCH, 0.0, 0.0
    # distance from the real axis to the nearest singularity of the integrand:
    # the poles at Im v = alpha, alpha + 1 and the strip's ends
    delta = 0.0
    for _ in range(2):
        wa = best_a + 1.0
        delta = min(abs(best_a), abs(wa))
        if best_a > -1.0:
            delta = min(delta, _end(ends, 1, t, kappa, sigma, rho) - wa)
        if best_a < 0.0:
            delta = min(delta, wa - _end(ends, -1, t, kappa, sigma, rho))
        if delta >= DELTA_MIN or best_a == -0.5:
            break
        # a strip so narrow that alpha sits against a pole: Lewis's line
        # alpha = -1/2, at least 1/2 from every singularity (the strip
        # always holds 0 <= w <= 1), at the price of the forward as residue
        f = log_bound(-0.5, k, t, kappa, theta, sigma, rho, v0)
        evals += 1
        if not math.isfinite(f):
            break
        best_a, best_f = -0.5, f
    if not delta > 0.0:
        return best_a, evals, NO_STRIP, 0.0, 0.0
    s = min(freq, delta)
    # Andersen & Lake (2018): turn the contour's far ends so that the
    # asymptotic oscillation e^{-i u (C rho + k)} becomes decay
    phi = -math.atan2(big_c * rho + k, damp)
    phi = min(max(phi, -max_tilt), max_tilt)
    return best_a, evals, CERTIFIED, phi, s


@njit(cache=True, inline="always")
def _cell_of(k, width, big_c, rho, damp):
    """Cell id of log-strike ``k``: ``16 j + 8 + i`` for ``k`` in ``[j w, (j + 1) w)``
    and the asymptotic angle ``theta = atan2(C rho + k, D)`` in ``[i, i + 1) BAND``."""
    j = math.floor(k / width)
    i = math.floor(math.atan2(big_c * rho + k, damp) / BAND)
    i = min(max(i, -N_BANDS // 2), N_BANDS // 2 - 1)
    return 16.0 * j + 8.0 + i


@njit(cache=True, inline="always")
def _cell_bounds(cell, width, big_c, rho, damp):
    """``(k_lo, k_hi, theta_lo, theta_hi)`` of a cell id (the inverse of ``_cell_of``)."""
    j = math.floor(cell / 16.0)
    i = int(cell - 16.0 * j) - 8
    k_lo, k_hi = j * width, (j + 1) * width
    if i > -N_BANDS // 2:
        k_lo = max(k_lo, damp * math.tan(i * BAND) - big_c * rho)
    if i < N_BANDS // 2 - 1:
        k_hi = min(k_hi, damp * math.tan((i + 1) * BAND) - big_c * rho)
    th_lo = math.atan2(big_c * rho + k_lo, damp)
    th_hi = math.atan2(big_c * rho + k_hi, damp)
    return k_lo, k_hi, th_lo, th_hi


@njit(cache=True, inline="always")
def finish_price(value, alpha, k, put, scale):
    """Price from the integral: the residues crossed (Lord & Kahl 2007, eq. 3.6) and the clip."""
    ek = math.exp(k)  # K / F
    if alpha > 0.0:
        call = value / math.pi
    elif alpha > -1.0:
        call = 1.0 + value / math.pi
    else:
        call = 1.0 - ek + value / math.pi
    undiscounted = call - 1.0 + ek if put else call
    lower = max(ek - 1.0, 0.0) if put else max(1.0 - ek, 0.0)
    upper = ek if put else 1.0
    return scale * min(max(undiscounted, lower), upper)


@njit(cache=True, inline="always")
def maturity_scales(t, kappa, theta, sigma, rho, v0):
    """``(var, freq, big_c, damp, bend)`` of one maturity (see ``contour_strip``)."""
    # expected integrated variance: sets the frequency scale of the DE map
    kt = kappa * t
    var = theta * t + (v0 - theta) * (-math.expm1(-kt)) / kappa
    freq = 1.0 / math.sqrt(max(var, 1e-12))
    # large-|u| slope of ln psi(u): -u C (sqrt(1 - rho^2) + i rho), C = (v0 + kappa theta T) / sigma
    big_c = (v0 + kappa * theta * t) / sigma
    damp = big_c * math.sqrt(max(1.0 - rho * rho, 0.0))
    # where ln psi turns from its Gaussian start -var u^2 / 2 to that slope:
    # the contour stays flat up to there (turning a Gaussian by phi leaves it
    # only cos(2 phi) of its decay: none at pi/4)
    bend = max(freq, 2.0 * big_c / max(var, 1e-12))
    return var, freq, big_c, damp, bend


@njit(cache=True, nogil=True)
def contour_strip(model, spot, strike, t, rate, div_yield, put, tol_x_spot, max_tilt, side, out):
    """Prices of one maturity's strikes by the contour route, a contour per strike.

    ``model`` is ``(kappa, theta, vol_of_vol, rho, v0)``; ``put`` selects puts;
    ``max_tilt`` caps the contour's angle (radians, 0 keeps the line straight);
    ``side`` forces the piece of the alpha search (+1 calls' alpha > 0, -1
    puts' alpha < -1, 0 the out-of-the-money side first): a second, different
    contour for tests.
    Fills ``out`` (``ROWS x (n + 1)`` floats, preallocated by the caller:
    handing six arrays back to Python costs more than pricing a strike) with
    the rows ``price`` (NaN where not certified), ``alpha``, ``angle``,
    ``nodes`` (characteristic-function evaluations, the alpha search
    included), ``error`` (the estimate, in price units) and ``status``; the
    last column holds the strip's ends ``w_-, w_+`` in its first two rows.
    """
    kappa, theta, sigma, rho, v0 = model[0], model[1], model[2], model[3], model[4]
    n = strike.size
    price, alpha_out, angle_out = out[0], out[1], out[2]
    nodes_out, error, status = out[3], out[4], out[5]
    for r in range(out.shape[0]):
        out[r, n] = math.nan
    for m in range(n):
        price[m] = math.nan
        alpha_out[m] = math.nan
        angle_out[m] = 0.0
        error[m] = math.inf
    forward = spot * math.exp((rate - div_yield) * t)
    scale = math.exp(-rate * t) * forward  # price = scale * (undiscounted price / F)
    tol_int = math.pi * tol_x_spot * spot / scale
    _, freq, big_c, damp, bend = maturity_scales(t, kappa, theta, sigma, rho, v0)
    ends = np.full(2, math.nan)
    for m in range(n):
        k = math.log(strike[m] / forward)
        a, evals, code, phi, s = pick_contour(
            k, side, ends, t, kappa, theta, sigma, rho, v0, freq, big_c, damp, max_tilt
        )
        alpha_out[m] = a
        if code != CERTIFIED:
            nodes_out[m] = evals
            status[m] = code
            continue
        angle_out[m] = phi
        value, est, used, code = contour_integral(
            a, math.tan(phi), bend, k, t, kappa, theta, sigma, rho, v0, s, tol_int
        )
        nodes_out[m] = evals + used
        status[m] = code
        error[m] = scale * est / math.pi
        if code == CERTIFIED:
            price[m] = finish_price(value, a, k, put, scale)
    out[0, n] = ends[0]
    out[1, n] = ends[1]


# --- the strip mode: strikes of a maturity share the contour's nodes ---
#
# Log-strikes k = ln(K / F) are binned in canonical cells: [j w, (j + 1) w)
# (w = max(CELL_MIN, CELL_SD sd(ln S_T)), so k = 0 is a boundary and a cell
# holds one side), crossed with bands of the asymptotic angle theta =
# atan2(C rho + k, D).  A cell's contour has ``pick_contour``'s alpha for the
# middle of its k-range and the angle -(middle of its theta range), capped;
# all strikes in the cell integrate on it, and
# share its characteristic-function values, which live in a table over the
# finest DE grid (tau = i H0 / 2^MAX_LEVEL) and are computed when a strike
# first needs them.  A strike's integrand there is the stored value times
# e^{-izk}: one real exp and one sincos per node.  Each strike keeps its own
# level-0 end, level sequence and error estimate (the same rules as
# ``contour_integral``); the cells only decide the contour.  Since the cells
# and the node values depend only on (params, T, side, tilt cap), a price does
# not depend on which strikes were priced before: the table can be cached.

#: Rows of the strip kernel's output: ROWS, then ``route`` (0: the cell's
#: shared contour, 1: the strike's own contour after the cell's failed).
STRIP_ROWS = ROWS + 1
#: The table's slots per cell, packed by level: level 0 holds tau = j H0
#: (j = 0 .. 7, up to T_CAP), level l >= 1 its odd multiples q of H0 / 2^l,
#: at LEVEL_OFFSET[l] + q // 2.  The coarse levels, which most strikes are
#: certified at, come first, so a table touches little memory.
_J_MAX = int(T_CAP / H0)
N_SLOTS = _J_MAX + 1 + _J_MAX * ((1 << MAX_LEVEL) - 1)


def _de_map():
    """Per slot (packed as above): ``sinh(pi/2 sinh tau)``, ``cosh(pi/2 sinh tau)`` and
    ``cosh tau``, the double-exponential map's factors without ``s``, from the same
    library functions as the kernels (so the nodes have the bits ``_node`` gives)."""
    taus = [j * H0 for j in range(_J_MAX + 1)]
    h = H0
    for level in range(1, MAX_LEVEL + 1):
        h *= 0.5
        taus += [q * h for q in range(1, _J_MAX << level, 2)]
    inner = [_HALF_PI * math.sinh(tau) for tau in taus]
    return (
        np.array([math.sinh(x) for x in inner]),
        np.array([math.cosh(x) for x in inner]),
        np.array([math.cosh(tau) for tau in taus]),
    )


#: The DE map's factors per slot: the 4 hyperbolic functions of a node are
#: looked up, not taken (a fifth of a fresh price's time).
DE_SINH, DE_COSH, TAU_COSH = _de_map()
#: Per slot: Re, Im ln psi(z - i); Re, Im z; Re, Im of z' dv/dtau / (-z (z - i));
#: |that|; the rounding weight 8 + 4 x cancel (see ``_node``).
SLOT_FIELDS = 8
#: Columns of a cell's row in the head table: j, alpha, tilt, s, phi, code, evals.
HEAD_COLS = 8
#: Cell width in log-strike: CELL_SD standard deviations of ln(S_T / F), at
#: least CELL_MIN.
CELL_MIN = 0.5
CELL_SD = 0.5
#: Angular bands of the asymptotic angle theta = atan2(C rho + k, D): a cell's
#: members' theta lie within one BAND, so on the cell's angle -(theta_lo +
#: theta_hi) / 2 their ratio of oscillation to decay, tan(phi + theta), stays
#: within tan(BAND / 2) of what their own angle would give (at most 1 where
#: the tilt cap binds, as on a per-strike contour).
N_BANDS = 4
BAND = math.pi / N_BANDS
#: Config vector: kappa, theta, sigma, rho, v0, spot, t, rate, div, put, tol, max_tilt, side.
CFG = 13


@njit(cache=True, inline="always")
def _slot(tab, done, c, i, alpha, tilt, bend, s, t, kappa, theta, sigma, rho, v0):
    """Fill slot ``i`` of cell ``c`` unless done; returns 1 if filled now."""
    if done[c, i]:
        return 0
    v = s * DE_SINH[i]
    jac = s * DE_COSH[i] * _HALF_PI * TAU_COSH[i]
    root = math.sqrt(v * v + bend * bend)
    lift = tilt * (v * v / (root + bend))
    z = complex(v, lift - alpha)
    u = complex(v, lift - alpha - 1.0)  # z - i
    dz = complex(1.0, tilt * v / root)
    lc = log_cf(u, t, kappa, theta, sigma, rho, v0)
    w = dz * jac / (-(z * u))
    xi = kappa - rho * sigma * 1j * u
    xi_size = abs(xi.real) + abs(xi.imag)
    cancel = (kappa * theta * (t * xi_size + 2.0) + v0 * xi_size) / (sigma * sigma)
    row = tab[c, i]
    row[0] = lc.real
    row[1] = lc.imag
    row[2] = z.real
    row[3] = z.imag
    row[4] = w.real
    row[5] = w.imag
    row[6] = abs(w)
    row[7] = 8.0 + 4.0 * cancel
    done[c, i] = 1
    return 1


@njit(cache=True, inline="always")
def _strike_node(tab, c, i, k):
    """``Re G dv/dtau``, ``|G| dv/dtau`` and its rounding bound, log-strike ``k``, a filled slot."""
    row = tab[c, i]
    zr, zi = row[2] * k, row[3] * k
    # -i z k = (Im z) k - i (Re z) k
    lr = row[0] + zi
    li = row[1] - zr
    e = math.exp(lr)
    m = e * row[6]
    f = e * (math.cos(li) * row[4] - math.sin(li) * row[5])
    rel = _EPS * (row[7] + abs(zi) + abs(zr) + abs(lr) + abs(li))
    return f, m, m * rel


@njit(cache=True)
def table_integral(
    tab, done, c, alpha, tilt, bend, s, k, t, kappa, theta, sigma, rho, v0, tol, fills
):
    """``contour_integral`` for log-strike ``k`` on cell ``c``'s contour, from its node table.

    The same levels, end rule, estimate and certification; missing slots are
    filled on the way (``fills[0]`` counts them).  Returns
    ``(value, estimate, nodes, status)``.
    """
    fills[0] += _slot(tab, done, c, 0, alpha, tilt, bend, s, t, kappa, theta, sigma, rho, v0)
    f0, m0, r0 = _strike_node(tab, c, 0, k)
    nodes = 1
    if not (math.isfinite(f0) and math.isfinite(m0)):
        return math.nan, math.inf, nodes, NON_FINITE
    total = 0.5 * f0
    round_total = 0.5 * r0
    prev_m = m0
    j_hi = 0
    small = 0.01 * tol
    m = m0
    while True:
        j_hi += 1
        if j_hi * H0 > T_CAP:
            return math.nan, math.inf, nodes, NO_DECAY
        i = j_hi
        fills[0] += _slot(tab, done, c, i, alpha, tilt, bend, s, t, kappa, theta, sigma, rho, v0)
        f, m, r = _strike_node(tab, c, i, k)
        nodes += 1
        if not (math.isfinite(f) and math.isfinite(m)):
            return math.nan, math.inf, nodes, NON_FINITE
        total += f
        round_total += r
        if m * H0 <= small and m <= prev_m:
            break
        prev_m = m
    tail = m * H0
    h = H0
    offset = _J_MAX + 1
    last = h * total
    last_diff = math.inf
    est = math.inf
    rounding = 0.0
    value = last
    for level in range(1, MAX_LEVEL + 1):
        h *= 0.5
        count = j_hi << level  # t_end / h
        for q in range(1, count, 2):
            i = offset + (q >> 1)
            fills[0] += _slot(
                tab, done, c, i, alpha, tilt, bend, s, t, kappa, theta, sigma, rho, v0
            )
            f, m, r = _strike_node(tab, c, i, k)
            if not (math.isfinite(f) and math.isfinite(m)):
                return math.nan, math.inf, nodes + 1, NON_FINITE
            total += f
            round_total += r
        nodes += count // 2
        value = h * total
        rounding = h * round_total
        diff = abs(value - last)
        est = diff + tail + rounding
        if diff > 0.25 * last_diff:  # convergence not yet visible
            est += last_diff
        if level >= MIN_LEVEL and est <= tol:
            return value, est, nodes, CERTIFIED
        last = value
        last_diff = diff
        offset += _J_MAX << (level - 1)
    status = ROUNDING if rounding > tol else NOT_CONVERGED
    return value, est, nodes, status


@njit(cache=True, nogil=True)
def contour_cells(cfg, strike, head, tab, done, out):
    """Prices of one maturity's strikes, strikes of a cell sharing its contour's nodes.

    ``cfg`` holds ``CFG`` numbers (see above); ``head`` is ``(n_cells + 1) x
    HEAD_COLS``: row 0 the maturity's ``w_-, w_+``, cell width and a filled
    flag, then one row per cell in use (``j`` NaN = free); ``tab``
    (``n_cells x N_SLOTS x SLOT_FIELDS``) and ``done`` (``n_cells x N_SLOTS``)
    the node tables.  All four persist between calls (the caller's cache) and
    are only ever added to.  Fills ``out`` (``STRIP_ROWS x (n + 1)``) as
    ``contour_strip`` does, plus the route row; the last column holds ``w_-,
    w_+``, the characteristic-function evaluations of this call and the cells
    that found no free row.  If that last count is not 0 nothing was priced:
    the caller grows the tables and calls again.
    A strike that fails on its cell's contour is priced on its own contour
    (``pick_contour`` at its own ``k``, ``contour_integral``), as in
    ``contour_strip``; its status is then that contour's.
    """
    kappa, theta, sigma, rho, v0 = cfg[0], cfg[1], cfg[2], cfg[3], cfg[4]
    spot, t, rate, div_yield = cfg[5], cfg[6], cfg[7], cfg[8]
    put = cfg[9] != 0.0
    tol_x_spot, max_tilt, side = cfg[10], cfg[11], int(cfg[12])
    n = strike.size
    n_cells = head.shape[0] - 1
    price, alpha_out, angle_out = out[0], out[1], out[2]
    nodes_out, error, status, route = out[3], out[4], out[5], out[6]
    for r in range(STRIP_ROWS):
        out[r, n] = math.nan
    var, freq, big_c, damp, bend = maturity_scales(t, kappa, theta, sigma, rho, v0)
    evals = 0
    if head[0, 3] != 1.0:  # a new (or reused) table: no cell, no node yet
        done[:, :] = 0
        head[1:, 0] = math.nan
        head[0, 0] = math.nan  # the strip's ends, computed when a contour needs them
        head[0, 1] = math.nan
        head[0, 2] = max(CELL_MIN, CELL_SD * math.sqrt(max(var, 0.0)))
        head[0, 3] = 1.0
    ends = head[0, 0:2]
    width = head[0, 2]
    forward = spot * math.exp((rate - div_yield) * t)
    scale = math.exp(-rate * t) * forward
    tol_int = math.pi * tol_x_spot * spot / scale
    # pass 1: each strike's cell (route row holds the cell's row for now)
    missing = 0
    last_j, last_c, last_missing = math.nan, -1, math.nan
    for m in range(n):
        k = math.log(strike[m] / forward)
        j = _cell_of(k, width, big_c, rho, damp)
        if j == last_j:
            route[m] = last_c
            continue
        c = -1
        free = -1
        for q in range(n_cells):
            hj = head[q + 1, 0]
            if hj == j:
                c = q
                break
            if free < 0 and math.isnan(hj):
                free = q
        if c < 0:
            if free < 0:
                if j != last_missing:
                    missing += 1
                    last_missing = j
                route[m] = -1
                continue
            c = free
            # the contour of the cell's middle; its angle that of the middle
            # of the cell's band of theta
            k_lo, k_hi, th_lo, th_hi = _cell_bounds(j, width, big_c, rho, damp)
            a, ev, code, phi, s = pick_contour(
                0.5 * (k_lo + k_hi), side, ends, t, kappa, theta, sigma, rho, v0,
                freq, big_c, damp, max_tilt,
            )  # fmt: skip
            phi = min(max(-0.5 * (th_lo + th_hi), -max_tilt), max_tilt)
            hr = head[c + 1]
            hr[0], hr[1], hr[2], hr[3], hr[4], hr[5], hr[6] = j, a, math.tan(phi), s, phi, code, ev
            evals += ev
        route[m] = c
        last_j, last_c = j, c
    out[3, n] = missing
    if missing > 0:
        out[2, n] = evals
        return
    fills = np.zeros(1, np.int64)
    for m in range(n):
        k = math.log(strike[m] / forward)
        c = int(route[m])
        hr = head[c + 1]
        a, tilt, s, phi, code = hr[1], hr[2], hr[3], hr[4], int(hr[5])
        price[m] = math.nan
        error[m] = math.inf
        alpha_out[m] = a
        angle_out[m] = phi
        used = 0
        route[m] = 0.0
        if code == CERTIFIED:
            value, est, used, code = table_integral(
                tab, done, c, a, tilt, bend, s, k, t, kappa, theta, sigma, rho, v0, tol_int, fills
            )
        if code != CERTIFIED:
            # the strike's own contour, as contour_strip would price it
            route[m] = 1.0
            a, ev, code, phi, s = pick_contour(
                k, side, ends, t, kappa, theta, sigma, rho, v0, freq, big_c, damp, max_tilt
            )
            alpha_out[m] = a
            angle_out[m] = phi if code == CERTIFIED else 0.0
            evals += ev
            if code == CERTIFIED:
                value, est, own, code = contour_integral(
                    a, math.tan(phi), bend, k, t, kappa, theta, sigma, rho, v0, s, tol_int
                )
                used += own
                evals += own
            else:
                est = math.inf
            used += ev
        nodes_out[m] = used
        status[m] = code
        error[m] = scale * est / math.pi
        if code == CERTIFIED:
            price[m] = finish_price(value, a, k, put, scale)
    out[0, n] = ends[0]
    out[1, n] = ends[1]
    out[2, n] = evals + fills[0]
