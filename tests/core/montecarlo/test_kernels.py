"""Compiled Monte Carlo kernels against the plain numpy reference; thread and chunk invariance."""

import numpy as np
import pytest
from oracles.mc_reference import reference_paths, reference_price

from rootvar.core import BLOCK, SCHEMES, HestonParams, mc_price
from rootvar.core.montecarlo.kernels import block_paths
from rootvar.core.montecarlo.schemes import kernel_constants
from rootvar.core.runtime import numba

# Andersen (2008) case I: Feller badly violated, so every Euler fix and both
# QE branches are exercised.
CASE_I = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
# sqrt, +, -, *, / are correctly rounded in numpy and in compiled code alike;
# log (QE's exponential branch and correction) may differ in the last bit.
SAME_ARITHMETIC = ("euler_absorb", "euler_reflect", "euler_partial", "euler_full", "exact_variance")


def _both(scheme, antithetic, steps=12, dt=0.1, seed=7):
    child = np.random.SeedSequence(seed).spawn(1)[0]
    gens = [np.random.Generator(np.random.SFC64(child)) for _ in range(2)]
    _, v, int_var, mart, acc = reference_paths(
        scheme, CASE_I, dt, steps, [gens[0]], [BLOCK], antithetic
    )
    info = SCHEMES[scheme]
    got = block_paths(
        gens[1],
        BLOCK,
        antithetic,
        info.kind,
        np.array(info.fmap),
        kernel_constants(info, CASE_I, dt),
        CASE_I.v0,
        steps,
    )
    want = (v, int_var, mart, acc.adj, acc.touched.sum(), acc.negative_updates, acc.adj_failed)
    return got, want, gens


@pytest.mark.parametrize("antithetic", [False, True])
@pytest.mark.parametrize("scheme", SAME_ARITHMETIC)
def test_identical_draws_give_identical_paths_to_the_last_bit(scheme, antithetic):
    got, want, gens = _both(scheme, antithetic)
    for g, w in zip(got, want, strict=True):
        np.testing.assert_array_equal(g, w)
    # both generators are left at the same point of the stream
    assert gens[0].random() == gens[1].random()


@pytest.mark.parametrize("antithetic", [False, True])
@pytest.mark.parametrize("scheme", ["qe", "qe_martingale"])
def test_qe_paths_match_the_reference_to_rounding(scheme, antithetic):
    got, want, gens = _both(scheme, antithetic)
    for g, w in zip(got[:4], want[:4], strict=True):
        np.testing.assert_allclose(g, w, rtol=1e-12, atol=1e-15)
    assert got[4:] == want[4:]  # touched paths, negative updates, failed corrections
    assert gens[0].random() == gens[1].random()


@pytest.mark.parametrize("conditional", [False, True])
@pytest.mark.parametrize("scheme", sorted(SCHEMES))
def test_prices_match_the_reference_engine(scheme, conditional):
    # Same draws; the sums and the normal cdf are formed in another order
    # (Cephes form of scipy.special.ndtr on the C library's erf/erfc), so
    # prices agree to rounding, not bit for bit.
    strikes = np.array([80.0, 100.0, 130.0])
    args = (CASE_I, 100.0, strikes, 2.0, 0.03, 0.01, "put")
    kw = dict(scheme=scheme, steps=10, paths=2 * BLOCK + 100, seed=4, antithetic=True)
    r = mc_price(*args, conditional=conditional, **kw)
    ref, se = reference_price(*args, scheme, 10, 2 * BLOCK + 100, 4, True, conditional)
    np.testing.assert_allclose(r.price, ref, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(r.std_error, se, rtol=1e-9)


@pytest.mark.parametrize("conditional, antithetic", [(True, False), (False, True)])
@pytest.mark.parametrize("scheme", sorted(SCHEMES))
def test_bit_identical_for_one_and_two_threads_and_two_chunk_sizes(scheme, conditional, antithetic):
    args = dict(
        scheme=scheme,
        steps=5,
        paths=5 * BLOCK + 678,
        seed=99,
        conditional=conditional,
        antithetic=antithetic,
    )
    strikes = [90.0, 100.0, 120.0]
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = mc_price(CASE_I, 100, strikes, 1.0, chunk_paths=BLOCK, **args)
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = mc_price(CASE_I, 100, strikes, 1.0, chunk_paths=4 * BLOCK, **args)
        two_big = mc_price(CASE_I, 100, strikes, 1.0, chunk_paths=64 * BLOCK, **args)
    finally:
        numba.set_num_threads(threads)
    for r in (two, two_big):
        np.testing.assert_array_equal(one.price, r.price)
        np.testing.assert_array_equal(one.std_error, r.std_error)
        assert one.zero_touch_fraction == r.zero_touch_fraction
        assert one.negative_step_fraction == r.negative_step_fraction
        assert one.martingale_correction_failures == r.martingale_correction_failures


def test_blocks_are_seeded_as_spawned_children_of_the_seed():
    # The engine makes block j's stream without spawning all blocks; it must be
    # SeedSequence(seed).spawn(n)[j] (numpy docs, "Parallel random number generation").
    ref, _ = reference_price(
        CASE_I, 100.0, [100.0], 1.0, 0.0, 0.0, "call", "euler_full", 3, 3 * BLOCK, 11, False, True
    )
    r = mc_price(
        CASE_I,
        100,
        100.0,
        1.0,
        scheme="euler_full",
        steps=3,
        paths=3 * BLOCK,
        seed=11,
        conditional=True,
    )
    assert r.price == pytest.approx(ref[0], rel=1e-13)
