"""Monte Carlo engine: reproducibility, statistics, schemes, bad input."""

import tracemalloc

import numpy as np
import pytest

from rootvar.core import (
    BLOCK,
    SCHEMES,
    HestonParams,
    InputError,
    cir_transition,
    heston_price,
    mc_price,
    step_study,
)
from rootvar.core.montecarlo.kernels import block_paths, fill_uniforms
from rootvar.core.montecarlo.schemes import kernel_constants

FO = HestonParams(v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)
FELLER_OK = HestonParams(v0=0.04, kappa=3.0, theta=0.04, vol_of_vol=0.3, rho=-0.6)  # ratio 2.67


@pytest.mark.parametrize("scheme", sorted(SCHEMES))
def test_result_depends_on_seed_not_on_chunk_size(scheme):
    args = dict(scheme=scheme, steps=6, paths=3 * BLOCK + 1234, seed=42)
    a = mc_price(FO, 100, [90.0, 110.0], 1.0, chunk_paths=BLOCK, **args)
    b = mc_price(FO, 100, [90.0, 110.0], 1.0, chunk_paths=64 * BLOCK, **args)
    c = mc_price(FO, 100, [90.0, 110.0], 1.0, chunk_paths=2 * BLOCK, **args)
    np.testing.assert_array_equal(a.price, b.price)
    np.testing.assert_array_equal(a.price, c.price)
    np.testing.assert_array_equal(a.std_error, b.std_error)
    d = mc_price(FO, 100, [90.0, 110.0], 1.0, chunk_paths=BLOCK, **{**args, "seed": 43})
    assert not np.array_equal(a.price, d.price)


@pytest.mark.parametrize("scheme", ["qe", "qe_martingale"])
def test_chunk_size_invariance_when_the_exponential_branch_is_rare(scheme):
    # QE's exponential branch (psi > 1.5) hit on some blocks and not on others
    # in the same step: every block must still consume the same draws.
    p = HestonParams(v0=0.04, kappa=3.0, theta=0.04, vol_of_vol=0.6, rho=-0.5)
    args = dict(scheme=scheme, steps=4, paths=8 * BLOCK, seed=5)
    a = mc_price(p, 100, 100.0, 1.0, chunk_paths=BLOCK, **args)
    b = mc_price(p, 100, 100.0, 1.0, chunk_paths=8 * BLOCK, **args)
    assert a.price == b.price


def test_result_carries_what_was_asked_and_a_95_percent_interval():
    r = mc_price(FO, 100, 100.0, 1.0, scheme="qe", steps=8, paths=20_000, seed=7)
    assert isinstance(r.price, float) and r.scheme == "qe" and r.steps == 8
    assert r.paths == 20_000 and r.seed == 7 and r.elapsed_s > 0
    # 1.96 standard errors either side (normal 97.5% quantile, scipy.stats.norm)
    assert r.ci_high - r.price == pytest.approx(1.959963984540054 * r.std_error)
    assert r.price - r.ci_low == pytest.approx(1.959963984540054 * r.std_error)


@pytest.mark.parametrize("scheme", sorted(SCHEMES))
def test_every_scheme_agrees_with_fourier_when_feller_holds(scheme):
    # Feller ratio 2.67, 50 steps a year: all schemes converge (Lord et al. 2010;
    # Andersen 2008); 4 standard errors and a bounded standard error.
    k = np.array([90.0, 100.0, 110.0])
    ref = heston_price(FELLER_OK, 100, k, 1.0)
    r = mc_price(
        FELLER_OK, 100, k, 1.0, scheme=scheme, steps=50, paths=40_000, conditional=True, seed=11
    )
    assert np.all(r.std_error < 0.05)  # measured 0.037 at the 90 strike
    assert np.all(np.abs(r.price - ref) <= 4 * r.std_error)


def test_standard_error_falls_like_one_over_root_paths():
    small = mc_price(FO, 100, 100.0, 1.0, steps=8, paths=10_000, seed=1)
    large = mc_price(FO, 100, 100.0, 1.0, steps=8, paths=160_000, seed=1)
    assert large.std_error / small.std_error == pytest.approx(0.25, rel=0.1)


def test_antithetic_and_conditioning_reduce_the_standard_error():
    base = mc_price(FO, 100, 100.0, 1.0, steps=16, paths=40_000, seed=3)
    anti = mc_price(FO, 100, 100.0, 1.0, steps=16, paths=40_000, seed=3, antithetic=True)
    cond = mc_price(FO, 100, 100.0, 1.0, steps=16, paths=40_000, seed=3, conditional=True)
    assert anti.std_error < 0.9 * base.std_error
    # rho = -0.57 leaves (1 - rho^2) = 0.67 of the log-price noise to condition
    # away; measured factor about 4.3 at this setting.
    assert cond.std_error < base.std_error / 3


def test_confidence_interval_covers_fourier_at_nominal_rate():
    # Unbiased setting (exact variance sampling, conditioning, 32 steps):
    # over 100 seeds the 95% interval should cover the Fourier price about 95
    # times; binomial(100, 0.95) puts 99.9% of outcomes in [88, 100].
    ref = heston_price(FO, 100, 100.0, 1.0)
    hits = 0
    for seed in range(100):
        r = mc_price(
            FO,
            100,
            100.0,
            1.0,
            scheme="exact_variance",
            steps=32,
            paths=4_000,
            seed=seed,
            conditional=True,
        )
        hits += r.ci_low <= ref <= r.ci_high
    assert 88 <= hits <= 100


def test_mirrored_uniforms_pair_exactly_and_stay_below_one():
    # numpy's Generator.random returns k 2^-53 (numpy docs, "random"); the
    # antithetic mirror must map that grid onto itself, 0 included.
    gen = np.random.Generator(np.random.SFC64(9))
    u = np.empty(BLOCK)
    fill_uniforms(gen, u, BLOCK, True)
    first, mirrored = u[: BLOCK // 2], u[BLOCK // 2 :]
    assert np.all(first + mirrored == 1.0 - 2.0**-53)
    assert np.all((mirrored >= 0.0) & (mirrored < 1.0))
    assert np.all(np.ldexp(mirrored, 53) == np.round(np.ldexp(mirrored, 53)))


@pytest.mark.parametrize("v0", [0.04, 0.0005])  # quadratic branch, exponential branch
def test_qe_one_step_matches_the_exact_law_first_two_moments(v0):
    # Andersen (2008), sec. 3.2.3: the QE draw is built to match the exact
    # conditional mean and variance (Cox, Ingersoll & Ross 1985).
    p = HestonParams(v0=v0, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
    dt = 0.125
    info = SCHEMES["qe"]
    consts, fmap = kernel_constants(info, p, dt), np.array(info.fmap)
    n = 400_000
    gens = [np.random.Generator(np.random.SFC64(s)) for s in range(n // BLOCK)]
    v1 = np.concatenate(
        [block_paths(g, BLOCK, False, info.kind, fmap, consts, v0, 1)[0] for g in gens]
    )
    law = cir_transition(v0, 0.5, 0.04, 1.0, dt)
    se_mean = np.sqrt(law.var() / v1.size)
    assert abs(v1.mean() - law.mean()) < 4 * se_mean
    # variance of the sample variance ~ (m4 - var^2)/n, estimated from the sample
    se_var = np.sqrt(np.var((v1 - v1.mean()) ** 2) / v1.size)
    assert abs(v1.var() - law.var()) < 4 * se_var


def test_qe_martingale_correction_keeps_the_forward():
    # Andersen (2008), sec. 4.3.2: with K0* the discrete price is a martingale;
    # a call struck near zero is worth S e^{-qT}.  Case I, 2 steps a year.
    p = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
    r = mc_price(
        p, 100, 1e-8, 10.0, 0.03, 0.01, scheme="qe_martingale", steps=20, paths=80_000, seed=5
    )
    assert abs(r.price - 100 * np.exp(-0.1)) < 4 * r.std_error


def test_negative_step_share_matches_its_expectation_when_feller_holds():
    # At fine steps with Feller satisfied the observed share of negative
    # Euler updates matches the one-step probability averaged over the exact
    # law; MC error from 4 independent seeds.
    p = HestonParams(v0=0.04, kappa=1.5, theta=0.04, vol_of_vol=0.3, rho=-0.5)
    shares = [
        mc_price(
            p,
            100,
            100.0,
            1.0,
            scheme="euler_absorb",
            steps=250,
            paths=20_000,
            seed=s,
            conditional=True,
        )
        for s in range(4)
    ]
    obs = np.mean([r.negative_step_fraction for r in shares])
    se = np.std([r.negative_step_fraction for r in shares], ddof=1) / 2
    expected = shares[0].expected_negative_step_fraction
    assert abs(obs - expected) < 4 * se + 0.02 * expected


def test_negative_step_share_rises_as_feller_ratio_falls():
    shares = []
    for sigma in (0.3, 0.5, 0.8, 1.2):
        r = mc_price(
            HestonParams(0.04, 1.5, 0.04, sigma, -0.5),
            100,
            100.0,
            1.0,
            scheme="euler_full",
            steps=50,
            paths=8_000,
            seed=2,
            conditional=True,
        )
        shares.append(
            (r.negative_step_fraction, r.expected_negative_step_fraction, r.zero_touch_fraction)
        )
    obs, exp, touch = map(np.array, zip(*shares, strict=True))
    assert np.all(np.diff(obs) > 0) and np.all(np.diff(exp) > 0) and np.all(np.diff(touch) >= 0)


def test_non_euler_schemes_report_no_negative_updates():
    r = mc_price(FO, 100, 100.0, 1.0, scheme="exact_variance", steps=4, paths=4_000)
    assert r.negative_step_fraction == 0.0 and r.expected_negative_step_fraction == 0.0


def test_memory_stays_bounded_as_paths_grow():
    # chunking: peak traced memory must not grow with the number of paths.
    # The kernels' arrays are per block and per thread (numba allocates them
    # outside tracemalloc's view); what the engine keeps per block (sums,
    # counts) must stay far below one double per path, which is what any
    # whole-path array would cost.
    def peak(paths):
        tracemalloc.start()
        mc_price(FO, 100, 100.0, 1.0, steps=4, paths=paths, seed=1)
        _, top = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        return top

    peak(BLOCK)  # first call outside the measurement
    small, large = 16 * BLOCK, 160 * BLOCK
    assert peak(large) - peak(small) < 1.0 * (large - small)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"steps": 2.5}, "steps"),
        ({"steps": 0}, "steps"),
        ({"paths": -10}, "paths"),
        ({"paths": "many"}, "paths"),
        ({"scheme": "milstein"}, "scheme"),
        ({"seed": -1}, "seed"),
        ({"seed": 1.5}, "seed"),
        ({"kind": "binary"}, "kind"),
        ({"strike": [[1.0]]}, "strike"),
        ({"maturity": 0.0}, "maturity"),
        ({"paths": 1001, "antithetic": True}, "paths"),
    ],
)
def test_bad_input_names_the_argument(kwargs, name):
    args = {"params": FO, "spot": 100.0, "strike": 100.0, "maturity": 1.0, **kwargs}
    with pytest.raises(InputError, match=name):
        mc_price(**args)


def test_an_unstable_euler_step_is_refused_and_a_long_step_is_flagged():
    # Explicit Euler on dv = kappa (theta - v) dt multiplies v by (1 - kappa dt) a step, which
    # grows without bound once kappa dt >= 2 (common practice, no source): partial truncation
    # and reflection keep that factor on negative values, full truncation does not.
    from rootvar.core import EuropeanOption, mc_exotic
    from rootvar.core.montecarlo.european import SchemeDivergenceError

    fast = HestonParams(0.04, 1000.0, 0.04, 0.5, -0.7)  # kappa dt = 15.6 at 64 steps a year
    for scheme in ("euler_partial", "euler_reflect"):
        with pytest.raises(SchemeDivergenceError, match=r"kappa x dt = 15\.6 >= 2"):
            mc_price(fast, 100.0, 100.0, 1.0, scheme=scheme, steps=64, paths=2_000)
        with pytest.raises(SchemeDivergenceError, match="unstable"):
            mc_exotic(fast, 100.0, EuropeanOption("call", 100.0, 1.0), scheme=scheme, paths=2_000)
    # a stable scheme still runs, and says the step is long against the mean reversion
    run = mc_price(fast, 100.0, 100.0, 1.0, scheme="qe", steps=64, paths=2_000)
    assert any("kappa x dt = 15.6 > 1" in note for note in run.notes)
    assert mc_price(FO, 100.0, 100.0, 1.0, scheme="qe", steps=64, paths=2_000).notes == ()
    # a step study keeps going: the unstable cells are biased, with their reason
    table = step_study(
        fast, 100.0, 100.0, 1.0, schemes=("euler_partial", "euler_full"), steps_grid=(64,),
        paths=2_000,
    )  # fmt: skip
    assert table["verdict"].iloc[0] == "biased" and np.isnan(table["price"].iloc[0])
    assert "euler_partial at 64 steps" in table.attrs["diverged"][0]
