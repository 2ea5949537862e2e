"""Heston Fourier prices: published values, the two methods, identities, bad input."""

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import rootvar.core.fourier.cos_kernels as cos_kernels
import rootvar.core.fourier.series as series
from rootvar.core import (
    FourierCheckError,
    HestonParams,
    InputError,
    bs_price,
    heston_implied_vol,
    heston_price,
    heston_price_details,
    lewis_call_price,
    mc_price,
)
from rootvar.core.fourier.characteristic import heston_log_cf

FO = HestonParams(v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)
ANDERSEN_I = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
ANDERSEN_II = HestonParams(v0=0.04, kappa=0.3, theta=0.04, vol_of_vol=0.9, rho=-0.5)
BROADIE_KAYA = HestonParams(v0=0.010201, kappa=6.21, theta=0.019, vol_of_vol=0.61, rho=-0.7)
LEWIS = HestonParams(v0=0.04, kappa=4.0, theta=0.25, vol_of_vol=1.0, rho=-0.5)
METHODS = ["cos", "contour", "quad"]


@pytest.mark.parametrize("method", METHODS)
def test_fang_oosterlee_reference_prices(method):
    # Fang & Oosterlee (2008), SIAM J. Sci. Comput. 31(2), Heston test case
    # (secondary source): 5.785155450 at T=1 (sits ~1.6e-8 above
    # high-precision values, so 1e-7) and 22.318945791 at T=10.
    assert heston_price(FO, 100, 100, 1.0, method=method) == pytest.approx(5.785155450, abs=1e-7)
    assert heston_price(FO, 100, 100, 10.0, method=method) == pytest.approx(22.318945791, abs=1e-7)


@pytest.mark.parametrize("method", METHODS)
def test_broadie_kaya_reference_price(method):
    # Broadie & Kaya (2006), Operations Research 54(2), Heston example
    # (secondary source): 6.80611331, published to 8 decimals.
    price = heston_price(BROADIE_KAYA, 100, 100, 1.0, rate=0.0319, method=method)
    assert price == pytest.approx(6.80611331, abs=1e-7)


@pytest.mark.parametrize("method", METHODS)
def test_andersen_case_one_reference_prices(method):
    # Andersen (2008), J. Computational Finance 11(3), case I (secondary source).
    prices = heston_price(ANDERSEN_I, 100, [60.0, 100.0, 140.0], 10.0, method=method)
    np.testing.assert_allclose(prices, [44.32997507, 13.08467014, 0.29577444], atol=1e-7)


@pytest.mark.parametrize("method", METHODS)
def test_andersen_case_two_reference_price(method):
    # Andersen (2008), case II (secondary source), published to 3 decimals.
    assert heston_price(ANDERSEN_II, 100, 100, 15.0, method=method) == pytest.approx(
        16.649, abs=5e-4
    )


def test_lewis_reference_prices():
    # Lewis (2019), Heston reference prices to ~20 digits (value from memory),
    # kappa=4, theta=0.25, sigma=1, rho=-0.5, v0=0.04, r=0.01, q=0.02, T=1, S=100.
    strikes = np.array([80.0, 90.0, 100.0, 110.0, 120.0])
    calls = [
        26.774758743998854,
        20.933349000596710,
        16.070154917028834,
        12.132211516709845,
        9.024913483457836,
    ]
    put_80 = 7.958878113256768
    check = heston_price(LEWIS, 100, strikes, 1.0, 0.01, 0.02, method="quad")
    np.testing.assert_allclose(check, calls, atol=1e-10)
    fast = heston_price(LEWIS, 100, strikes, 1.0, 0.01, 0.02)
    np.testing.assert_allclose(fast, calls, atol=1e-8 * 100)
    assert heston_price(LEWIS, 100, 80.0, 1.0, 0.01, 0.02, kind="put") == pytest.approx(
        put_80, abs=1e-8 * 100
    )


def _hard_box_case(rng):
    t = float(np.exp(rng.uniform(np.log(1 / 365), np.log(30))))
    p = HestonParams(
        v0=float(np.exp(rng.uniform(np.log(1e-4), 0.0))),
        kappa=float(np.exp(rng.uniform(np.log(0.05), np.log(10)))),
        theta=float(np.exp(rng.uniform(np.log(0.005), np.log(0.5)))),
        vol_of_vol=float(np.exp(rng.uniform(np.log(0.05), np.log(2.0)))),
        rho=float(rng.uniform(-0.99, 0.99)),
    )
    r, q = float(rng.uniform(-0.01, 0.08)), float(rng.uniform(0.0, 0.05))
    forward = 100 * np.exp((r - q) * t)
    k = forward * np.exp(rng.uniform(np.log(0.3), np.log(3.0), 3))
    return p, t, r, q, k


def test_methods_agree_over_the_hard_box():
    # Identity test: both certified routes (COS, and the contour route that
    # method="auto" takes for these three-strike strips) against the adaptive
    # Lewis/QUADPACK check, 1,000 seeded cases from the hard box, target
    # 1e-6 x spot (a sweep of this size found a put the range did not reach;
    # see below).
    rng = np.random.default_rng(20261201)
    worst = {"cos": 0.0, "auto": 0.0}
    for _ in range(1000):
        p, t, r, q, k = _hard_box_case(rng)
        check = lewis_call_price(p, 100, k, t, r, q)
        for method in worst:
            fast = heston_price(p, 100, k, t, r, q, method=method)
            worst[method] = max(worst[method], float(np.max(np.abs(fast - check))))
    assert max(worst.values()) <= 1e-6 * 100


def test_hard_box_corners_agree_with_the_check_method():
    # Identity test on every corner of the hard box (2^6 parameter corners x
    # 1 day and 30 years, strikes 0.3 to 3 x forward), target 1e-6 x spot.
    # At the eight 1-day corners with vol_of_vol 2 and v0 1e-4 one adaptive rule
    # over the whole integral stalls (six of them used to give up); its second
    # try on geometric pieces converges, within 1.1e-11 of both routes there.
    # The next test covers them by Monte Carlo too.
    corners = itertools.product(
        [1 / 365, 30.0], [0.05, 2.0], [1e-4, 1.0], [-0.99, 0.99], [0.05, 10.0], [0.005, 0.5]
    )
    unchecked = 0
    for t, sigma, v0, rho, kappa, theta in corners:
        p = HestonParams(v0, kappa, theta, sigma, rho)
        k = 100 * np.exp(0.02 * t) * np.array([0.3, 0.9, 1.0, 1.1, 3.0])
        fast = [heston_price(p, 100, k, t, 0.03, 0.01, method=m) for m in ("cos", "auto")]
        try:
            check = lewis_call_price(p, 100, k, t, 0.03, 0.01)
        except FourierCheckError:
            unchecked += 1
            continue
        for price in fast:
            np.testing.assert_allclose(price, check, rtol=0, atol=1e-6 * 100, err_msg=f"{p}, {t}")
    assert unchecked == 0


@pytest.mark.parametrize("theta", [0.005, 0.5])
def test_one_day_corner_agrees_with_exact_variance_monte_carlo(theta):
    # Where the check method gives up (1 day, vol_of_vol 2, rho -0.99,
    # v0 1e-4): exact variance sampling with conditioning (Broadie & Kaya
    # 2006; Willard 1997), 64 steps within the day, as the outside reference.
    p = HestonParams(v0=1e-4, kappa=0.05, theta=theta, vol_of_vol=2.0, rho=-0.99)
    t, k = 1 / 365, np.array([95.0, 100.0, 103.0])
    fast = heston_price(p, 100, k, t, 0.03, 0.01)
    mc = mc_price(
        p,
        100,
        k,
        t,
        0.03,
        0.01,
        scheme="exact_variance",
        steps=64,
        paths=100_000,
        conditional=True,
        seed=11,
    )
    assert mc.std_error[1] < 1e-5  # at the money, where the price is 1e-2
    assert np.all(np.abs(fast - mc.price) <= 4 * mc.std_error + 1e-7)


def test_strikes_beyond_the_range_still_see_the_tail():
    # Found by a wider seeded sweep of the hard box: 8 days, vol_of_vol 1.5,
    # v0 1e-4.  The near-the-money put is 28 standard deviations out of the
    # money and worth about 4e-4 through the fat left tail; a range that does
    # not reach its strike prices it at 0 on the range and on its double.
    # Reference: the adaptive check method (independent code).
    p = HestonParams(v0=1.0354e-4, kappa=0.13111, theta=0.0068699, vol_of_vol=1.53123, rho=-0.62404)
    k = np.array([96.07697517, 34.34342097, 54.54793029])
    t, r, q = 0.0228973, 0.0656823, 0.0049959
    for kind in ("call", "put"):
        fast = heston_price(p, 100, k, t, r, q, kind=kind)
        check = heston_price(p, 100, k, t, r, q, kind=kind, method="quad")
        np.testing.assert_allclose(fast, check, rtol=0, atol=1e-8 * 100)
    put = heston_price(p, 100, 96.07697517, t, r, q, kind="put")
    assert put > 1e-4  # the tail value the old range missed


@pytest.mark.parametrize("t", [0.1, 1.0, 5.0])
@pytest.mark.parametrize("params", [FO, BROADIE_KAYA, LEWIS])
def test_methods_agree_tightly_on_ordinary_cases(params, t):
    k = np.linspace(60, 160, 11)
    fast = heston_price(params, 100, k, t, 0.02, 0.01)
    check = heston_price(params, 100, k, t, 0.02, 0.01, method="quad")
    np.testing.assert_allclose(fast, check, atol=1e-8 * 100)


def test_put_call_parity_and_bounds_on_a_surface():
    k = np.linspace(30, 300, 41)
    t = np.array([1 / 365, 0.1, 1.0, 10.0, 30.0])[:, None]
    r, q = 0.03, 0.01
    c = heston_price(ANDERSEN_I, 100, k, t, r, q)
    p = heston_price(ANDERSEN_I, 100, k, t, r, q, kind="put")
    np.testing.assert_allclose(c - p, 100 * np.exp(-q * t) - k * np.exp(-r * t), atol=1e-9)
    fwd_df = 100 * np.exp(-q * t)
    assert np.all(c >= np.maximum(fwd_df - k * np.exp(-r * t), 0.0))
    assert np.all(c <= fwd_df)
    assert c.shape == (5, 41)


@settings(max_examples=25, deadline=None)
@given(
    st.floats(1e-3, 0.5),
    st.floats(0.1, 5.0),
    st.floats(0.01, 0.3),
    st.floats(0.1, 1.5),
    st.floats(-0.95, 0.5),
    st.floats(0.05, 10.0),
)
def test_calls_decrease_and_are_convex_in_strike(v0, kappa, theta, sigma, rho, t):
    # No-arbitrage (common practice, no source), up to the certified accuracy.
    p = HestonParams(v0, kappa, theta, sigma, rho)
    k = np.linspace(50, 200, 31)
    c = heston_price(p, 100, k, t)
    tol = 1e-7
    assert np.all(np.diff(c) <= tol)
    assert np.all(np.diff(c, 2) >= -tol)


def test_black_scholes_limit_as_vol_of_vol_vanishes():
    # As vol_of_vol -> 0 the variance is deterministic and the price tends to
    # Black-Scholes with the time-averaged variance (exact formula); with
    # rho = 0 the gap closes like vol_of_vol^2 (second-order expansion in
    # vol_of_vol, common practice, no source).
    v0, kappa, theta, t = 0.09, 1.2, 0.04, 2.0
    avg = theta + (v0 - theta) * (1 - np.exp(-kappa * t)) / (kappa * t)
    k = np.array([70.0, 100.0, 130.0])
    ref = bs_price(100, k, t, np.sqrt(avg), 0.02, 0.01)
    sigmas = [1e-2, 3e-3, 1e-3]
    gaps = [
        heston_price(HestonParams(v0, kappa, theta, s, 0.0), 100, k, t, 0.02, 0.01) - ref
        for s in sigmas
    ]
    scaled = [g / s**2 for g, s in zip(gaps, sigmas, strict=True)]
    np.testing.assert_allclose(scaled[1], scaled[0], rtol=0.05)
    np.testing.assert_allclose(scaled[2], scaled[0], rtol=0.05)
    assert np.max(np.abs(gaps[-1])) < 1e-5


def test_tiny_vol_of_vol_raises_instead_of_guessing():
    # Far below the hard box (vol_of_vol 1e-5) the characteristic function
    # loses digits to cancellation: the COS check fails, and so does the
    # adaptive check, which must then say so rather than return a number.
    p = HestonParams(0.09, 1.2, 0.04, 1e-5, 0.0)
    with pytest.raises(FourierCheckError, match="did not converge"):
        heston_price(p, 100, [70.0, 100.0], 2.0, 0.02, 0.01)


def test_a_strike_far_above_the_spot_is_not_left_to_cos_rounding():
    # Found by a wide sweep (issue 21): a call 82,580 x spot at 40 years was
    # 2.4e-7 low on COS against its 1e-8 certificate, the rounding of a put of
    # 8e6 (the call comes from it by parity).  COS now bounds that rounding and
    # hands the strip to the check method; the contour route prices it itself.
    # Reference: the adaptive check method (independent code); the contour
    # route agrees with it to 2e-11.
    p = HestonParams(
        v0=0.7452965008269145,
        kappa=0.9460009331471634,
        theta=0.32651028720412184,
        vol_of_vol=0.06849694506761819,
        rho=-0.513385588424156,
    )
    strike, t = 8258002.3334599, 39.82919820536923
    check = float(lewis_call_price(p, 100, strike, t)[0])
    cos = heston_price_details(p, 100, strike, t, method="cos")
    assert cos.route == "quad" and cos.fallbacks == 1 and "rounding" in str(cos.reason)
    assert abs(float(cos.price) - check) <= 1e-10 * 100
    auto = heston_price_details(p, 100, strike, t)
    assert auto.route == "contour" and abs(float(auto.price) - check) <= 1e-10 * 100
    # a strike 100 x spot still certifies on COS
    near = heston_price_details(p, 100, 1e4, t, method="cos")
    assert near.route == "cos"
    assert abs(float(near.price) - lewis_call_price(p, 100, 1e4, t)[0]) <= 1e-10 * 100


def test_vanishing_vol_of_vol_over_decades_raises_the_check_error():
    # Found by a wide sweep (issue 21): vol_of_vol 0.001 over 25 years at kappa
    # 24 raised ZeroDivisionError (the characteristic function loses its small
    # real part to cancellation, so the variance came out 0 and the range had
    # no width).  Now the range is placed by the integrated variance, COS cannot
    # certify it and the check method says it did not converge, on both routes.
    p = HestonParams(v0=0.11209, kappa=23.935, theta=0.38170, vol_of_vol=0.0010478, rho=0.62144)
    for method in ("cos", "auto"):
        with pytest.raises(FourierCheckError, match="did not converge"):
            heston_price(p, 100, [100.0, 1708.06], 24.655, method=method)


def test_large_vol_of_vol_with_tiny_variance_is_priced_by_both_routes():
    # Found by a wide sweep (issue 21): vol_of_vol 5.9 with v0 9e-6 over 2.7
    # years raised FourierCheckError: COS needs more terms than it may take,
    # and one adaptive rule over the check's integral stalls.  The check now
    # tries again on geometric pieces; the contour route certifies it alone.
    # Reference: the contour route, certified (estimate 3.3e-9), and its
    # second contour held 100 times tighter (tests/core/fourier/test_contour.py).
    p = HestonParams(v0=8.917e-6, kappa=0.15302, theta=1.6865e-4, vol_of_vol=5.8613, rho=0.43727)
    cos = heston_price_details(p, 100, 100.0, 2.7354, method="cos")
    auto = heston_price_details(p, 100, 100.0, 2.7354)
    assert cos.route == "quad" and auto.route == "contour"
    assert float(auto.price) == pytest.approx(0.00534032009, abs=1e-10)
    assert abs(float(cos.price) - float(auto.price)) <= 1e-10 * 100


def test_characteristic_function_has_no_branch_jumps():
    # Albrecher et al. (2007): the rotated form is continuous in u. A long,
    # high vol-of-vol case where the original form jumps; consecutive values on
    # a fine grid move little.
    p = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=2.0, rho=-0.9)
    u = np.linspace(0, 40, 40001)
    phi = np.exp(heston_log_cf(u, p, 30.0))
    assert np.max(np.abs(np.diff(phi))) < 1e-2


def test_real_form_sqrt_and_log_match_numpy_branches():
    # Reference: numpy's complex sqrt and log (principal branches), on every
    # quadrant, the negative real axis from both sides, and |z| near 1.
    rng = np.random.default_rng(3)
    z = rng.normal(size=4000) * 10.0 ** rng.uniform(-8, 8, 4000) + 1j * rng.normal(size=4000)
    z = np.concatenate([z, [-4 + 0j, -4 - 0j, 1 + 1e-12j, -1e-100 + 0j, 0j, 2.0 + 0j]])
    sqrt, log = np.vectorize(cos_kernels.principal_sqrt), np.vectorize(cos_kernels.principal_log)
    np.testing.assert_allclose(sqrt(z), np.sqrt(z), rtol=1e-15, atol=0)
    z = z[z != 0]
    np.testing.assert_allclose(log(z), np.log(z), rtol=1e-15, atol=1e-15)


def test_blocked_fourier_sums_match_the_direct_sum():
    # Reference: the sum written out with one numpy exponential per term.
    rng = np.random.default_rng(4)
    coef = rng.normal(size=(20000, 2)) / np.arange(1, 20001)[:, None] + 0j
    angle = np.concatenate([[0.0, np.pi], rng.uniform(0, np.pi, 5)])
    direct = np.exp(1j * np.outer(angle, np.arange(20000))) @ coef
    assert np.max(np.abs(series.fourier_sums(angle, coef) - direct)) < 1e-13
    # both sides round the argument 0.37 k (up to 7400) differently: ~1e-12
    phases = series.phases(-0.37, 20000)
    assert np.max(np.abs(phases - np.exp(-0.37j * np.arange(20000)))) < 4e-12


@pytest.mark.parametrize("series_tol", [1e-4, 1e-6])
def test_series_truncation_bound_holds_when_loosened(monkeypatch, series_tol):
    # The bound on the COS terms left out (two integrations by parts of the
    # put payoff, Fang & Oosterlee 2008 sec. 4 for the error terms) must hold
    # for a loose tolerance too, judged by the independent check method.
    k = np.array([40.0, 70.0, 100.0, 150.0, 300.0])
    for p, t in [(ANDERSEN_I, 0.25), (FO, 1 / 365), (FO, 5.0)]:
        tight = heston_price_details(p, 100, k, t, method="cos")
        with monkeypatch.context() as patch:
            patch.setattr(series, "SERIES_TOL", series_tol)
            patch.setattr(series, "RANGE_TOL", series_tol)
            loose = heston_price_details(p, 100, k, t, method="cos")
        assert loose.terms[t] < tight.terms[t]  # the bound is what sets N
        err = np.max(np.abs(loose.price - lewis_call_price(p, 100, k, t)))
        assert err <= series_tol * 100, (p, t, err)


def test_uncertifiable_cos_falls_back_to_the_check_method(monkeypatch):
    monkeypatch.setattr(series, "MAX_TERMS", 8)
    details = heston_price_details(FO, 100, [90.0, 110.0], 1.0, method="cos")
    assert details.fallbacks == 2
    assert details.route.tolist() == ["quad", "quad"] and all(details.reason)
    np.testing.assert_allclose(details.price, lewis_call_price(FO, 100, [90.0, 110.0], 1.0))


def test_heston_implied_vol_reprices_and_hides_noise():
    k = np.array([60.0, 100.0, 140.0])
    vol = heston_implied_vol(ANDERSEN_I, 100, k, 10.0)
    np.testing.assert_allclose(
        bs_price(100, k, 10.0, vol), heston_price(ANDERSEN_I, 100, k, 10.0), atol=1e-9
    )
    short = heston_implied_vol(ANDERSEN_I, 100, [100.0, 300.0], 1 / 365)
    assert short[0] > 0 and np.isnan(short[1])


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"spot": np.nan}, "spot"),
        ({"strike": -5.0}, "strike"),
        ({"maturity": -1.0}, "maturity"),
        ({"kind": "digital"}, "kind"),
        ({"method": "fft"}, "method"),
        ({"strike": np.ones(3), "maturity": np.ones(2)}, "broadcast"),
        ({"params": (0.04, 1, 0.04, 1, 0)}, "params"),
        ({"rate": np.inf}, "rate"),
    ],
)
def test_bad_input_names_the_argument(kwargs, name):
    args = {"params": FO, "spot": 100.0, "strike": 100.0, "maturity": 1.0, **kwargs}
    with pytest.raises(InputError, match=name):
        heston_price(**args)
