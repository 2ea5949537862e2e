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


def _run(root, sizes, chunk_paths, block):
    """Per-block sums, squares and counts of the blocks ``sizes`` of the stream ``root``.

    Each block draws from its own child of ``root``, so neither the chunk
    size nor the thread count changes a bit of the result; the blocks are
    kept apart (rather than summed here) because the barrier's weights are
    cross-fitted between the even and the odd blocks (:func:`_cross_fitted`).

    Returns
    -------
    sums, squares : float64 array (blocks, ``N_SUMS``)
    counts : int64 array (blocks, 2)
        Per block: values summed, diverged paths.
    """

    def run_block(j):
        return block(np.random.Generator(np.random.SFC64(block_seed(root, j))), sizes[j])

    n_blocks = len(sizes)
    sums = np.zeros((n_blocks, gk.N_SUMS))
    squares = np.zeros((n_blocks, gk.N_SUMS))
    counts = np.zeros((n_blocks, 2), dtype=np.int64)
    per_chunk = max(1, chunk_paths // BLOCK)
    pool = thread_pool() if n_blocks > 1 else None
    for first in range(0, n_blocks, per_chunk):
        chunk = range(first, min(first + per_chunk, n_blocks))
        results = pool.map(run_block, chunk) if pool else map(run_block, chunk)
        for j, (s, sq, cnt) in zip(chunk, results, strict=True):
            sums[j], squares[j], counts[j] = s, sq, cnt
    return sums, squares, counts


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


def _weights(fit: _Moments):
    """Per :data:`CROSS` pair, the weight ``beta`` of ``A - beta (A - B)`` of least variance.

    ``A - B`` has mean 0 (both estimate the same Greek), so this is the
    control-variate coefficient ``Cov(A, A - B) / Var(A - B)`` (Glasserman
    2004, sec. 4.1), estimated on the paths of ``fit``: the other half of the
    run in :func:`_cross_fitted`, so that the weight is independent of the
    paths it is applied to.  0 (``A`` alone) where ``A - B`` has no variance.
    """
    out = []
    for j, (a, b) in enumerate(gk.CROSS):
        var_c = fit.var[a] + fit.var[b] - 2.0 * fit.cov[j]
        out.append((fit.var[a] - fit.cov[j]) / var_c if var_c > 0.0 else 0.0)
    return out


def _combined_variance(half: _Moments, j, beta):
    """Variance of one value of ``A - beta (A - B)``, pair ``j`` of :data:`CROSS`, on ``half``."""
    a, b = gk.CROSS[j]
    var_c = half.var[a] + half.var[b] - 2.0 * half.cov[j]
    cov_ac = half.var[a] - half.cov[j]
    return max(half.var[a] - 2.0 * beta * cov_ac + beta * beta * var_c, 0.0)


@dataclass(frozen=True)
class _Fit:
    """The cross-fitted combinations: ``{column: (estimate, standard error)}`` and the weights.

    ``weights[j]`` is ``(beta applied to the even blocks, beta applied to the
    odd blocks)`` of :data:`CROSS` pair ``j``; ``None`` for a run of one block.
    """

    combined: dict
    weights: list | None


def _cross_fitted(sums, squares, counts, main: _Moments):
    """The :data:`CROSS` combinations ``A - beta (A - B)`` with weights cross-fitted over halves.

    The blocks split by parity into two independent halves, ``E`` (even
    indices) and ``O`` (odd).  The weight applied to ``E`` is fitted on
    ``O``'s moments and that applied to ``O`` on ``E``'s (sample splitting,
    or cross-fitting), so each half's combination
    ``mean_h(A) - beta (mean_h(A) - mean_h(B))`` has a weight independent of
    its own paths and, ``A - B`` having mean 0, the mean of ``A``: it is
    unbiased, where a weight fitted on the same paths is not (Nelson 1990;
    Glasserman 2004, sec. 4.1).  The estimate is the path-weighted average
    of the two halves, ``(n_E c_E + n_O c_O) / n``, and its standard error
    is ``sqrt(n_E var_E(beta_O) + n_O var_O(beta_E)) / n`` with
    ``var_h(beta)`` the variance of one value of the combination on half
    ``h`` at weight ``beta`` (the weights tie the halves together only
    through their own estimation error, a covariance of smaller order in
    ``1/n``).  Every path is used for the estimate and for a weight, so no
    pilot batch is drawn.

    A run of one block has no second half: the weight is 0 (``A`` alone,
    unbiased, with ``main``'s mean and error), and ``weights`` is ``None``.

    References
    ----------
    Nelson, B. L. (1990). Control variate remedies. Operations Research
    38(6), 974-992 (cited from memory: splitting the sample to remove the
    bias of an estimated control coefficient).
    Glasserman, P. (2004). Monte Carlo Methods in Financial Engineering.
    Springer. Sec. 4.1 (control variates, the estimated coefficient's bias).
    """
    if sums.shape[0] < 2:
        return _Fit({a: (main.mean[a], main.se[a]) for a, _ in gk.CROSS}, None)
    even, odd = (_moments(sums[h::2], squares[h::2], int(counts[h::2, 0].sum())) for h in (0, 1))
    for_even, for_odd = _weights(odd), _weights(even)
    n = even.n + odd.n
    combined, weights = {}, []
    for j, (a, b) in enumerate(gk.CROSS):
        total, spread = 0.0, 0.0
        for half, beta in ((even, for_even[j]), (odd, for_odd[j])):
            total += half.n * (half.mean[a] - beta * (half.mean[a] - half.mean[b]))
            spread += half.n * _combined_variance(half, j, beta)
        combined[a] = (total / n, math.sqrt(spread) / n)
        weights.append((for_even[j], for_odd[j]))
    return _Fit(combined, weights)


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

    sums, squares, counts = _run(np.random.SeedSequence(int(seed)), sizes, chunk, block)
    if counts[:, 1].any():
        raise diverged_error(info_name(info), *check_stable_args)
    return _moments(sums, squares, int(counts[:, 0].sum()), price_width=1), None


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

    sums, squares, counts = _run(
        np.random.SeedSequence(int(seed)), _blocks(paths, anti), chunk, block
    )
    if counts[:, 1].any():
        raise diverged_error(info_name(info), *stable)
    main = _moments(sums, squares, int(counts[:, 0].sum()), price_width=5)
    if not isinstance(product, BarrierOption) or lengths.size < 2:
        # a digital's second estimators are copies of its first; a barrier of one step is
        # integrated whole, with no first-step score: nothing to combine
        return main, None
    return main, _cross_fitted(sums, squares, counts, main)


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
    and the two estimates of each are combined as ``A - b (A - B)`` with
    the ``b`` of least variance, ``A - B`` being a control of mean zero
    (Glasserman 2004, sec. 4.1).  ``b`` is cross-fitted: the main run's
    blocks split by parity into two halves, each half's ``b`` is fitted on
    the other half's paths, so that it is independent of the paths it
    weighs and each half's combination stays unbiased (sample splitting,
    Nelson 1990), and the estimate is the path-weighted average of the two
    halves, its standard error ``sqrt(n_E var_E(b_O) + n_O var_O(b_E)) / n``
    (each half's variance at the weight applied to it).  No pilot batch is
    drawn.  A run of one block (``paths <= 4096``) has no second half and
    takes ``b = 0`` (the pathwise estimator alone), with a note saying so;
    the estimator's description gives the weights (that applied to the
    even blocks first, then that applied to the odd).  A rebate paid at the
    hit leaves a kink of order ``rebate x r dt`` per crossing in the weight,
    so the barrier's gamma with a rebate and a rate carries a bias of that
    order.  Measured (``OK`` set of the tests, down-and-out call 100/90,
    256 steps a year, 20,000 paths, seeds 0-99, weights cross-fitted):
    delta, gamma, ``d_v0`` and vega within 3 standard errors of the PDE on
    every seed (largest ``|z|`` 2.4), mean ``z`` over the seeds within
    +-0.24 (its own error is 0.1).

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
    Nelson, B. L. (1990). Control variate remedies. Operations Research
    38(6), 974-992 (cited from memory; splitting the sample to remove the
    bias of an estimated control coefficient).
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
        main, fit = _european(*args, n_steps, paths, seed, antithetic, chunk_paths)
        same = (
            f"mc_price(..., scheme={scheme!r}, steps={n_steps}, paths={paths}, seed={seed}, "
            f"antithetic={antithetic}, conditional=True)"
        )
    else:
        notice_if_cold(exotic_greeks_block)
        main, fit = _exotic(*args, steps, paths, seed, antithetic, chunk_paths)
        same = (
            f"mc_exotic(..., scheme={scheme!r}, steps={steps}, paths={paths}, seed={seed}, "
            f"antithetic={antithetic}, control='none')"
        )
    mean, se = main.mean, main.se
    dt = product.maturity / n_steps
    notes = [f"price on the paths of {same}; {n_steps} steps of {dt:.4g} y"]
    notes.extend(coarse_step_notes(params.kappa, dt))
    table = dict(_ESTIMATORS["barrier" if barrier else "conditional"])
    if fit is not None:
        for j, (column, _) in enumerate(gk.CROSS):
            name = gk.QUANTITIES[column]
            mean[column], se[column] = fit.combined[column]
            # as short as the pilot's text was: the workbooks size their rows for it
            if fit.weights is None:
                weight = "weight 0: one block, nothing to cross-fit"
            else:
                weight = "cross-fitted weights {:.3g}, {:.3g}".format(*fit.weights[j])
            table[name] += (
                f", combined with the likelihood ratio of the first log-price step ({weight})"
            )
        if fit.weights is None:
            notes.append(
                "delta and gamma: one block of paths, so the likelihood-ratio estimators get "
                "weight 0 (the pathwise estimators alone, unbiased); the weights are "
                "cross-fitted between the even and odd blocks from two blocks on"
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
