"""Monte Carlo exotics: prices against certified references, control variates, reproducibility."""

import dataclasses
import importlib
import math

import numpy as np
import pytest
from oracles.mc_reference import _STEPS, Accumulator, _Draws
from scipy import stats

from rootvar.core import (
    BLOCK,
    SCHEMES,
    AsianOption,
    BarrierOption,
    DigitalOption,
    EuropeanOption,
    ForwardStartOption,
    FourierConvergenceError,
    HestonParams,
    InputError,
    forward_start_price,
    geometric_asian_price,
    heston_price,
    mc_exotic,
    pde_price,
)
from rootvar.core.montecarlo.exotic import time_grid
from rootvar.core.runtime import numba

mc_exotic_module = importlib.import_module("rootvar.core.montecarlo.exotic")

# Fang & Oosterlee (2008), SIAM J. Sci. Comput. 31(2), the Heston test set (Feller violated mildly)
FO = HestonParams(v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)
# Andersen (2008), J. Computational Finance 11(3), case I (Feller badly violated)
CASE_I = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
MONTHLY = tuple(i / 12 for i in range(1, 13))
K_SE = 4.0  # |mc - ref| <= K_SE x combined error: a false alarm is about 1 in 16,000 per check


def _close(mc, ref, ref_error=0.0, k=K_SE):
    combined = math.hypot(mc.std_error, ref_error)
    assert abs(mc.price - ref) <= k * combined, (mc.price, ref, mc.std_error, ref_error)


def test_a_european_through_the_path_engine_matches_the_certified_fourier_price():
    # reference: heston_price, the COS method of Fang & Oosterlee (2008), certified
    product = EuropeanOption("call", 100.0, 1.0)
    mc = mc_exotic(FO, 100.0, product, steps=64, paths=60_000, seed=3)
    assert mc.control == "none" and mc.pilot_paths == 0
    assert mc.std_error < 0.05
    _close(mc, float(heston_price(FO, 100.0, 100.0, 1.0)))


@pytest.mark.parametrize(
    ("params", "barrier", "direction"),
    [(FO, 90.0, "down"), (FO, 130.0, "up"), (CASE_I, 90.0, "down"), (CASE_I, 130.0, "up")],
    ids=["fo-down", "fo-up", "case1-down", "case1-up"],
)
def test_continuous_barrier_with_the_bridge_matches_the_pde(params, barrier, direction):
    # reference: pde_price (ADI, in 't Hout & Foulon 2010) with its own error estimate; the
    # bridge (Glasserman 2004, sec. 6.4) is an approximation under stochastic variance, so
    # fine steps (192 a year)
    product = BarrierOption("call", 100.0, 1.0, barrier, direction, "out")
    pde = pde_price(params, 100.0, product)
    assert pde.converged
    mc = mc_exotic(params, 100.0, product, steps=192, paths=50_000, seed=11)
    assert mc.control == "european"
    assert mc.std_error < 0.03
    _close(mc, pde.price, pde.error_estimate)


def test_without_the_bridge_a_coarse_grid_overprices_the_knock_out():
    # common practice, no source: a barrier watched only at the grid dates is hit less often,
    # so the knock-out watched monthly is worth more than the continuous one (PDE reference)
    cont = BarrierOption("call", 100.0, 1.0, 90.0, "down", "out")
    disc = dataclasses.replace(cont, monitoring=MONTHLY)
    pde_cont = pde_price(FO, 100.0, cont).price
    pde_disc = pde_price(FO, 100.0, disc)
    mc_disc = mc_exotic(FO, 100.0, disc, steps=48, paths=50_000, seed=5)
    assert mc_disc.std_error < 0.03
    _close(mc_disc, pde_disc.price, pde_disc.error_estimate)
    assert mc_disc.price > pde_cont + K_SE * mc_disc.std_error


def test_in_out_parity_holds_on_the_same_paths():
    # identity (common practice, no source): knock-in + knock-out = vanilla, path by path
    args = {"steps": 12, "paths": 2 * BLOCK, "seed": 9, "control": "none"}
    vanilla = mc_exotic(CASE_I, 100.0, EuropeanOption("put", 100.0, 1.0), **args)
    for monitoring in (None, MONTHLY):
        out = BarrierOption("put", 100.0, 1.0, 110.0, "up", "out", monitoring=monitoring)
        inn = dataclasses.replace(out, knock="in")
        total = (
            mc_exotic(CASE_I, 100.0, out, **args).price
            + mc_exotic(CASE_I, 100.0, inn, **args).price
        )
        assert total == pytest.approx(vanilla.price, rel=1e-12)


def test_rebates_of_the_knock_in_and_knock_out_add_up_to_the_rebate_on_the_same_paths():
    # identity (common practice, no source), no rates: the knock-out pays R at the hit, the
    # knock-in pays R at expiry when never hit, so the two rebates together are worth R
    args = {"steps": 16, "paths": 2 * BLOCK, "seed": 4, "control": "none"}
    for monitoring in (None, MONTHLY):
        base = BarrierOption("call", 100.0, 1.0, 92.0, "down", "out", monitoring=monitoring)
        rebates = 0.0
        for knock in ("out", "in"):
            plain = dataclasses.replace(base, knock=knock)
            paid = dataclasses.replace(plain, rebate=3.0)
            rebates += mc_exotic(FO, 100.0, paid, **args).price
            rebates -= mc_exotic(FO, 100.0, plain, **args).price
        assert rebates == pytest.approx(3.0, rel=1e-10)


def test_a_spot_already_through_a_continuous_barrier_gives_the_exact_knocked_value():
    # same rule and value as pde_price: knock-out -> rebate now, knock-in -> certified vanilla
    out = BarrierOption("call", 100.0, 1.0, 90.0, "down", "out", rebate=2.0)
    mc = mc_exotic(FO, 85.0, out)
    assert mc.price == 2.0 and mc.std_error == 0.0 and "already knocked" in mc.notes[0]
    inn = dataclasses.replace(out, knock="in", rebate=0.0)
    assert mc_exotic(FO, 85.0, inn).price == pytest.approx(pde_price(FO, 85.0, inn).price)


def test_geometric_asian_matches_its_fourier_price():
    # reference: geometric_asian_price (Kim & Wee 2014 joint cf, certified COS)
    product = AsianOption("call", 100.0, MONTHLY, "geometric")
    mc = mc_exotic(FO, 100.0, product, steps=24, paths=50_000, seed=21)
    assert mc.control == "european"
    assert mc.std_error < 0.02
    _close(mc, geometric_asian_price(FO, 100.0, product))


def test_arithmetic_asian_with_and_without_the_geometric_control_agree():
    # control variates do not change the expectation (Glasserman 2004, sec. 4.1)
    product = AsianOption("put", 105.0, MONTHLY)
    args = {"steps": 24, "paths": 30_000, "seed": 2}
    plain = mc_exotic(CASE_I, 100.0, product, control="none", **args)
    with_cv = mc_exotic(CASE_I, 100.0, product, **args)
    assert with_cv.control == "geometric_asian"
    assert with_cv.variance_reduction > 20.0
    assert with_cv.uncontrolled_price == plain.price
    assert with_cv.uncontrolled_std_error == plain.std_error
    assert with_cv.std_error < plain.std_error / 4
    assert abs(with_cv.price - plain.price) <= K_SE * plain.std_error
    assert plain.std_error < 0.08


def test_an_uncertified_geometric_price_falls_back_to_the_european_control(monkeypatch):
    def refuse(*args, **kwargs):
        raise FourierConvergenceError("not certified in this test")

    monkeypatch.setattr(mc_exotic_module, "geometric_asian_price", refuse)
    mc = mc_exotic(FO, 100.0, AsianOption("call", 100.0, MONTHLY), steps=12, paths=BLOCK)
    assert mc.control == "european"
    assert mc.control_mean == pytest.approx(float(heston_price(FO, 100.0, 100.0, 1.0)))
    assert any("not certified" in note for note in mc.notes)


def test_forward_start_matches_its_fourier_price():
    # reference: forward_start_price (Kruse & Nögel 2005 via the joint cf, certified COS);
    # the control is the vanilla at k times the forward, not the reference itself
    product = ForwardStartOption("call", 0.25, 1.0, 1.0)
    mc = mc_exotic(FO, 100.0, product, steps=64, paths=50_000, seed=8)
    assert mc.control == "european"
    assert mc.control_mean == pytest.approx(float(heston_price(FO, 100.0, 100.0, 1.0)))
    assert mc.std_error < 0.04
    _close(mc, forward_start_price(FO, 100.0, product))


def test_the_forward_start_control_is_available_but_said_to_be_circular():
    product = ForwardStartOption("put", 0.5, 1.0, 0.95)
    mc = mc_exotic(FO, 100.0, product, steps=16, paths=BLOCK, control="forward_start")
    fourier = forward_start_price(FO, 100.0, product)
    assert mc.control_mean == fourier
    assert mc.price == pytest.approx(fourier, abs=1e-9)  # by construction: coefficient 1
    assert any("by construction" in note for note in mc.notes)


def test_digital_tends_to_the_black_scholes_digital_as_vol_of_vol_vanishes():
    # reference: cash e^{-rT} N(d2) (Reiner & Rubinstein 1991, cash-or-nothing), sigma^2 = v0
    # = theta, scipy.stats.norm (scipy 1.x); vol_of_vol 1e-4 leaves a negligible difference
    near_bs = HestonParams(v0=0.04, kappa=1.0, theta=0.04, vol_of_vol=1e-4, rho=-0.5)
    rate, sigma, strike, cash = 0.03, 0.2, 105.0, 10.0
    d2 = (math.log(100.0 / strike) + (rate - 0.5 * sigma**2)) / sigma
    for kind, sign in (("call", 1.0), ("put", -1.0)):
        ref = cash * math.exp(-rate) * stats.norm.cdf(sign * d2)
        product = DigitalOption(kind, strike, 1.0, cash)
        mc = mc_exotic(near_bs, 100.0, product, rate, steps=8, paths=40_000, seed=13)
        assert mc.control == "european"
        assert mc.std_error < 0.03
        _close(mc, ref)


def _over_seeds(params, product, seeds, **args):
    runs = [mc_exotic(params, 100.0, product, seed=s, **args) for s in seeds]
    controlled = np.array([r.price for r in runs])
    plain = np.array([r.uncontrolled_price for r in runs])
    reported = np.array([r.variance_reduction for r in runs])
    return controlled, plain, reported


@pytest.mark.parametrize(
    ("params", "product"),
    [
        (FO, BarrierOption("call", 100.0, 1.0, 90.0, "down", "out")),
        (FO, AsianOption("call", 100.0, MONTHLY)),
    ],
    ids=["barrier-european", "asian-geometric"],
)
def test_the_control_keeps_the_expectation_and_its_reported_reduction_is_the_real_one(
    params, product
):
    # Glasserman (2004), sec. 4.1: a pilot coefficient keeps the estimator unbiased
    seeds = range(100, 140)
    controlled, plain, reported = _over_seeds(params, product, seeds, steps=12, paths=BLOCK)
    diff = controlled - plain
    n = len(diff)
    assert abs(diff.mean()) <= K_SE * diff.std(ddof=1) / math.sqrt(n)
    empirical = plain.var(ddof=1) / controlled.var(ddof=1)
    # F-distribution bounds (scipy.stats.f) at 99.9% for a ratio of two sample variances of n
    # runs; conservative here, since the two estimates share their paths (positively correlated)
    lo, hi = stats.f.ppf([0.0005, 0.9995], n - 1, n - 1)
    assert empirical / hi <= np.median(reported) <= empirical / lo, (empirical, reported)


FAMILIES = ("euler_full", "qe", "qe_martingale", "exact_variance")


@pytest.mark.parametrize("scheme", FAMILIES)
def test_bit_identical_for_one_and_two_threads_and_two_chunk_sizes(scheme):
    product = BarrierOption("call", 100.0, 1.0, 95.0, "down", "out", rebate=1.0)
    args = {"scheme": scheme, "steps": 8, "paths": 3 * BLOCK + 200, "seed": 17}
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = mc_exotic(CASE_I, 100.0, product, chunk_paths=BLOCK, **args)
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = mc_exotic(CASE_I, 100.0, product, chunk_paths=2 * BLOCK, **args)
        big = mc_exotic(CASE_I, 100.0, product, chunk_paths=64 * BLOCK, **args)
    finally:
        numba.set_num_threads(threads)
    strip = {"elapsed_s": 0.0}
    assert dataclasses.replace(one, **strip) == dataclasses.replace(two, **strip)
    assert dataclasses.replace(one, **strip) == dataclasses.replace(big, **strip)
    other = mc_exotic(CASE_I, 100.0, product, **{**args, "seed": 18})
    assert other.price != one.price
    if scheme == "euler_full":
        assert one.negative_step_fraction > 0.0


def test_the_grid_holds_every_date_exactly():
    dates = [0.1, 0.25, 1.0 / 3.0, 1.0]
    nodes, lengths = time_grid(dates, 12)
    for d in dates:
        assert d in nodes
    assert nodes[0] == 0.0 and np.all(lengths > 0)
    assert lengths.max() <= 1.0 / 12 + 1e-12
    mc = mc_exotic(FO, 100.0, AsianOption("call", 100.0, MONTHLY), steps=12, paths=BLOCK)
    assert mc.steps == 12


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"product": "call"}, "product must be one of"),
        ({"spot": -1.0}, "spot must be > 0"),
        ({"scheme": "milstein"}, "scheme"),
        ({"steps": 0}, "steps"),
        ({"paths": 1001}, "paths must be even with antithetic=True, got 1001"),
        ({"pilot_paths": 0}, "pilot_paths"),
        ({"seed": -3}, "seed must be a whole number >= 0, got -3"),
        ({"control": "geometric_asian"}, "control must be one of"),
        ({"control": "magic"}, "control"),
        ({"antithetic": "yes"}, "antithetic must be True or False"),
        ({"params": (0.04, 1.0, 0.04, 0.5, -0.7)}, "params must be a HestonParams"),
    ],
)
def test_bad_input_is_refused_with_a_clear_message(kwargs, message):
    args = {
        "params": FO,
        "spot": 100.0,
        "product": BarrierOption("call", 100.0, 1.0, 90.0, "down", "out"),
    }
    args.update(kwargs)
    with pytest.raises(InputError, match=message):
        mc_exotic(args.pop("params"), args.pop("spot"), args.pop("product"), **args)


def _reference_nodes(scheme, p, lengths, spot, mu, gen, size, anti):
    """Log-prices at every grid node (rows) and each step's dI, by the plain numpy steps.

    The variance steps are those of tests/mc_reference.py (the numpy engine the kernels
    replaced); the log-price step follows rootvar.core.montecarlo.exotic_kernels: per step the
    scheme's variance draws, then one normal for the log-price.
    """
    make, _ = _STEPS[scheme]
    draws = _Draws([gen], [size], anti)
    acc = Accumulator(size, p.v0)
    v = np.full(size, p.v0)
    x = np.full(size, math.log(spot))
    nodes, steps_var = [x], []
    for dt in lengths:
        before = acc.int_var.copy(), acc.mart.copy(), acc.adj.copy()
        new = make(p, dt)(v, draws, acc)
        if SCHEMES[scheme].euler:
            d_int, d_mart = acc.int_var - before[0], acc.mart - before[1]
        else:
            d_int = 0.5 * dt * (v + new)
            d_mart = (new - v - p.kappa * p.theta * dt + p.kappa * d_int) / p.vol_of_vol
        z = draws.normal()
        x = x + mu * dt + (acc.adj - before[2]) - 0.5 * d_int + p.rho * d_mart
        x = x + np.sqrt(np.maximum((1.0 - p.rho**2) * d_int, 0.0)) * z
        v = new
        nodes.append(x)
        steps_var.append(d_int)
    return np.array(nodes), np.array(steps_var)


def _reference_payoff(product, nodes, steps_var, grid, rate):
    """Discounted payoffs per path from the reference paths (numpy, payoffs of products.py)."""
    at = {round(t, 12): k for k, t in enumerate(grid)}
    s = np.exp(nodes)
    disc = np.exp(-rate * product.maturity)
    if isinstance(product, AsianOption):
        return disc * product.payoff(s[[at[round(t, 12)] for t in product.fixings]].T)
    if isinstance(product, ForwardStartOption):
        return disc * product.payoff(s[at[round(product.start, 12)]], s[-1])
    pay = disc * product.payoff(s[-1])
    if not isinstance(product, BarrierOption):
        return pay
    side = 1.0 if product.direction == "down" else -1.0
    dist = side * (nodes - math.log(product.barrier))
    alive = np.ones(nodes.shape[1])
    rebate = np.zeros(nodes.shape[1])
    for k in range(1, len(grid)):
        if product.continuous:
            with np.errstate(divide="ignore", over="ignore"):  # dI = 0: no crossing
                crossing = -np.expm1(-2.0 * dist[k - 1] * dist[k] / steps_var[k - 1])
            keep = np.where((dist[k - 1] > 0) & (dist[k] > 0), crossing, 0.0)
        elif round(grid[k], 12) in {round(t, 12) for t in product.monitoring}:
            keep = (dist[k] > 0).astype(float)
        else:
            continue
        lost = alive * (1.0 - keep)
        rebate += product.rebate * lost * math.exp(-rate * grid[k])
        alive = alive - lost
    if product.knock == "in":
        return pay * (1.0 - alive) + product.rebate * alive * disc
    return pay * alive + rebate


REFERENCE_PRODUCTS = {
    "down-out-rebate": BarrierOption("call", 100.0, 1.0, 92.0, "down", "out", rebate=2.0),
    "up-in-monthly": BarrierOption("put", 100.0, 1.0, 108.0, "up", "in", 1.5, MONTHLY),
    "arithmetic": AsianOption("call", 98.0, (0.2, 0.45, 0.7, 1.0)),
    "geometric": AsianOption("put", 102.0, (0.2, 0.45, 0.7, 1.0), "geometric"),
    "forward-start": ForwardStartOption("call", 0.3, 1.0, 1.05),
    "digital": DigitalOption("put", 95.0, 1.0, 7.0),
}


@pytest.mark.parametrize("scheme", FAMILIES)
@pytest.mark.parametrize("name", list(REFERENCE_PRODUCTS))
def test_paths_and_payoffs_match_the_plain_numpy_reference(scheme, name):
    # oracle: the numpy steps of tests/mc_reference.py, bridge by -expm1 instead of 1 - exp,
    # so agreement to rounding (1e-9 relative), not bit for bit
    product = REFERENCE_PRODUCTS[name]
    rate, div, anti = 0.02, 0.01, scheme != "exact_variance"
    mc = mc_exotic(
        CASE_I, 100.0, product, rate, div, scheme=scheme, steps=10, paths=BLOCK,
        seed=31, antithetic=anti, control="none",
    )  # fmt: skip
    observed, watched = mc_exotic_module._dates(product)
    grid, lengths = time_grid(observed + watched, 10)
    assert mc.steps == lengths.size
    gen = np.random.Generator(np.random.SFC64(np.random.SeedSequence(31).spawn(1)[0]))
    nodes, steps_var = _reference_nodes(
        scheme, CASE_I, lengths, 100.0, rate - div, gen, BLOCK, anti
    )
    values = _reference_payoff(product, nodes, steps_var, grid, rate)
    assert mc.uncontrolled_price == pytest.approx(values.mean(), rel=1e-9, abs=1e-12)
