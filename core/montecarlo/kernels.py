"""Compiled Monte Carlo kernels: one block of paths through every step, and its payoff sums.

A block is :data:`rootvar.core.montecarlo.european.BLOCK` paths with its own numpy
``Generator``; the kernels call that generator from compiled code (numba
runs numpy's own sampling algorithms on the generator's bit stream, so a
block draws exactly the numbers the vectorised numpy engine drew, in the
same order).  Blocks of one call run on numba's threads; each writes only
its own row of the outputs, so neither the thread count nor the number of
blocks per call changes a bit of the result.

The arithmetic of every step follows :mod:`rootvar.core.montecarlo.schemes`
operation by operation, in the same order, so that paths match the plain
numpy reference kept in the tests to the last bit where the elementary
functions are the same (``sqrt`` is correctly rounded everywhere; ``log``
and ``exp`` may differ in the last bit between numpy and the C library).
"""

from __future__ import annotations

import math

import numpy as np

from rootvar.core.runtime import njit, numba

__all__ = ["block_paths", "price_block", "qe_martingale_shift", "qe_scalar"]

prange = numba.prange

# scheme kinds (the ``kind`` field of ``mc_schemes.SchemeInfo``)
EULER, QE, QE_MARTINGALE, EXACT = 0, 1, 2, 3
# the f1, f2, f3 maps of the Euler schemes (Lord et al. 2010, Table 1)
SAME, POS, ABS = 0, 1, 2
#: Largest double numpy's ``Generator.random`` returns, 1 - 2^-53.
LAST_UNIFORM = 1.0 - 2.0**-53
_SQRTH = 0.7071067811865476  # 1 / sqrt(2)


@njit(cache=True, inline="always")
def fixed_variance(code, x):
    """The variance a scheme's step reads: ``max(x, 0)``, ``|x|`` or ``x`` itself, by ``code``."""
    if code == POS:
        return max(x, 0.0)
    if code == ABS:
        return abs(x)
    return x


@njit(cache=True)
def fill_normals(gen, out, size, anti):
    """One block's normals; with ``anti`` the second half mirrors the first."""
    half = (size + 1) // 2 if anti else size
    for i in range(half):
        out[i] = gen.standard_normal()
    for i in range(size - half):
        out[half + i] = -out[i]


@njit(cache=True)
def fill_uniforms(gen, out, size, anti):
    """One block's uniforms in [0, 1); the mirror ``k 2^-53 -> (2^53 - 1 - k) 2^-53`` is exact."""
    half = (size + 1) // 2 if anti else size
    for i in range(half):
        out[i] = gen.random()
    for i in range(size - half):
        out[half + i] = LAST_UNIFORM - out[i]


@njit(cache=True, inline="always")
def qe_scalar(x, ui, zi, c):
    """One QE step of one path from variance ``x`` (Andersen 2008, eqs. 17-29, ``r = 2 / psi``).

    Returns ``(new, hot, q, m, one_b2)``: the next variance, whether the
    exponential branch was taken, and the branch quantities the martingale
    correction reads (:func:`qe_martingale_shift`).
    """
    e, m_const, half_c1, half_c2, r_c = c[4], c[5], c[6], c[7], c[8]
    m = x * e + m_const
    q = x * half_c1 + half_c2
    r = m * m / q  # r = 2 / psi
    hot = r < r_c
    # quadratic branch with psi clipped at psi_c (its 1 + b^2 also
    # enters the martingale correction on every path)
    b2 = max(r, r_c)
    rm1 = b2 - 1.0
    b2 = math.sqrt(b2 * rm1) + rm1  # b^2
    one_b2 = b2 + 1.0
    if hot:  # exponential branch
        q = 1.0 / r + 0.5
        new = max(-math.log((1.0 - ui) * q), 0.0) * q * m
    else:
        w = math.sqrt(b2) + zi
        new = w * w * m / one_b2
    return new, hot, q, m, one_b2


@njit(cache=True, inline="always")
def qe_martingale_shift(hot, q, m, one_b2, x, c):
    """``K0* - K0`` of one path-step (Andersen 2008, eqs. 36-37), NaN where ``K0*`` does not exist.

    ``hot, q, m, one_b2`` come from :func:`qe_scalar` on the same step, ``x``
    is the variance at the step's start.
    """
    k0, big_a, k13 = c[9], c[10], c[11]
    ok = False
    k0_star = 0.0
    if hot:
        pz, beta = 1.0 - 1.0 / q, 1.0 / (q * m)
        if beta > big_a:
            k0_star = -math.log(pz + beta * (1.0 - pz) / (beta - big_a))
            ok = True
    else:
        a = m / one_b2
        one = 1.0 - 2.0 * big_a * a
        if one > 0.0:
            k0_star = -big_a * (one_b2 - 1.0) * a / one + 0.5 * math.log(one)
            ok = True
    k0_star -= k13 * x
    if ok and math.isfinite(k0_star):
        return k0_star - k0
    return math.nan


# numpy's error model: a division by zero gives inf instead of raising, so
# divisions carry no check and the loop vectorises (no divisor here is ever 0)
@njit(cache=True, nogil=True, error_model="numpy")
def _qe_step(v, z, u, c, mean, ratio, index, out):
    """One QE step of every path (Andersen 2008, eqs. 17-29, ``r = 2 / psi``) into ``out``.

    The same operations, in the same order, as the QE branch of the general
    step loop, but in two passes: every path first takes the quadratic
    branch, a loop of products, divisions and square roots with no branch
    and no call, which the compiler turns into vector instructions; then the
    paths with ``r < r_c`` (few, except near zero variance) are overwritten
    with the exponential branch, which needs a ``log``.  ``mean``, ``ratio``
    and ``index`` are scratch arrays of the paths' size.  Each path's result
    has the same bits as when it is computed alone.
    """
    e, m_const, half_c1, half_c2, r_c = c[4], c[5], c[6], c[7], c[8]
    for i in range(v.size):
        x = v[i]
        m = x * e + m_const
        q = x * half_c1 + half_c2
        r = m * m / q
        b2 = max(r, r_c)
        rm1 = b2 - 1.0
        b2 = math.sqrt(b2 * rm1) + rm1  # b^2
        w = math.sqrt(b2) + z[i]
        out[i] = w * w * m / (b2 + 1.0)
        mean[i] = m
        ratio[i] = r
    # the exponential branch's paths listed without a branch (a branch here
    # lets the compiler take the log of every path), then overwritten
    hot = 0
    for i in range(v.size):
        index[hot] = i
        hot += ratio[i] < r_c
    for h in range(hot):
        i = index[h]
        q = 1.0 / ratio[i] + 0.5
        out[i] = max(-math.log((1.0 - u[i]) * q), 0.0) * q * mean[i]


@njit(cache=True, nogil=True)
def block_paths(gen, size, anti, kind, fmap, c, v0, steps):
    """Every step of one block of paths.

    Parameters
    ----------
    gen : numpy.random.Generator
        The block's own stream.
    size : int
        Paths in the block.
    anti : bool
        Mirror the draws within the block (not the chi-square draws).
    kind : int
        ``EULER``, ``QE``, ``QE_MARTINGALE`` or ``EXACT``.
    fmap : int64 array of 3
        Euler ``f1, f2, f3`` codes (``SAME``, ``POS``, ``ABS``).
    c : float64 array
        The scheme's constants (see ``mc_schemes.kernel_constants``).
    v0 : float
        Initial variance.
    steps : int
        Time steps.

    Returns
    -------
    v, int_var, mart, adj : ndarray
        Final variance, integrated variance ``I``, martingale part ``M`` and
        martingale correction ``A`` per path.
    touched : int
        Paths whose variance was at or below zero after some step.
    negatives : int
        Euler updates negative before the fix.
    adj_failed : int
        Path-steps where the QE martingale correction does not exist.
    """
    v = np.full(size, v0)
    int_var = np.zeros(size)  # Euler: running I; trapezoid schemes: sum of v_1 .. v_n
    mart = np.zeros(size)
    adj = np.zeros(size)
    hit = np.zeros(size, dtype=np.bool_)
    z = np.empty(size)
    u = np.empty(size)
    mean = np.empty(size)  # QE scratch: m, r = 2 / psi and the next variance per path
    ratio = np.empty(size)
    new_v = np.empty(size)
    index = np.empty(size, dtype=np.int64)
    negatives = 0
    adj_failed = 0
    dt, kappa, theta, sigma = c[0], c[1], c[2], c[3]
    for _ in range(steps):
        if kind == EULER:
            kdt, sq_dt, sq = c[4], c[5], c[6]
            f1, f2, f3 = fmap[0], fmap[1], fmap[2]
            fill_normals(gen, z, size, anti)
            for i in range(size):
                x = v[i]
                out = fixed_variance(f3, x)
                root_z = math.sqrt(out) * z[i]
                new = fixed_variance(f1, x) + kdt * (theta - fixed_variance(f2, x)) + sq * root_z
                negatives += new < 0.0
                hit[i] |= new <= 0.0
                int_var[i] += out * dt
                mart[i] += sq_dt * root_z
                v[i] = new
        elif kind == EXACT:
            cc = c[5]
            df, scale = c[6], c[7]  # scale = e^{-kappa dt} / c
            for i in range(size):
                new = cc * gen.noncentral_chisquare(df, v[i] * scale)
                hit[i] |= new <= 0.0
                int_var[i] += new
                v[i] = new
        elif kind == QE:
            fill_normals(gen, z, size, anti)
            fill_uniforms(gen, u, size, anti)
            _qe_step(v, z, u, c, mean, ratio, index, new_v)
            for i in range(size):
                new = new_v[i]
                hit[i] |= new <= 0.0
                int_var[i] += new
                v[i] = new
        else:
            fill_normals(gen, z, size, anti)
            fill_uniforms(gen, u, size, anti)
            for i in range(size):
                x = v[i]
                new, hot, q, m, one_b2 = qe_scalar(x, u[i], z[i], c)
                hit[i] |= new <= 0.0
                if kind == QE_MARTINGALE:
                    shift = qe_martingale_shift(hot, q, m, one_b2, x, c)
                    if math.isnan(shift):  # left uncorrected, and counted
                        adj_failed += 1
                    else:
                        adj[i] += shift
                int_var[i] += new
                v[i] = new
    if kind != EULER:
        # trapezoid I and the Broadie-Kaya identity for M (see mc_schemes)
        drift = kappa * theta * dt * steps
        for i in range(size):
            s = dt * (int_var[i] + 0.5 * (v0 - v[i]))
            int_var[i] = s
            mart[i] = (v[i] - v0 - drift + kappa * s) / sigma
    return v, int_var, mart, adj, hit.sum(), negatives, adj_failed


@njit(cache=True, inline="always")
def _ndtr(a):
    """Standard normal cdf, in the form of the Cephes library that scipy.special.ndtr uses."""
    x = a * _SQRTH
    z = abs(x)
    if z < _SQRTH:
        return 0.5 + 0.5 * math.erf(x)
    y = 0.5 * math.erfc(z)
    return 1.0 - y if x > 0.0 else y


#: The kernels' normal cdf, for other kernels that follow their arithmetic (the Greeks').
normal_cdf = _ndtr


@njit(cache=True, nogil=True)
def price_block(gen, size, anti, kind, fmap, c, v0, steps, market, rho, strikes, conditional):
    """Payoff sums of one block of paths; runs without the GIL.

    ``market`` holds ``(ln spot, (rate - div) T, sign, discount factor)``
    with sign +1 for calls and -1 for puts.  Returns the sums and sums of
    squares per strike (of pair averages with ``anti``) and the counts
    ``(values summed, touched paths, negative updates, failed corrections)``.
    """
    n_k = strikes.size
    sums = np.zeros(n_k)
    squares = np.zeros(n_k)
    counts = np.zeros(4, dtype=np.int64)
    log_spot, carry, sign, disc = market[0], market[1], market[2], market[3]
    log_k = np.log(strikes)
    _, int_var, mart, adj, touched, negatives, failed = block_paths(
        gen, size, anti, kind, fmap, c, v0, steps
    )
    z = np.zeros(size)
    if not conditional:
        fill_normals(gen, z, size, anti)
    values = np.empty((size, n_k))
    for i in range(size):
        if not (math.isfinite(int_var[i]) and math.isfinite(mart[i])):
            # a diverged path (an Euler variance blown up by a step far too coarse
            # for the mean reversion) poisons the sums: the caller reports it
            for k in range(n_k):
                values[i, k] = math.nan
            continue
        root = math.sqrt(max((1.0 - rho * rho) * int_var[i], 0.0))
        if conditional:
            # Black-Scholes given the variance path (Willard 1997)
            log_fwd = log_spot + carry + adj[i] + rho * mart[i] - 0.5 * rho * rho * int_var[i]
            fwd = math.exp(log_fwd)
            for k in range(n_k):
                if root > 0.0:
                    d1 = (log_fwd - log_k[k]) / root + 0.5 * root
                    d2 = d1 - root
                    pay = sign * (fwd * _ndtr(sign * d1) - strikes[k] * _ndtr(sign * d2))
                else:
                    pay = max(sign * (fwd - strikes[k]), 0.0)
                values[i, k] = disc * pay
        else:
            log_s = log_spot + carry + adj[i] - 0.5 * int_var[i] + rho * mart[i] + root * z[i]
            s_t = math.exp(log_s)
            for k in range(n_k):
                values[i, k] = disc * max(sign * (s_t - strikes[k]), 0.0)
    half = size // 2
    used = half if anti else size
    for i in range(used):
        for k in range(n_k):
            x = 0.5 * (values[i, k] + values[half + i, k]) if anti else values[i, k]
            sums[k] += x
            squares[k] += x * x
    counts[0] = used
    counts[1] = touched
    counts[2] = negatives
    counts[3] = failed
    return sums, squares, counts
