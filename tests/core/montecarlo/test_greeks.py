"""Monte Carlo Greeks: same paths as the price, reproducibility, references, support, bad input."""

import dataclasses
import functools

import numpy as np
import pytest

from rootvar.core import (
    BLOCK,
    GREEK_NAMES,
    SCHEMES,
    AsianOption,
    BarrierOption,
    DigitalOption,
    EuropeanOption,
    Greeks,
    HestonParams,
    InputError,
    bs_greeks,
    desk_vega,
    heston_price,
    mc_exotic,
    mc_greeks,
    mc_price,
    pde_price,
)
from rootvar.core.runtime import numba

# Feller holds (ratio 2.67): the variance tangent's standard error stays bounded as the step
# shrinks (it does not when Feller fails: see test_feller_broken_variance_greeks_...)
OK = HestonParams(v0=0.04, kappa=3.0, theta=0.04, vol_of_vol=0.3, rho=-0.6)
# Fang & Oosterlee (2008), SIAM J. Sci. Comput. 31(2), the Heston test set (Feller violated)
FO = HestonParams(v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)
K_SE = 4.0  # |mc - ref| <= K_SE x standard error: a false alarm about 1 in 16,000 per check
VARIANCE_GREEKS = ("theta", "vega", "d_v0", "d_kappa", "d_theta", "d_vol_of_vol")
DOC = BarrierOption("call", 100.0, 1.0, 90.0, "down", "out")


def _central(f, x, h):
    """Central difference, Richardson-extrapolated: common practice, no source."""

    def d(step):
        return (f(x + step) - f(x - step)) / (2.0 * step)

    return (4.0 * d(h / 2.0) - d(h)) / 3.0


def _second(f, x, h):
    def d(step):
        return (f(x + step) - 2.0 * f(x) + f(x - step)) / step**2

    return (4.0 * d(h / 2.0) - d(h)) / 3.0


@functools.lru_cache
def fourier_greeks(params, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call"):
    """Reference Greeks: central differences of the certified COS price (rootvar.core.heston_price,
    Fang & Oosterlee 2008), Richardson-extrapolated."""

    def price(p=params, s=spot, t=maturity, r=rate, q=div_yield):
        return float(heston_price(p, s, strike, t, r, q, kind))

    out = {
        "delta": _central(lambda s: price(s=s), spot, 0.01 * spot),
        "gamma": _second(lambda s: price(s=s), spot, 0.01 * spot),
        "theta": -_central(lambda t: price(t=t), maturity, 1e-2 * maturity),
        "rho_rate": _central(lambda r: price(r=r), rate, 1e-3),
        "rho_div": _central(lambda q: price(q=q), div_yield, 1e-3),
    }
    for name, key, h in (
        ("d_v0", "v0", 1e-3),
        ("d_kappa", "kappa", 1e-2),
        ("d_theta", "theta", 1e-3),
        ("d_vol_of_vol", "vol_of_vol", 1e-2),
        ("d_rho", "rho", 1e-2),
    ):
        bumped = lambda x, key=key: price(p=dataclasses.replace(params, **{key: x}))  # noqa: E731
        out[name] = _central(bumped, getattr(params, key), h)
    out["vega"] = desk_vega(params.v0, params.theta, out["d_v0"], out["d_theta"])
    return out


def _within(greeks, reference, names, k=K_SE):
    for name in names:
        value, error = greeks.values[name], greeks.errors[name]
        assert abs(value - reference[name]) <= k * error, (name, value, reference[name], error)


# --- the same paths as the price -------------------------------------------------------------


@pytest.mark.parametrize(
    "scheme", ["euler_full", "euler_reflect", "qe", "qe_martingale", "exact_variance"]
)
@pytest.mark.parametrize("antithetic", [True, False])
def test_a_european_prices_to_the_bit_what_mc_price_conditional_prices(scheme, antithetic):
    # more than 8 blocks: numpy's summation order over the blocks must be mc_price's too
    args = {"scheme": scheme, "paths": 9 * BLOCK + 1000, "seed": 5, "antithetic": antithetic}
    g = mc_greeks(FO, 100.0, EuropeanOption("put", 95.0, 0.75), 0.02, 0.01, steps=8, **args)
    n_steps = 6  # ceil(8 x 0.75)
    mc = mc_price(
        FO, 100.0, 95.0, 0.75, 0.02, 0.01, "put", steps=n_steps, conditional=True, **args,
    )  # fmt: skip
    assert g.price == mc.price
    assert g.price_error == mc.std_error
    assert f"steps={n_steps}" in g.notes[0]


@pytest.mark.parametrize("scheme", ["euler_full", "qe"])
@pytest.mark.parametrize(
    "product",
    [
        DOC,
        BarrierOption("put", 100.0, 0.5, 112.0, "up", "in", rebate=1.5),
        DigitalOption("call", 102.0, 1.0, 5.0),
    ],
    ids=["doc", "uip-rebate", "digital"],
)
@pytest.mark.parametrize("antithetic", [True, False])
def test_a_barrier_or_digital_prices_to_the_bit_what_mc_exotic_prices(scheme, product, antithetic):
    args = {"scheme": scheme, "steps": 24, "paths": 9 * BLOCK + 1000, "seed": 8}
    args["antithetic"] = antithetic
    g = mc_greeks(FO, 100.0, product, 0.02, 0.01, **args)
    plain = mc_exotic(FO, 100.0, product, 0.02, 0.01, control="none", **args)
    assert g.price == plain.price and g.price_error == plain.std_error
    # the control's pilot draws from a stream of its own: the main paths are the same
    assert g.price == mc_exotic(FO, 100.0, product, 0.02, 0.01, **args).uncontrolled_price


@pytest.mark.parametrize(
    "product", [EuropeanOption("call", 100.0, 1.0), DOC], ids=["european", "doc"]
)
def test_bit_identical_for_one_and_two_threads_and_any_chunk_size(product):
    args = {"steps": 16, "paths": 3 * BLOCK + 200, "seed": 17}
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = mc_greeks(OK, 100.0, product, chunk_paths=BLOCK, **args)
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = mc_greeks(OK, 100.0, product, chunk_paths=2 * BLOCK, **args)
        big = mc_greeks(OK, 100.0, product, chunk_paths=64 * BLOCK, **args)
    finally:
        numba.set_num_threads(threads)
    assert one == two == big
    other = mc_greeks(OK, 100.0, product, **{**args, "seed": 18})
    assert other.values["delta"] != one.values["delta"]


# --- against references ----------------------------------------------------------------------


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize(("kind", "strike"), [("call", 105.0), ("put", 90.0)])
def test_european_greeks_agree_with_fourier_within_k_standard_errors(seed, kind, strike):
    # reference: central differences of the certified COS price (heston_price), Richardson
    product = EuropeanOption(kind, strike, 1.0)
    g = mc_greeks(OK, 100.0, product, 0.02, 0.01, paths=100_000, steps=64, seed=seed)
    ref = fourier_greeks(OK, 100.0, strike, 1.0, 0.02, 0.01, kind)
    _within(g, ref, GREEK_NAMES)
    # the bound that keeps the test from passing by noise: twice the errors measured on
    # seed 1 (calls and puts alike), so a run twice as noisy fails
    bounds = {
        "delta": 5e-4, "gamma": 5e-5, "theta": 0.012, "vega": 0.15, "rho_rate": 0.06,
        "rho_div": 0.05, "d_v0": 0.1, "d_kappa": 0.003, "d_theta": 0.25, "d_vol_of_vol": 0.05,
        "d_rho": 0.05,
    }  # fmt: skip
    for name, bound in bounds.items():
        assert g.errors[name] < bound, (name, g.errors[name])
    assert abs(g.price - float(heston_price(OK, 100.0, strike, 1.0, 0.02, 0.01, kind))) <= (
        K_SE * g.price_error
    )


@pytest.mark.parametrize("rho", [0.0, -0.5])
def test_as_vol_of_vol_vanishes_with_v0_at_theta_the_greeks_are_black_scholes(rho):
    # reference: Black-Scholes Greeks at vol sqrt(theta) (rootvar.core.bs_greeks, Black &
    # Scholes 1973).  The variance stays at theta; with rho = 0 the conditional estimator has
    # no noise left, with rho != 0 the correlated part rho M of the log-price still varies
    p = HestonParams(v0=0.04, kappa=2.0, theta=0.04, vol_of_vol=1e-6, rho=rho)
    g = mc_greeks(p, 100.0, EuropeanOption("call", 110.0, 0.5), 0.03, 0.01, paths=20_000, steps=16)
    bs = bs_greeks(100.0, 110.0, 0.5, 0.2, 0.03, 0.01, "call")
    names = ("delta", "gamma", "theta", "vega", "rho_rate", "rho_div")
    if rho == 0.0:
        for name in names:
            assert g.values[name] == pytest.approx(bs[name], rel=1e-5, abs=1e-9), name
    else:
        _within(g, bs, names)
        assert g.errors["delta"] < 2e-3 and g.errors["vega"] < 0.2


def test_down_and_out_call_greeks_agree_with_the_pde():
    # reference: pde_price (ADI, in 't Hout & Foulon 2010) delta, gamma and variance
    # sensitivity on its finest grid, vega by central differences of its price in theta;
    # Monte Carlo with the bridge (Glasserman 2004, sec. 6.4) at 256 steps a year
    pde = pde_price(OK, 100.0, DOC)
    assert pde.converged

    def in_theta(theta):
        return pde_price(dataclasses.replace(OK, theta=theta), 100.0, DOC).price

    d_theta = (in_theta(0.041) - in_theta(0.039)) / 0.002
    ref = {
        "delta": pde.delta,
        "gamma": pde.gamma,
        "d_v0": pde.variance_sensitivity,
        "vega": desk_vega(OK.v0, OK.theta, pde.variance_sensitivity, d_theta),
    }
    g = mc_greeks(OK, 100.0, DOC, paths=200_000, seed=4)
    _within(g, ref, ref)
    for name, bound in {"delta": 0.006, "gamma": 0.006, "d_v0": 0.6, "vega": 0.4}.items():
        assert g.errors[name] < bound, (name, g.errors[name])
    # the gamma's second (likelihood-ratio) estimator is weighed in, cross-fitted
    assert "likelihood ratio" in g.estimators["gamma"]
    assert "cross-fitted" in g.estimators["gamma"] and "pilot" not in g.estimators["gamma"]


@functools.lru_cache
def _doc_pde():
    return pde_price(OK, 100.0, DOC)


@pytest.mark.parametrize("seed", range(10, 16))
def test_the_cross_fitted_barrier_delta_and_gamma_agree_with_the_pde_over_seeds(seed):
    # reference: pde_price (ADI, in 't Hout & Foulon 2010) on its finest grid.  Each half's
    # weight is fitted on the other half's paths (Nelson 1990), so the combination has the
    # mean of its pathwise estimator: over these seeds delta and gamma stay within K_SE
    # standard errors of the PDE, as the pathwise estimators do
    pde = _doc_pde()
    g = mc_greeks(OK, 100.0, DOC, paths=40_000, seed=seed)
    _within(g, {"delta": pde.delta, "gamma": pde.gamma}, ("delta", "gamma"))


def test_the_cross_fitted_pooled_over_seeds_is_unbiased_to_a_tighter_band():
    # reference: pde_price, as above.  The mean of 6 independent seeds has an error
    # sqrt(sum se^2) / 6; a bias of the combination (as a weight fitted on its own paths
    # would give) would show against this tighter band first
    pde = _doc_pde()
    runs = [mc_greeks(OK, 100.0, DOC, paths=40_000, seed=seed) for seed in range(10, 16)]
    for name, ref in (("delta", pde.delta), ("gamma", pde.gamma)):
        mean = np.mean([g.values[name] for g in runs])
        error = np.sqrt(np.sum([g.errors[name] ** 2 for g in runs])) / len(runs)
        assert abs(mean - ref) <= K_SE * error, (name, mean, ref, error)


def test_a_one_block_barrier_run_gives_the_likelihood_ratio_weight_0_and_says_so():
    # one block has no second half to fit a weight on: the pathwise estimator alone
    g = mc_greeks(OK, 100.0, DOC, paths=BLOCK, steps=16, seed=3)
    for name in ("delta", "gamma"):
        assert "weight 0: one block, nothing to cross-fit" in g.estimators[name]
    assert any(note.startswith("delta and gamma: one block of paths") for note in g.notes)
    # two blocks: cross-fitted, and no such note
    two = mc_greeks(OK, 100.0, DOC, paths=2 * BLOCK, steps=16, seed=3)
    assert "cross-fitted weights" in two.estimators["delta"]
    assert not any(note.startswith("delta and gamma: one block") for note in two.notes)


def test_the_cross_fitted_combination_is_the_formula_on_the_two_halves_run_apart(monkeypatch):
    # Each half recomputed from its own blocks, run one by one through the kernel from
    # their own streams (the blocks of SeedSequence(seed), children j = 0, 2, ... and
    # 1, 3, ...): beta_E from O's moments and beta_O from E's, each half's
    # mean(A) - beta (mean(A) - mean(B)), their path-weighted average, and the error
    # sqrt(n_E var_E(beta_O) + n_O var_O(beta_E)) / n (Nelson 1990; Glasserman 2004,
    # sec. 4.1), against mc_greeks
    from rootvar.core.montecarlo import greeks as greeks_module
    from rootvar.core.montecarlo import greeks_kernels as gk
    from rootvar.core.montecarlo.european import block_seed

    seen = []
    kernel = greeks_module.exotic_greeks_block

    def spy(gen, size, anti, *args):
        seen.append((size, anti, args))
        return kernel(gen, size, anti, *args)

    monkeypatch.setattr(greeks_module, "exotic_greeks_block", spy)
    monkeypatch.setattr(greeks_module, "notice_if_cold", lambda *kernels: None)
    paths, seed = 5 * BLOCK + 1000, 21  # 6 blocks, the last short: halves of 3 blocks
    g = mc_greeks(FO, 100.0, DOC, 0.02, 0.01, paths=paths, steps=32, seed=seed)
    monkeypatch.undo()
    _, anti, args = seen[0]
    sizes = [BLOCK] * 5 + [1000]
    root = np.random.SeedSequence(seed)

    def half(parity):
        rows = []
        for j in range(parity, len(sizes), 2):
            gen = np.random.Generator(np.random.SFC64(block_seed(root, j)))
            sums, squares, counts = kernel(gen, sizes[j], anti, *args)
            rows.append((sums, squares, counts[0]))
        sums = np.sum([r[0] for r in rows], axis=0)
        squares = np.sum([r[1] for r in rows], axis=0)
        return sums, squares, int(np.sum([r[2] for r in rows]))

    halves = [half(0), half(1)]
    n = sum(h[2] for h in halves)
    assert n == paths // 2  # antithetic pairs

    def stats(h, a, b, j):
        sums, squares, m = h
        mean_a, mean_b = sums[a] / m, sums[b] / m
        var_a = (squares[a] / m - mean_a**2) * m / (m - 1)
        var_b = (squares[b] / m - mean_b**2) * m / (m - 1)
        cov = (sums[gk.N_Q + j] / m - mean_a * mean_b) * m / (m - 1)
        return m, mean_a, mean_b, var_a, var_b, cov

    for j, (a, b) in enumerate(gk.CROSS):
        even, odd = stats(halves[0], a, b, j), stats(halves[1], a, b, j)

        def beta(h):
            _, _, _, var_a, var_b, cov = h
            return (var_a - cov) / (var_a + var_b - 2.0 * cov)

        def combined(h, weight):
            m, mean_a, mean_b, var_a, var_b, cov = h
            var = var_a - 2.0 * weight * (var_a - cov) + weight**2 * (var_a + var_b - 2.0 * cov)
            return mean_a - weight * (mean_a - mean_b), var, m

        value_e, var_e, n_e = combined(even, beta(odd))
        value_o, var_o, n_o = combined(odd, beta(even))
        name = gk.QUANTITIES[a]
        assert g.values[name] == pytest.approx((n_e * value_e + n_o * value_o) / n, rel=1e-10)
        assert g.errors[name] == pytest.approx(np.sqrt(n_e * var_e + n_o * var_o) / n, rel=1e-8)
        weights = f"cross-fitted weights {beta(odd):.3g}, {beta(even):.3g})"
        assert weights in g.estimators[name]


def test_down_and_out_greeks_under_qe_with_feller_broken_agree_with_the_pde():
    # reference: pde_price, as above; the Fang & Oosterlee set breaks Feller, QE gives
    # delta, gamma and the rates' rhos (no variance tangent)
    pde = pde_price(FO, 100.0, DOC)
    g = mc_greeks(FO, 100.0, DOC, scheme="qe", paths=100_000, seed=6)
    _within(g, {"delta": pde.delta, "gamma": pde.gamma}, ("delta", "gamma"))
    assert g.errors["delta"] < 0.006 and g.errors["gamma"] < 0.008
    assert not set(VARIANCE_GREEKS) & set(g.values)


def test_digital_greeks_agree_with_fourier():
    # reference: the digital as minus the strike derivative of the certified COS call price
    # (central differences of heston_price), then central differences of that in each input
    cash, strike = 10.0, 105.0

    def digital(p=OK, s=100.0, t=1.0):
        h = 1e-3
        up, down = heston_price(p, s, [strike + h, strike - h], t, 0.02, 0.01)
        return cash * float(down - up) / (2 * h)

    ref = {
        "delta": _central(lambda s: digital(s=s), 100.0, 1.0),
        "gamma": _second(lambda s: digital(s=s), 100.0, 1.0),
        "theta": -_central(lambda t: digital(t=t), 1.0, 1e-2),
        "d_v0": _central(lambda v: digital(p=dataclasses.replace(OK, v0=v)), OK.v0, 1e-3),
    }
    g = mc_greeks(
        OK, 100.0, DigitalOption("call", strike, 1.0, cash), 0.02, 0.01, paths=100_000, steps=256
    )
    _within(g, ref, ref)
    assert g.errors["delta"] < 5e-4 and g.errors["gamma"] < 5e-5 and g.errors["d_v0"] < 0.03
    assert "conditional" in g.estimators["delta"]


def test_feller_broken_variance_greeks_stay_unbiased_but_their_error_grows_with_the_steps():
    # reference: fourier_greeks above.  With 2 kappa theta < vol_of_vol^2 the tangent's
    # 1 / (2 sqrt(v)) near zero makes the pathwise estimator's variance grow as the step
    # shrinks (its continuous limit has infinite variance); the reported error shows it
    ref = fourier_greeks(FO, 100.0, 100.0, 1.0)
    coarse = mc_greeks(FO, 100.0, EuropeanOption("call", 100.0, 1.0), paths=100_000, steps=32)
    fine = mc_greeks(FO, 100.0, EuropeanOption("call", 100.0, 1.0), paths=100_000, steps=256)
    _within(coarse, ref, ("d_v0", "d_theta"))
    _within(fine, ref, ("d_v0", "d_theta"))
    assert fine.errors["d_v0"] > 1.5 * coarse.errors["d_v0"]


# --- what is given, and how -----------------------------------------------------------------


@pytest.mark.parametrize("scheme", sorted(SCHEMES))
@pytest.mark.parametrize(
    "product", [EuropeanOption("call", 100.0, 1.0), DOC], ids=["european", "doc"]
)
def test_each_scheme_gives_the_greeks_it_can_and_says_why_not_the_others(scheme, product):
    g = mc_greeks(FO, 100.0, product, scheme=scheme, steps=8, paths=2 * BLOCK)
    assert isinstance(g, Greeks) and g.method == "monte_carlo"
    assert set(g.values) == set(g.errors) == set(g.estimators)
    expected = set(GREEK_NAMES)
    if not SCHEMES[scheme].euler:
        expected -= set(VARIANCE_GREEKS)
    if scheme == "qe_martingale":
        expected -= {"d_rho"}
    assert set(g.values) == expected
    for name in set(GREEK_NAMES) - expected:
        assert any(note.startswith(f"{name} not given") for note in g.notes)
    assert all(np.isfinite(g.values[n]) and g.errors[n] > 0.0 for n in expected)


def test_vega_is_the_desks_mapping_of_the_two_variance_sensitivities():
    g = mc_greeks(OK, 100.0, EuropeanOption("call", 100.0, 1.0), paths=2 * BLOCK, steps=8)
    assert g.values["vega"] == pytest.approx(
        desk_vega(OK.v0, OK.theta, g.values["d_v0"], g.values["d_theta"]), rel=1e-12
    )


def test_a_strike_with_maturity_and_kind_is_the_european():
    a = mc_greeks(OK, 100.0, 95.0, maturity=0.5, kind="put", paths=2 * BLOCK, steps=8)
    b = mc_greeks(OK, 100.0, EuropeanOption("put", 95.0, 0.5), paths=2 * BLOCK, steps=8)
    assert a == b


def test_an_already_knocked_barrier_is_exact():
    out = BarrierOption("call", 100.0, 1.0, 105.0, "down", "out", rebate=3.0)
    g = mc_greeks(OK, 100.0, out, paths=2 * BLOCK)
    assert g.price == 3.0 and set(g.values.values()) == {0.0} and "already knocked" in g.notes[0]
    knock_in = dataclasses.replace(out, knock="in", rebate=0.0)
    g = mc_greeks(OK, 100.0, knock_in, paths=2 * BLOCK, steps=8)
    vanilla = mc_greeks(OK, 100.0, EuropeanOption("call", 100.0, 1.0), paths=2 * BLOCK, steps=8)
    assert g.values == vanilla.values and "already knocked" in g.notes[0]


@pytest.mark.parametrize(
    ("args", "kwargs", "name"),
    [
        ((HestonParams(0.04, 1.0, 0.04, 0.5, -1.0), 100.0, DOC), {}, "rho"),
        ((OK, -1.0, DOC), {}, "spot"),
        ((OK, 100.0, dataclasses.replace(DOC, monitoring=(0.5, 1.0))), {}, "product"),
        ((OK, 100.0, AsianOption("call", 100.0, (0.5, 1.0))), {}, "product"),
        ((OK, 100.0, 100.0), {}, "maturity"),
        ((OK, 100.0, EuropeanOption("call", 100.0, 1.0)), {"maturity": 1.0}, "maturity"),
        ((OK, 100.0, 100.0), {"maturity": 1.0, "kind": "straddle"}, "kind"),
        ((OK, 100.0, DOC), {"scheme": "milstein"}, "scheme"),
        ((OK, 100.0, DOC), {"steps": 0}, "steps"),
        ((OK, 100.0, DOC), {"paths": 50}, "paths"),
        ((OK, 100.0, DOC), {"paths": 1001}, "paths"),
        ((OK, 100.0, DOC), {"seed": -1}, "seed"),
        ((OK, 100.0, DOC), {"antithetic": "yes"}, "antithetic"),
        ((OK, 100.0, DOC, float("nan")), {}, "rate"),
        (("params", 100.0, DOC), {}, "params"),
    ],
)
def test_bad_input_names_the_argument(args, kwargs, name):
    with pytest.raises(InputError, match=rf"^{name} "):
        mc_greeks(*args, **kwargs)


# --- the false-alarm rate of a k = 3 band ----------------------------------------------------


@pytest.mark.slow
def test_false_alarm_rate_of_a_three_standard_error_band_over_seeds():
    # reference: fourier_greeks (certified COS, central differences).  100 seeds of a modest
    # run (20,000 paths, 64 steps, Feller holding): a |z| > 3 band has a nominal two-sided
    # rate of 0.27% per Greek and seed (scipy.stats.norm.sf(3) x 2).  Measured on this case
    # (seeds 0-999, by hand): 37 alarms in 11,000 checks (0.34%), d_v0 12 of 1,000 (its
    # Euler discretisation bias is +0.76 standard errors at 20,000 paths), the others 1-5;
    # seeds 0-99 give 6.  A Greek alarming on 5 or more of 100 seeds (binomial tail below
    # 1e-4 at the nominal rate) would be a biased or mis-scaled error.
    ref = fourier_greeks(OK, 100.0, 105.0, 1.0, 0.02, 0.01)
    alarms = dict.fromkeys(GREEK_NAMES, 0)
    for seed in range(100):
        g = mc_greeks(
            OK,
            100.0,
            EuropeanOption("call", 105.0, 1.0),
            0.02,
            0.01,
            paths=20_000,
            steps=64,
            seed=seed,
        )
        for name in GREEK_NAMES:
            alarms[name] += abs(g.values[name] - ref[name]) > 3.0 * g.errors[name]
    assert max(alarms.values()) <= 4, alarms
    assert sum(alarms.values()) <= 12, alarms  # 1,100 checks, 3 expected
