"""The exact CIR transition law and the stationary law."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from rootvar.core import TINY_VARIANCE, cir_stationary, cir_transition


def cir_mean(v0, k, th, t):
    # Cox, Ingersoll & Ross (1985), Econometrica 53(2), eq. (19): conditional mean.
    return th + (v0 - th) * np.exp(-k * t)


def cir_var(v0, k, th, s, t):
    # Cox, Ingersoll & Ross (1985), Econometrica 53(2), eq. (19): conditional variance.
    e = np.exp(-k * t)
    return v0 * s**2 * e * (1 - e) / k + th * s**2 * (1 - e) ** 2 / (2 * k)


@pytest.mark.parametrize("ratio", [0.05, 0.2, 0.5, 1.0, 2.0, 5.0])
@pytest.mark.parametrize("v0", [0.0, 0.001, 0.04, 0.3])
@pytest.mark.parametrize("t", [0.01, 0.5, 3.0, 20.0])
def test_moments_match_cir_closed_form(ratio, v0, t):
    k, th = 1.3, 0.05
    s = math.sqrt(2 * k * th / ratio)
    law = cir_transition(v0, k, th, s, t)
    assert law.mean() == pytest.approx(cir_mean(v0, k, th, t), rel=1e-12)
    assert law.var() == pytest.approx(cir_var(v0, k, th, s, t), rel=1e-12)


def test_frozen_law_offers_the_scipy_methods():
    law = cir_transition(0.04, 1.5, 0.04, 0.6, 1.0)
    x = law.ppf(0.3)
    assert law.cdf(x) == pytest.approx(0.3, rel=1e-12)
    assert law.sf(x) == pytest.approx(0.7, rel=1e-12)
    assert law.pdf(x) > 0
    assert law.rvs(size=5, random_state=1).shape == (5,)


@pytest.mark.parametrize("v0, k, th, s", [(0.04, 2.0, 0.05, 0.35), (0.04, 1.0, 0.04, 0.4)])
def test_transition_law_matches_fine_step_euler_simulation(v0, k, th, s):
    # Glasserman (2003), Monte Carlo Methods in Financial Engineering, sec. 3.4:
    # v_t is a scaled noncentral chi-square.  The check is an independent
    # full-truncation Euler simulation with 2000 steps, Kolmogorov-Smirnov
    # test at the 0.1% level (scipy.stats.kstest).
    t, n_steps, n_paths = 1.0, 2000, 20_000
    rng = np.random.default_rng(20261201)
    v = np.full(n_paths, v0)
    dt = t / n_steps
    for _ in range(n_steps):
        vp = np.maximum(v, 0.0)
        v = v + k * (th - vp) * dt + s * np.sqrt(vp * dt) * rng.standard_normal(n_paths)
    v = np.maximum(v, 0.0)
    law = cir_transition(v0, k, th, s, t)
    assert stats.kstest(v, law.cdf).pvalue > 1e-3


def test_transition_law_composes_over_many_exact_steps_when_feller_fails():
    # Markov consistency: 200 chained exact steps drawn with numpy's own
    # noncentral chi-square generator (independent code) against the one-step
    # law at the horizon; Feller ratio 0.2.  KS test at the 0.1% level.
    v0, k, th, s, t, n = 0.04, 1.0, 0.04, math.sqrt(2 * 0.04 / 0.2), 2.0, 200
    h = t / n
    c = s**2 * (1 - math.exp(-k * h)) / (4 * k)
    df = 4 * k * th / s**2
    rng = np.random.default_rng(5)
    v = np.full(20_000, v0)
    for _ in range(n):
        v = c * rng.noncentral_chisquare(df, v * math.exp(-k * h) / c)
    assert stats.kstest(v, cir_transition(v0, k, th, s, t).cdf).pvalue > 1e-3


@pytest.mark.parametrize("k, th, s", [(1.5, 0.04, 0.3), (0.5, 0.04, 1.0), (2.0, 0.1, 2.0)])
def test_long_horizon_converges_to_stationary_gamma(k, th, s):
    # Cox, Ingersoll & Ross (1985): stationary law Gamma(2 k th / s^2, s^2 / (2 k)),
    # compared here with scipy.stats.gamma written out independently.
    q = np.array([0.05, 0.25, 0.5, 0.75, 0.95])
    far = cir_transition(0.3, k, th, s, 60.0 / k).ppf(q)
    ref = stats.gamma(2 * k * th / s**2, scale=s**2 / (2 * k)).ppf(q)
    np.testing.assert_allclose(far, ref, rtol=1e-9)
    np.testing.assert_allclose(cir_stationary(k, th, s).ppf(q), ref, rtol=1e-14)


def test_mass_near_zero_follows_the_feller_ratio():
    # Common practice, no source: with ratio >= 1 the variance stays away from
    # zero; below 1, P(v_t < small level) rises as the ratio falls (mean fixed).
    k, th, t, level = 1.0, 0.04, 2.0, 1e-4
    ratios = [3.0, 1.5, 1.0, 0.7, 0.4, 0.2, 0.1]
    p = [cir_transition(th, k, th, math.sqrt(2 * k * th / r), t).cdf(level) for r in ratios]
    assert p[0] < 1e-6
    assert np.all(np.diff(p) > 0)
    assert p[-1] > 0.3


@pytest.mark.parametrize("ratio", [0.02, 0.01, 0.005])
def test_far_left_quantiles_keep_full_precision(ratio):
    # ppf checked against cdf where scipy's own ppf gives NaN or garbage.
    k, th, t = 1.0, 0.04, 1.0
    law = cir_transition(0.04, k, th, math.sqrt(2 * k * th / ratio), t)
    levels = np.array([1e-8, 1e-6, 1e-4, 1e-3, 0.01, 0.05, 0.2])
    x = law.ppf(levels)
    assert not np.any(np.isnan(x))
    ok = x > 0
    assert ok.any() and (~ok).any()  # some underflow, some do not
    np.testing.assert_allclose(law.cdf(x[ok]), levels[ok], rtol=1e-8)
    assert np.all(x[ok] >= TINY_VARIANCE)
    # where it returned 0.0 the true quantile is below the smallest normal double
    assert np.all(law.cdf(TINY_VARIANCE) >= levels[~ok])


def test_scipy_alone_returns_nan_where_rootvar_returns_a_number():
    # The regression this code exists for (scipy.stats.ncx2, scipy 1.17):
    # Feller ratio 0.005: near the underflow limit scipy's quantile is NaN or
    # a number whose cdf is not the level asked for.
    law = cir_transition(0.04, 1.0, 0.04, 4.0, 1.0)
    df, nc, _ = law.args
    levels = np.array([1e-3, 0.01, 0.02, 0.05, 0.1])
    raw = stats.ncx2.ppf(levels, df, nc)
    wrong = np.isnan(raw) | ~np.isclose(stats.ncx2.cdf(raw, df, nc), levels, rtol=1e-6)
    assert wrong.any()
    ours = law.ppf(levels)
    assert not np.isnan(ours).any()
    pos = ours > 0
    assert pos.any() and (~pos).any()
    np.testing.assert_allclose(law.cdf(ours[pos]), levels[pos], rtol=1e-8)
    assert np.all(law.cdf(TINY_VARIANCE) >= levels[~pos])


def test_central_case_at_zero_initial_variance():
    # v0 = 0: central chi-square, checked with scipy.stats.chi2.
    k, th, s, t = 1.0, 0.04, 0.5, 1.0
    c = s**2 * (1 - math.exp(-k * t)) / (4 * k)
    ref = stats.chi2(4 * k * th / s**2, scale=c)
    law = cir_transition(0.0, k, th, s, t)
    q = np.array([1e-4, 0.1, 0.5, 0.9])
    np.testing.assert_allclose(law.ppf(q), ref.ppf(q), rtol=1e-10)


@settings(max_examples=80, deadline=None)
@given(
    st.floats(1e-4, 1.0),
    st.floats(0.05, 10.0),
    st.floats(0.005, 0.5),
    st.floats(0.05, 2.0),
    st.floats(0.01, 30.0),
)
def test_quantiles_are_monotone_and_probabilities_bounded(v0, k, th, s, t):
    law = cir_transition(v0, k, th, s, t)
    levels = np.array([1e-6, 1e-3, 0.01, 0.1, 0.5, 0.9, 0.999])
    x = law.ppf(levels)
    assert not np.any(np.isnan(x))
    assert np.all(np.diff(x) >= 0)
    p = law.cdf(x)
    assert np.all((p >= 0) & (p <= 1))


@pytest.mark.parametrize(
    "args, name",
    [
        ((-0.1, 1, 0.04, 1, 1), "v0"),
        ((0.04, 0, 0.04, 1, 1), "kappa"),
        ((0.04, 1, -0.04, 1, 1), "theta"),
        ((0.04, 1, 0.04, np.nan, 1), "vol_of_vol"),
        ((0.04, 1, 0.04, 1, 0.0), "t"),
    ],
)
def test_bad_input_names_the_argument(args, name):
    with pytest.raises(ValueError, match=name):
        cir_transition(*args)
