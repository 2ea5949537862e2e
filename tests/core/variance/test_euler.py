"""Feller ratio, Euler one-step negative probability and the largest safe step."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from rootvar.core import (
    InputError,
    euler_max_step,
    euler_negative_probability,
    feller_ratio,
    regime_label,
)

positive = st.floats(1e-3, 5.0)
small_var = st.floats(1e-4, 1.0)


def test_feller_ratio_formula_and_float_return():
    # 2 kappa theta / sigma^2 (Feller 1951; common practice, no source for the numbers)
    r = feller_ratio(1.5, 0.04, 0.5)
    assert isinstance(r, float)
    assert r == pytest.approx(2 * 1.5 * 0.04 / 0.25, rel=1e-15)
    arr = feller_ratio(np.array([1.0, 2.0]), 0.04, 0.4)
    np.testing.assert_allclose(arr, [0.5, 1.0])


def test_negative_probability_matches_normal_cdf_written_out():
    # P(v + k(th - v)dt + s sqrt(v dt) Z < 0) evaluated with scipy.stats.norm
    v, k, th, s, dt = 0.02, 1.2, 0.05, 0.9, 1 / 52
    expected = stats.norm.cdf(-(v + k * (th - v) * dt) / (s * math.sqrt(v * dt)))
    assert euler_negative_probability(v, k, th, s, dt) == pytest.approx(expected, rel=1e-14)


def test_negative_probability_matches_sampling_of_one_step():
    # Direct Monte Carlo of the step with numpy's generator as the outside reference.
    v, k, th, s, dt = 0.01, 0.5, 0.04, 1.0, 1 / 12
    z = np.random.default_rng(7).standard_normal(2_000_000)
    frac = np.mean(v + k * (th - v) * dt + s * np.sqrt(v * dt) * z < 0)
    p = euler_negative_probability(v, k, th, s, dt)
    se = math.sqrt(p * (1 - p) / z.size)
    assert abs(frac - p) < 4 * se


def test_negative_probability_is_zero_at_zero_variance():
    # At v = 0 the step is the deterministic kappa theta dt > 0.
    assert euler_negative_probability(0.0, 1.0, 0.04, 1.0, 0.1) == 0.0


def test_negative_probability_positive_for_calibrated_style_sets():
    # Fact of the trade (common practice, no source): every set gives a positive chance.
    for v0, k, th, s in [
        (0.04, 0.5, 0.04, 1.0),
        (0.0175, 1.5768, 0.0398, 0.5751),
        (0.09, 3.0, 0.09, 0.3),
    ]:
        assert euler_negative_probability(v0, k, th, s, 1 / 252) > 0


def test_negative_probability_grows_as_feller_gap_widens():
    # Common practice, no source: more negative 2 kappa theta - sigma^2, more risk.
    sig = np.linspace(0.3, 1.5, 13)
    p = euler_negative_probability(0.04, 1.0, 0.04, sig, 1 / 52)
    gap = 2 * 1.0 * 0.04 - sig**2
    order = np.argsort(gap)[::-1]
    assert np.all(np.diff(p[order]) > 0)


@settings(max_examples=200, deadline=None)
@given(small_var, positive, small_var, positive, st.floats(1e-5, 5.0))
def test_negative_probability_is_a_probability(v, k, th, s, dt):
    p = euler_negative_probability(v, k, th, s, dt)
    assert 0.0 <= p <= 1.0


def _scan_max_step(v, k, th, s, tol):
    """Brute force: first step on a fine log grid where the probability exceeds tol."""
    grid = np.logspace(-10, 3, 200_001)
    p = euler_negative_probability(v, k, th, s, grid)
    over = np.nonzero(p > tol)[0]
    if over.size == 0:
        return grid, None
    return grid, over[0]


@pytest.mark.parametrize(
    "v, k, th, s, tol",
    [
        (0.04, 0.5, 0.04, 1.0, 1e-3),  # theta = v
        (0.01, 0.5, 0.04, 1.0, 1e-3),  # theta > v: rises then falls
        (0.09, 2.0, 0.04, 0.6, 1e-4),  # theta < v
        (0.03, 3.0, 0.09, 0.3, 1e-3),  # theta > v, never breached
        (0.04, 1.0, 0.02, 0.5, 0.7),  # tolerance above one half
    ],
)
def test_max_step_agrees_with_brute_force_scan(v, k, th, s, tol):
    dt = euler_max_step(v, k, th, s, tol)
    grid, first = _scan_max_step(v, k, th, s, tol)
    if first is None:
        assert dt == math.inf
    else:
        assert grid[first - 1] <= dt * (1 + 1e-9) and dt <= grid[first] * (1 + 1e-9)
        assert euler_negative_probability(v, k, th, s, dt) == pytest.approx(tol, rel=1e-6)


def test_probability_is_not_monotone_in_step_when_theta_exceeds_v():
    # The reason euler_max_step must take the first root, not a bisection answer.
    dts = np.logspace(-4, 1, 400)
    p = euler_negative_probability(0.01, 0.5, 0.04, 1.0, dts)
    peak = np.argmax(p)
    assert 0 < peak < dts.size - 1 and p[-1] < p[peak]


@settings(max_examples=150, deadline=None)
@given(small_var, positive, small_var, st.floats(0.05, 2.0), st.floats(1e-6, 0.4))
def test_max_step_property_against_scan(v, k, th, s, tol):
    dt = euler_max_step(v, k, th, s, tol)
    grid, first = _scan_max_step(v, k, th, s, tol)
    if first is None:
        # Nothing on the grid breaches: either inf, or a breach window narrower
        # than the grid spacing (then the closed form still has it).
        if dt != math.inf:
            assert euler_negative_probability(v, k, th, s, dt) == pytest.approx(tol, rel=1e-5)
    else:
        assert grid[first - 1] <= dt * (1 + 1e-8) and dt <= grid[first] * (1 + 1e-8)
    # every step up to dt is safe
    steps = dt * np.linspace(1e-3, 1.0, 50) if dt != math.inf else grid[::1000]
    assert np.all(euler_negative_probability(v, k, th, s, steps) <= tol * (1 + 1e-7))


def test_max_step_is_infinite_at_zero_variance():
    assert euler_max_step(0.0, 1.0, 0.04, 1.0, 1e-3) == math.inf


def test_regime_labels_follow_the_ratio():
    assert regime_label(1.3) == "Feller holds"
    assert regime_label(0.7) == "mild breach"
    assert regime_label(0.3) == "marked breach"
    assert regime_label(0.05) == "severe breach"


@pytest.mark.parametrize(
    "call, name",
    [
        (lambda: feller_ratio(-0.5, 0.04, 1.0), "kappa"),
        (lambda: feller_ratio(1.0, np.nan, 1.0), "theta"),
        (lambda: feller_ratio(1.0, 0.04, np.inf), "vol_of_vol"),
        (lambda: euler_negative_probability(-0.01, 1.0, 0.04, 1.0, 0.1), "v"),
        (lambda: euler_negative_probability(0.01, 1.0, 0.04, 1.0, 0.0), "dt"),
        (lambda: euler_max_step(0.01, 1.0, 0.04, 1.0, 1.5), "tolerance"),
        (lambda: euler_max_step(0.01, 1.0, 0.04, 1.0, "x"), "tolerance"),
        (lambda: feller_ratio(np.ones(3), np.ones(2), 1.0), "kappa"),
    ],
)
def test_bad_input_names_the_argument(call, name):
    with pytest.raises(ValueError, match=name):
        call()


@settings(max_examples=100, deadline=None)
@given(
    st.one_of(
        st.just(np.nan),
        st.just(np.inf),
        st.floats(max_value=0.0),
        st.text(max_size=3),
        st.none(),
        st.booleans(),
    )
)
def test_junk_kappa_raises_input_error_naming_it(junk):
    with pytest.raises(InputError, match="kappa"):
        feller_ratio(junk, 0.04, 1.0)


# --------------------------------------------------------------- worst case of one Euler step


@settings(max_examples=200, deadline=None)
@given(
    kappa=st.floats(0.05, 10.0),
    theta=st.floats(1e-3, 0.5),
    vol_of_vol=st.floats(0.05, 3.0),
    dt=st.floats(1e-4, 0.5),
)
def test_worst_case_matches_a_fine_scan_over_variance_levels(kappa, theta, vol_of_vol, dt):
    # Brute force: the one-step probability (itself checked against scipy.stats.norm above)
    # evaluated on a fine log grid of v around the claimed peak, then refined by a golden-
    # section search on the best bracket; the closed form must be the maximum and sit there.
    from scipy.optimize import minimize_scalar

    from rootvar.core import euler_worst_case

    if kappa * dt >= 0.99:
        return  # handled by the separate test below
    prob, level = euler_worst_case(kappa, theta, vol_of_vol, dt)
    grid = level * np.logspace(-6, 6, 4001)
    scan = euler_negative_probability(grid, kappa, theta, vol_of_vol, dt)
    i = int(np.argmax(scan))
    lo, hi = np.log(grid[max(i - 1, 0)]), np.log(grid[min(i + 1, grid.size - 1)])
    best = minimize_scalar(
        lambda x: -euler_negative_probability(math.exp(x), kappa, theta, vol_of_vol, dt),
        bounds=(lo, hi),
        method="bounded",
        options={"xatol": 1e-10},
    )
    assert scan.max() <= prob * (1 + 1e-12) + 1e-300
    assert -best.fun == pytest.approx(prob, rel=1e-8, abs=1e-300)
    if prob > 1e-200:  # where the peak is not flat to a double, the argmax is the level
        assert math.exp(best.x) == pytest.approx(level, rel=1e-3)


def test_worst_case_closed_form_in_feller_ratio():
    # Phi(-sqrt(2 F (1 - kappa dt))) with scipy.stats.norm, scipy 1.x, and v* written out.
    from rootvar.core import euler_worst_case

    k, th, s, dt = 0.5, 0.04, 1.0, 1 / 252
    f = 2 * k * th / s**2
    prob, level = euler_worst_case(k, th, s, dt)
    assert prob == pytest.approx(stats.norm.cdf(-math.sqrt(2 * f * (1 - k * dt))), rel=1e-13)
    assert level == pytest.approx(k * th * dt / (1 - k * dt), rel=1e-14)
    # the risk at that level is the worst case itself (identity with the one-step formula)
    assert euler_negative_probability(level, k, th, s, dt) == pytest.approx(prob, rel=1e-12)


def test_worst_case_does_not_vanish_as_the_step_shrinks():
    # As dt -> 0 the closed form falls to Phi(-sqrt(2F)) (scipy.stats.norm), not to 0: a
    # smaller step only moves the riskiest level towards zero.
    from rootvar.core import euler_worst_case

    k, th, s = 0.5, 0.04, 1.0
    limit = stats.norm.cdf(-math.sqrt(4 * k * th / s**2))
    probs = [euler_worst_case(k, th, s, dt).probability for dt in (1 / 12, 1 / 252, 1e-6)]
    assert probs[0] > probs[1] > probs[2] >= limit
    assert probs[2] == pytest.approx(limit, rel=1e-6)


@pytest.mark.parametrize("kdt, sup", [(1.0, 0.5), (1.5, 1.0), (40.0, 1.0)])
def test_worst_case_with_kappa_dt_at_least_one_is_a_supremum_at_infinity(kdt, sup):
    # kappa dt = 1: g(v) = b / (sigma sqrt(v dt)) -> 0, Phi(0) = 1/2; above 1, g -> -inf.
    from rootvar.core import euler_worst_case

    k, th, s = 2.0, 0.04, 0.5
    dt = kdt / k
    prob, level = euler_worst_case(k, th, s, dt)
    assert prob == sup and math.isinf(level)
    far = euler_negative_probability(1e12, k, th, s, dt)
    assert far == pytest.approx(sup, abs=1e-3) and far <= sup


def test_worst_case_refuses_bad_input_naming_it():
    from rootvar.core import euler_worst_case

    with pytest.raises(InputError, match="dt must be > 0"):
        euler_worst_case(1.0, 0.04, 0.5, 0.0)
    with pytest.raises(InputError, match="vol_of_vol"):
        euler_worst_case(1.0, 0.04, -0.5, 0.01)
