"""Monte Carlo prices of European options under Heston, in bounded memory.

Seeding scheme (what makes results depend only on inputs and seed):
paths are cut into fixed blocks of :data:`BLOCK` paths; block ``j`` draws
every random number it ever uses from its own generator
``numpy.random.Generator(SFC64(SeedSequence(seed).spawn(n_blocks)[j]))``, in
a fixed order (each step's variance draws, the same kinds on every step,
then the terminal log-price normal).  Each block runs through every step in
compiled code (:mod:`rootvar.core.montecarlo.kernels`) that releases the GIL, on
``numba.get_num_threads()`` threads (set it with ``numba.set_num_threads``
or ``NUMBA_NUM_THREADS``); chunks only decide how many blocks are in flight
at once, and block sums are added in block order, so neither the chunk size
nor the number of threads changes a single bit of the result.  Plain
threads rather than numba's parallel loops: numba's OpenMP layer cannot
survive the ``fork`` of a process pool (the daily control uses one), and
its work-queue layer aborts when two threads launch kernels at once.  SFC64 is numpy's fastest bit
generator here (normal draws dominate the cost of a step) and passes the
same statistical test batteries as the default PCG64.
"""

from __future__ import annotations

import functools
import time
from dataclasses import dataclass, field

import numpy as np

from rootvar.core.brief_repr import BriefRepr
from rootvar.core.montecarlo.kernels import POS, price_block
from rootvar.core.montecarlo.schemes import SCHEMES, kernel_constants
from rootvar.core.params import HestonParams, as_params
from rootvar.core.runtime import notice_if_cold, thread_pool
from rootvar.core.validation import InputError, as_float_array, as_positive_int, check_choice
from rootvar.core.variance.euler import euler_negative_probability

__all__ = ["BLOCK", "DEFAULT_SEED", "MCResult", "expected_negative_step_fraction", "mc_price"]

#: Paths per random-number block (the unit of reproducibility).
BLOCK = 4096
#: Seed used when none is given.
DEFAULT_SEED = 20240601
#: Two-sided 95% normal quantile for the confidence interval.
Z95 = 1.959963984540054


@dataclass(frozen=True, repr=False)
class MCResult(BriefRepr):
    """A Monte Carlo price with its statistics.

    Arrays have one entry per strike; scalars when one strike was given.
    """

    price: np.ndarray | float
    std_error: np.ndarray | float
    ci_low: np.ndarray | float
    ci_high: np.ndarray | float
    strike: np.ndarray | float
    kind: str
    maturity: float
    scheme: str
    steps: int
    paths: int
    seed: int
    antithetic: bool
    conditional: bool
    elapsed_s: float
    negative_step_fraction: float
    zero_touch_fraction: float
    expected_negative_step_fraction: float
    martingale_correction_failures: int = 0
    notes: tuple = field(default_factory=tuple)


def coarse_step_notes(kappa: float, dt: float) -> tuple:
    """A caution when the largest step is long against the mean reversion (``kappa dt > 1``).

    The variance then forgets its start within one step, so the trapezoid
    integrated variance and the log-price step built on it carry a
    discretisation bias that the standard error does not show (Andersen
    2008, sec. 4, studies steps with ``kappa dt`` up to about 1).
    """
    if kappa * dt <= 1.0:
        return ()
    return (
        f"kappa x dt = {kappa * dt:.3g} > 1: the step is long against the mean reversion, so "
        "expect a discretisation bias the standard error does not show; refine the step or "
        "check against a second price",
    )


class SchemeDivergenceError(InputError):
    """The scheme cannot run at this step: its simulated variance blows up."""


def diverged_error(scheme: str, kappa: float, dt: float) -> SchemeDivergenceError:
    """The error for paths whose simulated variance blew up (never a number built on them)."""
    return SchemeDivergenceError(
        f"steps too coarse for scheme {scheme!r}: the simulated variance diverged on some paths "
        f"(kappa x dt = {kappa * dt:.3g}); use more steps or the scheme 'qe'"
    )


def check_stable(scheme: str, kappa: float, dt: float) -> None:
    """Refuse an Euler scheme whose drift step is unstable (``kappa dt >= 2``).

    The drift of the fixes whose ``f2`` keeps negative values (partial
    truncation: ``f2(v) = v``; reflection: ``f2(v) = |v|``) multiplies the
    variance by ``1 - kappa dt`` each step, which grows without bound once
    ``kappa dt >= 2`` (explicit Euler on ``dv = kappa (theta - v) dt``;
    common practice, no source).  Such a run would return a price of paths
    whose variance ran to about ``(kappa dt - 1)^steps``: refused instead.
    Absorption and full truncation (``f2 = max(v, 0)``) stay bounded.
    """
    info = SCHEMES[scheme]
    if info.euler and info.fmap[1] != POS and kappa * dt >= 2.0:
        raise SchemeDivergenceError(
            f"steps too coarse for scheme {scheme!r}: kappa x dt = {kappa * dt:.3g} >= 2 makes "
            "its Euler step unstable (the variance grows by |1 - kappa dt| a step); use more "
            "steps, full truncation or the scheme 'qe'"
        )


def block_seed(root, j):
    """``root.spawn(n)[j]`` for any ``n > j``, without making the other children."""
    return np.random.SeedSequence(
        root.entropy, spawn_key=(*root.spawn_key, j), pool_size=root.pool_size
    )


def _probability_nodes(nodes: int = 64):
    """Nodes and weights for ``int_0^1 g(u) du`` that resolve the lower tail.

    Gauss-Legendre in ``ln u`` on ``[1e-12, 0.02]`` (the one-step probability
    lives at small variances, i.e. small u, when it is rare) plus
    Gauss-Legendre in ``u`` on ``[0.02, 1]``; the mass below 1e-12 is left out.
    """
    x, w = np.polynomial.legendre.leggauss(nodes)
    lo, mid = np.log(1e-12), np.log(0.02)
    s = 0.5 * (x + 1) * (mid - lo) + lo
    u_low, w_low = np.exp(s), 0.5 * (mid - lo) * w * np.exp(s)
    u_high, w_high = 0.5 * (x + 1) * (1 - 0.02) + 0.02, 0.5 * (1 - 0.02) * w
    return np.concatenate([u_low, u_high]), np.concatenate([w_low, w_high])


@functools.lru_cache(maxsize=128)  # step studies ask again for the same grids
def expected_negative_step_fraction(
    params: HestonParams, maturity: float, steps: int, times: int = 33
) -> float:
    """Analytic expectation of the Euler negative-step share on a grid.

    The one-step probability :func:`euler_negative_probability` at step
    ``dt = maturity / steps`` averaged over the exact law of the variance at
    each grid time ``t_j = j dt``, ``j = 0 .. steps - 1``, then over the grid.

    Notes
    -----
    ``E[p(v_t)] = int_0^1 p(F_t^{-1}(u)) du`` by Gauss-Legendre nodes that
    resolve small ``u`` (see ``_probability_nodes``); the average over grid
    times uses the trapezoid rule on at most ``times`` of them (it varies
    smoothly in time), and ``t = 0`` is the exact ``p(v0)``.

    It describes an Euler chain whose variance follows the exact law.  When
    Feller holds the observed share matches it; when Feller fails the Euler
    chain's own law near zero (on the scale ``vol_of_vol^2 dt`` where the
    probability lives) stays different at every step size, and so does the
    share: measured about 10% lower for absorption and reflection, and about
    twice as high for the truncation schemes, whose negative states persist.
    """
    # scipy.stats (behind the exact law) costs a third of a second to import, and
    # only Euler schemes need this: import it here, not with the module
    from rootvar.core.variance.cir_law import cir_transition

    p = params
    dt = maturity / steps
    grid = dt * np.arange(steps)
    sample = grid if steps <= times else np.linspace(grid[0], grid[-1], times)
    u, w = _probability_nodes()
    values = np.empty(sample.size)
    later = sample > 0
    values[~later] = euler_negative_probability(p.v0, p.kappa, p.theta, p.vol_of_vol, dt)
    if later.any():
        # every grid time's quantiles in one call (one row per time): freezing a
        # scipy law per time cost more than the quantiles themselves
        law = cir_transition(p.v0, p.kappa, p.theta, p.vol_of_vol, sample[later][:, None])
        v = law.ppf(u[None, :])
        values[later] = euler_negative_probability(v, p.kappa, p.theta, p.vol_of_vol, dt) @ w
    if sample.size == steps:
        return float(values.mean())
    return float(np.trapezoid(values, sample) / (sample[-1] - sample[0]))


def mc_price(
    params: HestonParams,
    spot,
    strike,
    maturity,
    rate=0.0,
    div_yield=0.0,
    kind: str = "call",
    scheme: str = "qe",
    steps: int = 64,
    paths: int = 100_000,
    seed: int = DEFAULT_SEED,
    antithetic: bool = False,
    conditional: bool = False,
    chunk_paths: int = 16 * BLOCK,
) -> MCResult:
    """Monte Carlo price of European calls or puts under Heston.

    Parameters
    ----------
    params : HestonParams
    spot : float
        Spot price, > 0.
    strike : float or array_like
        One strike or a strip, all priced on the same paths.
    maturity : float
        Years, > 0.
    rate, div_yield : float
        Continuous decimals.
    kind : {"call", "put"}
    scheme : str
        A key of :data:`rootvar.core.montecarlo.schemes.SCHEMES`: ``"euler_absorb"``,
        ``"euler_reflect"``, ``"euler_partial"``, ``"euler_full"``, ``"qe"``,
        ``"qe_martingale"``, ``"exact_variance"``.
    steps : int
        Time steps over the whole maturity (``dt = maturity / steps``).
    paths : int
        Number of paths (with ``antithetic``, pairs count as two paths).
    seed : int
        Seed of the numpy ``SeedSequence`` (see the module docstring).
    antithetic : bool
        Mirror every normal draw within each block (variance draws of
        ``exact_variance`` cannot be mirrored; only its log-price normal is).
        The standard error is then taken over pair averages.
    conditional : bool
        Price by Black-Scholes given the variance path instead of drawing
        the log-price (Willard 1997): removes the log-price noise, keeps the
        variance-discretisation bias.
    chunk_paths : int
        Paths handed to the threads in one call (a multiple of
        :data:`BLOCK` is used); bounds memory and never changes the result.

    Returns
    -------
    MCResult

    Notes
    -----
    Each step moves the log-price by
    ``(r - q) dt + adj - dI/2 + rho dM + sqrt((1 - rho^2) dI) Z`` with ``dI``
    and ``dM`` from the scheme (see :mod:`rootvar.core.montecarlo.schemes`); since
    the ``Z`` are independent of the variance, their sum is drawn once at
    maturity as ``sqrt((1 - rho^2) I) Z``, which has the same law.

    References
    ----------
    Andersen, L. (2008). Simple and efficient simulation of the Heston
    stochastic volatility model. J. Computational Finance 11(3), 1-42.
    Broadie, M. & Kaya, Ö. (2006). Exact simulation of stochastic volatility
    and other affine jump diffusion processes. Operations Research 54(2).
    Lord, R., Koekkoek, R. & van Dijk, D. (2010). Quantitative Finance 10(2).
    Willard, G. A. (1997). Calculating prices and sensitivities for
    path-independent derivative securities in multifactor models. Journal of
    Derivatives 5(1), 45-61.
    Romano, M. & Touzi, N. (1997). Contingent claims and market completeness
    in a stochastic volatility model. Mathematical Finance 7(4), 399-412.
    """
    as_params(params)
    check_choice("kind", kind, ("call", "put"))
    check_choice("scheme", scheme, tuple(SCHEMES))
    steps = as_positive_int("steps", steps)
    paths = as_positive_int("paths", paths)
    chunk_paths = as_positive_int("chunk_paths", chunk_paths)
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(f"seed must be a whole number >= 0, got {seed!r}")
    spot = float(as_float_array("spot", spot, ">0"))
    maturity = float(as_float_array("maturity", maturity, ">0"))
    rate = float(as_float_array("rate", rate))
    div_yield = float(as_float_array("div_yield", div_yield))
    strike_in = as_float_array("strike", strike, ">0")
    if strike_in.ndim > 1:
        raise InputError(f"strike must be a number or a 1-d strip, got shape {strike_in.shape}")
    strikes = np.atleast_1d(strike_in)
    if antithetic and paths % 2:
        raise InputError(f"paths must be even with antithetic=True, got {paths}")

    strikes = np.ascontiguousarray(strikes)  # one compiled signature
    notice_if_cold(price_block)
    started = time.perf_counter()
    p, info = params, SCHEMES[scheme]
    dt = maturity / steps
    check_stable(scheme, p.kappa, dt)
    consts = kernel_constants(info, p, dt)
    fmap = np.array(info.fmap, dtype=np.int64)
    n_blocks = -(-paths // BLOCK)
    sizes = [BLOCK] * (n_blocks - 1) + [paths - BLOCK * (n_blocks - 1)]
    if antithetic and sizes[-1] % 2:
        raise InputError("paths must leave an even last block with antithetic=True")
    root = np.random.SeedSequence(int(seed))
    per_chunk = max(1, chunk_paths // BLOCK)
    sign = 1.0 if kind == "call" else -1.0
    market = np.array([np.log(spot), (rate - div_yield) * maturity, sign, np.exp(-rate * maturity)])

    sums = np.zeros((n_blocks, strikes.size))
    squares = np.zeros((n_blocks, strikes.size))
    counts = np.zeros((n_blocks, 4), dtype=np.int64)  # values, touched, negatives, failed

    def run_block(j):
        gen = np.random.Generator(np.random.SFC64(block_seed(root, j)))
        return price_block(
            gen,
            sizes[j],
            antithetic,
            info.kind,
            fmap,
            consts,
            p.v0,
            steps,
            market,
            p.rho,
            strikes,
            conditional,
        )

    pool = thread_pool() if n_blocks > 1 else None
    for first in range(0, n_blocks, per_chunk):
        ids = range(first, min(first + per_chunk, n_blocks))
        # block j's stream is root.spawn(n_blocks)[j], made only when its chunk runs
        results = pool.map(run_block, ids) if pool else map(run_block, ids)
        for j, (s, sq, cnt) in zip(ids, results, strict=True):
            sums[j], squares[j], counts[j] = s, sq, cnt
    touched_paths, negatives, adj_failed = (int(x) for x in counts[:, 1:].sum(axis=0))
    counts = counts[:, 0]

    n = int(counts.sum())
    mean = sums.sum(axis=0) / n
    if not np.all(np.isfinite(mean)):
        raise diverged_error(scheme, p.kappa, dt)
    var = np.maximum(squares.sum(axis=0) / n - mean * mean, 0.0) * n / max(n - 1, 1)
    se = np.sqrt(var / n)
    one = strike_in.ndim == 0

    def out(a):
        return float(a[0]) if one else a

    expected = expected_negative_step_fraction(p, maturity, steps) if info.euler else 0.0
    notes = coarse_step_notes(p.kappa, dt)
    if adj_failed:
        notes += (
            f"martingale correction unavailable on {adj_failed} path-steps (left uncorrected)",
        )
    return MCResult(
        price=out(mean),
        std_error=out(se),
        ci_low=out(mean - Z95 * se),
        ci_high=out(mean + Z95 * se),
        strike=out(strikes),
        kind=kind,
        maturity=maturity,
        scheme=scheme,
        steps=steps,
        paths=paths,
        seed=int(seed),
        antithetic=antithetic,
        conditional=conditional,
        elapsed_s=time.perf_counter() - started,
        negative_step_fraction=negatives / (paths * steps) if info.euler else 0.0,
        zero_touch_fraction=touched_paths / paths,
        expected_negative_step_fraction=expected,
        martingale_correction_failures=adj_failed,
        notes=notes,
    )
