"""Monte Carlo Greeks on the price's own paths, with standard errors.

One entry, :func:`mc_greeks`, for a European call or put, a cash digital
and a continuously watched single barrier.  The paths are those of the
price: a European runs the blocks of :func:`rootvar.core.mc_price` with
``conditional=True``, a digital or a barrier those of
:func:`rootvar.core.mc_exotic` with ``control="none"``; the same seed,
scheme, step, path count and antithetic choice give the same price to the
last bit, and the Greeks are read off the same draws (compiled kernels in
:mod:`rootvar.core.montecarlo.greeks_kernels`).  Seeding, blocks and threads
follow :mod:`rootvar.core.montecarlo.european`, so nothing depends on the
chunk size or the thread count.

Which estimator each Greek uses (see :func:`mc_greeks`, Notes):

====================  =========================  ==================================
Greek                 European, digital          continuous barrier
====================  =========================  ==================================
delta, gamma          conditional, pathwise      smoothed, pathwise; combined with
                                                 the first step's likelihood ratio
theta                 conditional, pathwise in   smoothed, pathwise in T
                      T (variance tangent)       (variance tangent)
rho_rate, rho_div     conditional, pathwise      smoothed, pathwise
d_v0 .. d_vol_of_vol  conditional, variance      smoothed, variance tangent
                      tangent
d_rho                 conditional, pathwise      smoothed, pathwise
vega                  2 sqrt(v0) d_v0 + 2 sqrt(theta) d_theta, path by path
====================  =========================  ==================================

"Conditional": the value given the variance path (Willard 1997);
"smoothed": the bridge survival weight with the last log-price step
integrated in closed form (Glasserman 2004, ch. 7; Giles 2009).

Schemes: the variance tangent exists for the Euler schemes only (their step
map is differentiable almost everywhere), so ``theta``, ``vega`` and
``d_v0`` .. ``d_vol_of_vol`` are given for ``euler_full``, ``euler_partial``,
``euler_absorb`` and ``euler_reflect``; ``qe`` and ``exact_variance`` give
delta, gamma, the two rate rhos and ``d_rho``; ``qe_martingale`` the same but
``d_rho`` (its correction depends on ``rho``).  A Greek not given is absent
from the result, with a note saying why.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rootvar.core.greeks import GREEK_NAMES, Greeks
from rootvar.core.montecarlo import greeks_kernels as gk
from rootvar.core.montecarlo.european import (
    BLOCK,
    DEFAULT_SEED,
    block_seed,
    check_stable,
    coarse_step_notes,
    diverged_error,
)
from rootvar.core.montecarlo.exotic import (
    BARRIER_STEPS_PER_YEAR,
    DEFAULT_STEPS_PER_YEAR,
    MAX_STEPS_PER_YEAR,
    MIN_PATHS,
    PILOT_KEY,
    PILOT_PATHS,
    payoff_spec,
    time_grid,
)
from rootvar.core.montecarlo.greeks_kernels import european_greeks_block, exotic_greeks_block
from rootvar.core.montecarlo.kernels import EULER, QE_MARTINGALE
from rootvar.core.montecarlo.schemes import SCHEMES, kernel_constants
from rootvar.core.params import as_params
from rootvar.core.products import KINDS, BarrierOption, DigitalOption, EuropeanOption
from rootvar.core.runtime import notice_if_cold, thread_pool
from rootvar.core.validation import InputError, as_float, as_positive_int, check_choice

__all__ = ["DEFAULT_GREEKS_SCHEME", "mc_greeks"]

#: Scheme used when none is given: full truncation, the Euler fix with the
#: smallest bias in Lord, Koekkoek & van Dijk (2010), and an Euler scheme, so
#: that every Greek has its pathwise tangent.
DEFAULT_GREEKS_SCHEME = "euler_full"

#: The Greeks that need the variance path's tangent (Euler schemes only).
_TANGENT_GREEKS = ("theta", "vega", "d_v0", "d_kappa", "d_theta", "d_vol_of_vol")

_CONDITIONAL = "conditional (mixing)"
_SMOOTHED = "bridge survival weight, last step integrated (smoothed)"
_ESTIMATORS = {
    "conditional": {
        "delta": f"{_CONDITIONAL}: pathwise in spot",
        "gamma": f"{_CONDITIONAL}: pathwise in spot",
        "theta": f"{_CONDITIONAL}: pathwise in maturity through the variance tangent",
        "vega": "2 sqrt(v0) d_v0 + 2 sqrt(theta) d_theta, path by path",
        "rho_rate": f"{_CONDITIONAL}: pathwise in the rate",
        "rho_div": f"{_CONDITIONAL}: pathwise in the dividend yield",
        "d_v0": f"{_CONDITIONAL}: pathwise through the variance tangent",
        "d_kappa": f"{_CONDITIONAL}: pathwise through the variance tangent",
        "d_theta": f"{_CONDITIONAL}: pathwise through the variance tangent",
        "d_vol_of_vol": f"{_CONDITIONAL}: pathwise through the variance tangent",
        "d_rho": f"{_CONDITIONAL}: pathwise in rho",
    },
    "barrier": {
        "delta": f"{_SMOOTHED}: pathwise in spot",
        "gamma": f"{_SMOOTHED}: pathwise, second order in spot",
        "theta": f"{_SMOOTHED}: pathwise in maturity through the variance tangent",
        "vega": "2 sqrt(v0) d_v0 + 2 sqrt(theta) d_theta, path by path",
        "rho_rate": f"{_SMOOTHED}: pathwise in the rate",
        "rho_div": f"{_SMOOTHED}: pathwise in the dividend yield",
        "d_v0": f"{_SMOOTHED}: pathwise through the variance tangent",
        "d_kappa": f"{_SMOOTHED}: pathwise through the variance tangent",
        "d_theta": f"{_SMOOTHED}: pathwise through the variance tangent",
        "d_vol_of_vol": f"{_SMOOTHED}: pathwise through the variance tangent",
        "d_rho": f"{_SMOOTHED}: pathwise in rho",
    },
}


def _product(product, maturity, kind):
    """The contract: a product as given, or a European from a strike and ``maturity``."""
    if isinstance(product, (EuropeanOption, BarrierOption, DigitalOption)):
        if maturity is not None:
            raise InputError(
                f"maturity must be left out when product is a contract (it has its own), "
                f"got {maturity!r}"
            )
        if isinstance(product, BarrierOption) and not product.continuous:
            raise InputError(
                "product must be a continuously watched barrier for Monte Carlo Greeks (a "
                "discretely watched knock is a jump in the spot, which no pathwise or smoothed "
                f"estimator here follows; use pde_price), got monitoring={product.monitoring!r}"
            )
        return product
    if isinstance(product, (int, float, np.integer, np.floating)) and not isinstance(
        product, (bool, np.bool_)
    ):
        if maturity is None:
            raise InputError("maturity must be given with a strike, got None")
        check_choice("kind", kind, KINDS)
        return EuropeanOption(kind, product, maturity)
    raise InputError(
        "product must be a EuropeanOption, a BarrierOption (continuous), a DigitalOption or a "
        f"strike, got {type(product).__name__}"
    )


def _blocks(paths, antithetic):
    n_blocks = -(-paths // BLOCK)
    sizes = [BLOCK] * (n_blocks - 1) + [paths - BLOCK * (n_blocks - 1)]
    if antithetic and sizes[-1] % 2:
        raise InputError("paths must leave an even last block with antithetic=True")
    return sizes


def _run(batches, chunk_paths, block):
    """Per-block sums, squares and counts of each batch ``(root, sizes)``, in block order.

    The blocks of all batches go to the threads as one list, a chunk at a
    time, so that a small batch (the barrier's pilot, one block) runs beside
    the main run's last chunk instead of alone after it on one thread.  Each
    block draws from its own child of its batch's root, so neither this nor
    the chunk size nor the thread count changes a bit of the result.
    """
    tasks = [(b, j) for b, (_, sizes) in enumerate(batches) for j in range(len(sizes))]

    def run_block(task):
        b, j = task
        root, sizes = batches[b]
        return block(np.random.Generator(np.random.SFC64(block_seed(root, j))), sizes[j])

    out = [
        (np.zeros((len(sizes), gk.N_SUMS)), np.zeros((len(sizes), gk.N_SUMS)), [])
        for _, sizes in batches
    ]
    per_chunk = max(1, chunk_paths // BLOCK)
    pool = thread_pool() if len(tasks) > 1 else None
    for first in range(0, len(tasks), per_chunk):
        chunk = tasks[first : first + per_chunk]
        results = pool.map(run_block, chunk) if pool else map(run_block, chunk)
        for (b, j), (s, sq, cnt) in zip(chunk, results, strict=True):
            sums, squares, counts = out[b]
            sums[j], squares[j] = s, sq
            counts.append(cnt)
    return [(sums, squares, np.sum(counts, axis=0)) for sums, squares, counts in out]


@dataclass(frozen=True)
class _Moments:
    """Means, unbiased variances and the covariances of the :data:`CROSS` pairs."""

    n: int
    mean: np.ndarray
    var: np.ndarray
    cov: np.ndarray

    @property
    def se(self):
        return np.sqrt(self.var / self.n)


def _moments(sums, squares, n, price_width=0):
    """The statistics of per-block sums; the price summed as its own engine sums it.

    The price engines reduce an array of ``price_width`` columns over the
    blocks (``mc_price``: one per strike; ``mc_exotic``: five sums), and
    numpy's summation order depends on that shape, so the price column is
    reduced in an array of the same width to keep its bits (0: no price).
    """
    total = np.array([np.ascontiguousarray(sums[:, q]).sum() for q in range(sums.shape[1])])
    total_sq = np.array([np.ascontiguousarray(squares[:, q]).sum() for q in range(sums.shape[1])])
    if price_width:
        for out, column in ((total, sums[:, 0]), (total_sq, squares[:, 0])):
            shaped = np.zeros((sums.shape[0], price_width))
            shaped[:, 0] = column
            out[0] = shaped.sum(axis=0)[0]
    mean = total[: gk.N_Q] / n
    spread = np.maximum(total_sq[: gk.N_Q] / n - mean * mean, 0.0)
    # each engine's own order of operations, so the price's error has its bits too
    var = spread * n / max(n - 1, 1) if price_width == 1 else spread * (n / max(n - 1, 1))
    scale = n / max(n - 1, 1)
    cov = np.array(
        [(total[gk.N_Q + j] / n - mean[a] * mean[b]) * scale for j, (a, b) in enumerate(gk.CROSS)]
    )
    return _Moments(n, mean, var, cov)


def _weights(pilot: _Moments):
    """Per :data:`CROSS` pair, the weight ``beta`` of ``(1 - beta) A + beta B`` of least variance.

    ``A - B`` has mean 0 (both estimate the same Greek), so this is the
    control-variate coefficient ``Cov(A, A - B) / Var(A - B)`` (Glasserman
    2004, sec. 4.1), taken from an independent pilot so that the combined
    estimate stays unbiased.
    """
    out = []
    for j, (a, b) in enumerate(gk.CROSS):
        var_c = pilot.var[a] + pilot.var[b] - 2.0 * pilot.cov[j]
        out.append((pilot.var[a] - pilot.cov[j]) / var_c if var_c > 0.0 else 0.0)
    return out


def _combined(main: _Moments, betas):
    """``{column: (estimate, standard error)}`` of the combined estimators on the main paths."""
    out = {}
    for j, (a, b) in enumerate(gk.CROSS):
        beta = betas[j]
        var_c = main.var[a] + main.var[b] - 2.0 * main.cov[j]
        cov_ac = main.var[a] - main.cov[j]
        var = max(main.var[a] - 2.0 * beta * cov_ac + beta * beta * var_c, 0.0)
        out[a] = (main.mean[a] - beta * (main.mean[a] - main.mean[b]), math.sqrt(var / main.n))
    return out


def info_name(info):
    """The registry key of a scheme."""
    return next(key for key, value in SCHEMES.items() if value is info)


def _scales(params):
    """The market entries after the strike: the vega weights, ``kappa`` and ``vol_of_vol``."""
    return (
        2.0 * math.sqrt(params.v0),
        2.0 * math.sqrt(params.theta),
        params.kappa,
        params.vol_of_vol,
    )


def _european(params, spot, product, rate, div_yield, info, steps, paths, seed, anti, chunk):
    """The blocks of mc_price(conditional=True) through the Greeks kernel."""
    maturity = product.maturity
    dt = maturity / steps
    check_stable_args = (params.kappa, dt)
    consts = kernel_constants(info, params, dt)
    fmap = np.array(info.fmap, dtype=np.int64)
    sign = 1.0 if product.kind == "call" else -1.0
    # the price's own four numbers, formed as mc_price forms them
    head = np.array([np.log(spot), (rate - div_yield) * maturity, sign, np.exp(-rate * maturity)])
    market = np.concatenate([head, [spot, rate, maturity, product.strike, *_scales(params)]])
    sizes = _blocks(paths, anti)

    def block(gen, size):
        return european_greeks_block(
            gen, size, anti, info.kind, fmap, consts, params.v0, steps, market, params.rho
        )

    ((sums, squares, counts),) = _run([(np.random.SeedSequence(int(seed)), sizes)], chunk, block)
    if counts[1]:
        raise diverged_error(info_name(info), *check_stable_args)
    return _moments(sums, squares, int(counts[0]), price_width=1), None


def _exotic(params, spot, product, rate, div_yield, info, steps, paths, seed, anti, chunk):
    """The main blocks of mc_exotic(control="none") through the Greeks kernel."""
    nodes, lengths = time_grid([product.maturity], steps)
    rows, which = {}, np.empty(lengths.size, dtype=np.int64)
    for k, dt in enumerate(lengths):
        which[k] = rows.setdefault(float(dt), len(rows))
    consts = np.ascontiguousarray([kernel_constants(info, params, dt) for dt in rows])
    market = np.array(
        [
            math.log(spot),
            (rate - div_yield) * product.maturity,
            0.0,
            math.exp(-rate * product.maturity),
            spot,
            rate,
            product.maturity,
            product.strike,
            *_scales(params),
        ]
    )
    args = (
        info.kind,
        np.array(info.fmap, dtype=np.int64),
        consts,
        which,
        params.v0,
        math.log(spot),
        rate - div_yield,
        params.rho,
        nodes,
        np.exp(-rate * nodes),
        payoff_spec(product, spot, rate),
        market,
    )
    stable = (params.kappa, float(np.max(lengths)))

    def block(gen, size):
        return exotic_greeks_block(gen, size, anti, *args)

    batches = [(np.random.SeedSequence(int(seed)), _blocks(paths, anti))]
    scored = lengths.size >= 2  # one step, integrated whole: no first-step score, no pilot
    if scored:
        pilot_root = np.random.SeedSequence(int(seed), spawn_key=(PILOT_KEY,))
        batches.append((pilot_root, _blocks(min(PILOT_PATHS, paths), anti)))
    runs = _run(batches, chunk, block)
    for _, _, counts in runs:
        if counts[1]:
            raise diverged_error(info_name(info), *stable)
    sums, squares, counts = runs[0]
    main = _moments(sums, squares, int(counts[0]), price_width=5)
    if not scored:
        return main, None
    sums, squares, counts = runs[1]
    return main, _weights(_moments(sums, squares, int(counts[0]), price_width=0))


def _knocked(params, spot, product, rate, div_yield, **run):
    """A continuous barrier already on its knock side: exact for a knock-out, else the vanilla."""
    side = "at or below" if product.direction == "down" else "at or above"
    reason = f"already knocked: spot {spot!r} is {side} the barrier {product.barrier!r}"
    if product.knock == "out":
        zero = dict.fromkeys(GREEK_NAMES, 0.0)
        return Greeks(
            price=float(product.rebate),
            values=zero,
            errors=dict(zero),
            method="monte_carlo",
            estimators=dict.fromkeys(GREEK_NAMES, "exact: the rebate, paid now"),
            price_error=0.0,
            notes=(f"{reason}; the value is the rebate paid now, so every Greek is 0",),
        )
    vanilla = mc_greeks(params, spot, product.vanilla(), rate, div_yield, **run)
    return Greeks(
        price=vanilla.price,
        values=vanilla.values,
        errors=vanilla.errors,
        method="monte_carlo",
        estimators=vanilla.estimators,
        price_error=vanilla.price_error,
        notes=(f"{reason}; the knock-in is the vanilla: its Greeks", *vanilla.notes),
    )


def mc_greeks(
    params,
    spot,
    product,
    rate=0.0,
    div_yield=0.0,
    *,
    maturity=None,
    kind="call",
    scheme=DEFAULT_GREEKS_SCHEME,
    steps=None,
    paths=100_000,
    seed=DEFAULT_SEED,
    antithetic=True,
    chunk_paths=16 * BLOCK,
) -> Greeks:
    """Monte Carlo price and Greeks of one option on the same paths, with standard errors.

    Parameters
    ----------
    params : HestonParams
        ``rho`` must lie strictly inside (-1, 1): the estimators condition on
        (or integrate over) the log-price noise independent of the variance,
        which ``|rho| = 1`` leaves out.
    spot : float
        Spot today, > 0 (currency).
    product : EuropeanOption, BarrierOption, DigitalOption or float
        The contract; a barrier must be watched continuously.  A number is
        the strike of a European whose ``maturity`` and ``kind`` are given.
    rate, div_yield : float
        Continuously compounded rate and dividend yield (decimals).
    maturity : float or None
        Years, > 0; only with a strike as ``product``.
    kind : {"call", "put"}
        Only with a strike as ``product``.
    scheme : str
        A key of :data:`rootvar.core.montecarlo.schemes.SCHEMES` (default
        :data:`DEFAULT_GREEKS_SCHEME`, ``"euler_full"``); which Greeks each
        scheme gives is in the module's docstring.
    steps : int or None
        Time steps **per year**, as :func:`rootvar.core.mc_exotic` counts them
        (default 64; 256 for a barrier); the run has
        ``max(1, ceil(steps x maturity))`` equal steps.
    paths : int
        Paths, >= 100 (pairs count as two with ``antithetic``; even then).
    seed : int
        Seed of the numpy ``SeedSequence``, >= 0.
    antithetic : bool
        Mirror the draws within each block (default); statistics over pair
        averages.
    chunk_paths : int
        Paths handed to the threads at once; never changes the result.

    Returns
    -------
    Greeks
        ``method="monte_carlo"``; ``values`` in the units of
        :data:`rootvar.core.GREEK_UNITS` (ccy per unit spot, per unit spot
        squared, per year, per unit rate, per unit variance, ...), ``errors``
        their standard errors, ``estimators`` the estimator of each,
        ``price`` and ``price_error`` the price on the paths and its
        standard error, ``notes`` the run (scheme, steps, paths, seed), the
        price function that gives the same price, and every Greek left out
        with the reason.

    Raises
    ------
    InputError
        Bad arguments (naming the argument, the rule and the value), a
        discretely watched barrier, an Asian or forward-start option,
        ``|rho| = 1``.
    SchemeDivergenceError
        The scheme's variance diverges at this step.

    Notes
    -----
    **Same paths.**  A European's price is the conditional estimate of
    ``mc_price(params, spot, K, T, rate, div_yield, kind, scheme=scheme,
    steps=n, paths=paths, seed=seed, antithetic=antithetic,
    conditional=True)`` with ``n = max(1, ceil(steps T))``; a digital's or
    barrier's is ``mc_exotic(..., control="none")``'s price (which is the
    ``uncontrolled_price`` of any control, the pilot drawing from a stream
    of its own).

    **Europeans and digitals: conditional (mixing) estimator.**  Given the
    variance path, ``ln S_T`` is normal with total variance
    ``w = (1 - rho^2) I`` and forward ``F = S0 xi``,
    ``ln xi = (r - q) T + A + rho M - rho^2 I / 2`` (``I`` the integrated
    variance, ``M`` the variance martingale part, ``A`` QE's martingale
    correction), so the option is worth ``E[P(S0 xi, K, w)]`` with ``P`` the
    discounted Black-Scholes price (a digital: ``cash e^{-rT} N(+-d2)``)
    (Willard 1997; Romano & Touzi 1997; Broadie & Kaya 2006, sec. 4).  Each
    path's ``P`` is smooth in every input: ``delta = E[dP/dF xi]``,
    ``gamma = E[d2P/dF2 xi^2]``, and every other Greek is the path's
    derivative of ``P`` through ``xi`` and ``w`` (the pathwise method of
    Glasserman 2004, sec. 7.2, applied to the conditional value).
    ``rho_rate = E[T (S0 delta_path - P)]``, ``rho_div = -T S0 delta``;
    ``d_rho`` uses ``d ln xi/d rho = M - rho I``, ``dw/d rho = -2 rho I``
    (the variance path does not depend on ``rho``).  A digital's price is
    the payoff on the path (as ``mc_exotic``'s) and its Greeks are those of
    the conditional value on the same variance paths: its payoff jumps, so
    a pathwise derivative of the payoff itself would be 0 almost surely.

    **Variance tangent (Euler schemes).**  The derivative of each Euler step
    ``v' = f1(v) + kappa dt (theta - f2(v)) + sigma sqrt(f3(v) dt) Z`` in
    ``v0``, ``kappa``, ``theta`` and ``vol_of_vol`` is carried along the
    path, ``max(v, 0)`` and ``|v|`` differentiated almost everywhere
    (``1{v > 0}``, ``sign v``), and with it the derivatives of
    ``I = sum f3(v) dt`` and ``M = sum sqrt(f3(v) dt) Z`` (Glasserman 2004,
    sec. 7.2, the derivative process of a discretised SDE; for full
    truncation ``sigma M = v_n - v0 - kappa theta T + kappa I`` exactly, so
    ``M``'s derivatives come from those of ``v_n`` and ``I``).  The
    derivative of ``sqrt(f3(v))`` is ``1 / (2 sqrt(v))``, large on paths that
    come close to zero: when Feller fails (``2 kappa theta < vol_of_vol^2``)
    the estimator's variance grows as the step shrinks (its continuous limit
    has none: ``E[int dt / v]`` diverges), and the standard errors say so;
    it stays unbiased.  ``theta = -dV/dT`` with the spot, the variance and
    the step count fixed, the derivative of the discretised price (whose
    bias falls with the step like the price's): the chain depends on ``T``
    only through ``kappa T`` and ``vol_of_vol sqrt(T)``, so
    ``dV/dT = (kappa / T) dV/dkappa + (vol_of_vol / 2T) dV/dvol_of_vol``
    plus the derivative through the explicit time scale (``I ~ T``,
    ``M ~ sqrt(T)``, the dates, the carry and the discount).  QE and exact
    variance sampling have no such tangent (QE's step jumps where it
    switches branch; the exact step is a Poisson mixture of chi-square
    draws), so these Greeks are left out for them.

    **Continuous barriers: smoothed pathwise estimators.**  A path's price
    is its payoff times the product of the Brownian-bridge survival
    probabilities of its steps, plus the rebates (as in ``mc_exotic``).  The
    Greeks differentiate a smoothed path value of the same mean: the
    survival weight up to the last step times the last step integrated over
    its log-price normal in closed form (given the path, the last log-price
    is normal and the bridge probability is the exponential of a linear
    function of it, so the integral is a sum of Gaussian integrals of
    exponentials; it is Black's formula where the path is far from the
    barrier).  A step survival ``1 - exp(-2 d0 d1 / dI)`` has a kink where
    the step ends on the barrier, but the next step's survival vanishes
    there like its start's distance, so the weight is continuously
    differentiable, and the strike's kink is integrated away: the pathwise
    first and second derivatives (Glasserman 2004, sec. 7.2; Broadie &
    Glasserman 1996) miss no mass, and so give delta, gamma, the rhos,
    ``d_rho`` and, through the variance tangent, the variance Greeks and
    theta.  Integrating the last step is Giles's (2009) "vibrato" idea taken
    to its closed form.  The weight's derivatives still grow where a path
    passes near the barrier, the more so the finer the step, so delta and
    gamma are also estimated by the likelihood ratio of the first log-price
    step (law ``N(ln S0 + m_0, s_0^2)`` given the variance,
    ``s_0^2 = (1 - rho^2) dI_0``; Broadie & Glasserman 1996; Glasserman
    2004, sec. 7.3) applied to the smoothed value and to its pathwise delta,
    and the two estimates of each are combined as ``(1 - b) A + b B`` with
    the ``b`` of least variance, ``A - B`` being a control of mean zero
    (Glasserman 2004, sec. 4.1).  ``b`` is taken from an independent pilot
    of :data:`rootvar.core.montecarlo.exotic.PILOT_PATHS` paths (the
    stream ``mc_exotic``'s control pilot uses), so the combination stays
    unbiased; the estimator's description gives ``b``.  A rebate paid at the
    hit leaves a kink of order ``rebate x r dt`` per crossing in the weight,
    so the barrier's gamma with a rebate and a rate carries a bias of that
    order.  Measured (``OK`` set of the tests, down-and-out call 100/90,
    256 steps a year, 20,000 paths, 100 seeds): delta, gamma, ``d_v0`` and
    vega within 3 standard errors of the PDE on every seed.
    References
    ----------
    Broadie, M. & Glasserman, P. (1996). Estimating security price
    derivatives using simulation. Management Science 42(2), 269-285.
    Broadie, M. & Kaya, Ö. (2006). Exact simulation of stochastic volatility
    and other affine jump diffusion processes. Operations Research 54(2),
    217-231.
    Giles, M. B. (2009). Vibrato Monte Carlo sensitivities. In Monte Carlo
    and Quasi-Monte Carlo Methods 2008, Springer, 369-382.
    Glasserman, P. (2004). Monte Carlo Methods in Financial Engineering.
    Springer. Ch. 7 (sensitivities: 7.2 pathwise, 7.3 likelihood ratio),
    sec. 4.1 (control variates) and sec. 6.4 (the bridge crossing
    probability).
    Lord, R., Koekkoek, R. & van Dijk, D. (2010). A comparison of biased
    simulation schemes for stochastic volatility models. Quantitative
    Finance 10(2), 177-194.
    Romano, M. & Touzi, N. (1997). Contingent claims and market completeness
    in a stochastic volatility model. Mathematical Finance 7(4), 399-412.
    Willard, G. A. (1997). Calculating prices and sensitivities for
    path-independent derivative securities in multifactor models. Journal of
    Derivatives 5(1), 45-61.

    Examples
    --------
    >>> from rootvar.core import EuropeanOption, HestonParams, mc_greeks
    >>> p = HestonParams(v0=0.04, kappa=2.0, theta=0.04, vol_of_vol=0.3, rho=-0.5)
    >>> g = mc_greeks(p, 100.0, EuropeanOption("call", 100.0, 1.0), paths=8192, steps=16)
    >>> 0.5 < g["delta"] < 0.7 and g.errors["delta"] < 0.01
    True
    """
    as_params(params)
    if abs(params.rho) >= 1.0:
        raise InputError(
            f"rho must lie in (-1, 1) for Monte Carlo Greeks (their estimators need log-price "
            f"noise independent of the variance), got {params.rho!r}"
        )
    spot = as_float("spot", spot, ">0")
    rate = as_float("rate", rate)
    div_yield = as_float("div_yield", div_yield)
    product = _product(product, maturity, kind)
    check_choice("scheme", scheme, tuple(SCHEMES))
    barrier = isinstance(product, BarrierOption)
    if steps is None:
        steps = BARRIER_STEPS_PER_YEAR if barrier else DEFAULT_STEPS_PER_YEAR
    steps = as_positive_int("steps", steps)
    if steps > MAX_STEPS_PER_YEAR:
        raise InputError(f"steps must be <= {MAX_STEPS_PER_YEAR:,} a year, got {steps:,}")
    paths = as_positive_int("paths", paths)
    if paths < MIN_PATHS:
        raise InputError(f"paths must be >= {MIN_PATHS}, got {paths}")
    chunk_paths = as_positive_int("chunk_paths", chunk_paths)
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(f"seed must be a whole number >= 0, got {seed!r}")
    if not isinstance(antithetic, (bool, np.bool_)):
        raise InputError(f"antithetic must be True or False, got {antithetic!r}")
    antithetic = bool(antithetic)
    if antithetic and paths % 2:
        raise InputError(f"paths must be even with antithetic=True, got {paths}")
    run = {
        "scheme": scheme,
        "steps": steps,
        "paths": paths,
        "seed": seed,
        "antithetic": antithetic,
        "chunk_paths": chunk_paths,
    }
    if barrier and bool(product.is_hit(spot)):
        return _knocked(params, spot, product, rate, div_yield, **run)

    info = SCHEMES[scheme]
    european = isinstance(product, EuropeanOption)
    n_steps = max(1, math.ceil(steps * product.maturity - 1e-9))
    check_stable(scheme, params.kappa, product.maturity / n_steps)
    args = (params, spot, product, rate, div_yield, info)
    if european:
        notice_if_cold(european_greeks_block)
        main, betas = _european(*args, n_steps, paths, seed, antithetic, chunk_paths)
        same = (
            f"mc_price(..., scheme={scheme!r}, steps={n_steps}, paths={paths}, seed={seed}, "
            f"antithetic={antithetic}, conditional=True)"
        )
    else:
        notice_if_cold(exotic_greeks_block)
        main, betas = _exotic(*args, steps, paths, seed, antithetic, chunk_paths)
        same = (
            f"mc_exotic(..., scheme={scheme!r}, steps={steps}, paths={paths}, seed={seed}, "
            f"antithetic={antithetic}, control='none')"
        )
    mean, se = main.mean, main.se
    dt = product.maturity / n_steps
    notes = [f"price on the paths of {same}; {n_steps} steps of {dt:.4g} y"]
    notes.extend(coarse_step_notes(params.kappa, dt))
    table = dict(_ESTIMATORS["barrier" if barrier else "conditional"])
    if barrier:
        combined = _combined(main, betas) if betas is not None else {}
        for j, (column, _) in enumerate(gk.CROSS):
            name = gk.QUANTITIES[column]
            if column in combined:
                mean[column], se[column] = combined[column]
                table[name] += (
                    f", combined with the likelihood ratio of the first log-price step "
                    f"(weight {betas[j]:.3g} from {min(PILOT_PATHS, paths):,} pilot paths)"
                )
    dropped = {}
    if info.kind != EULER:
        for name in _TANGENT_GREEKS:
            dropped[name] = (
                f"scheme {scheme!r} has no pathwise variance tangent (use an Euler scheme)"
            )
    if info.kind == QE_MARTINGALE:
        dropped["d_rho"] = "the martingale correction of 'qe_martingale' depends on rho"
    for name, why in dropped.items():
        notes.append(f"{name} not given: {why}")

    values, errors, estimators = {}, {}, {}
    for name in GREEK_NAMES:
        if name in dropped:
            continue
        q = gk.QUANTITIES.index(name)
        values[name] = float(mean[q])
        errors[name] = float(se[q])
        estimators[name] = table[name]
    return Greeks(
        price=float(mean[0]),
        values=values,
        errors=errors,
        method="monte_carlo",
        estimators=estimators,
        price_error=float(se[0]),
        notes=tuple(notes),
    )
