"""Black-Scholes prices and implied volatility."""

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy import stats

from rootvar.core import InputError, bs_greeks, bs_price, implied_vol, implied_vol_reason


def test_hull_worked_example():
    # Hull, Options, Futures, and Other Derivatives (worked example in the
    # Black-Scholes chapter): S=42, K=40, r=10%, sigma=20%, T=0.5 -> call 4.76,
    # put 0.81 (value from memory, to the cent as printed).
    assert bs_price(42, 40, 0.5, 0.2, 0.10) == pytest.approx(4.76, abs=0.005)
    assert bs_price(42, 40, 0.5, 0.2, 0.10, kind="put") == pytest.approx(0.81, abs=0.005)


def _textbook(s, k, t, v, r, q, kind):
    # Black & Scholes (1973) / Merton (1973) formula written with scipy.stats.norm.
    d1 = (np.log(s / k) + (r - q + 0.5 * v * v) * t) / (v * np.sqrt(t))
    d2 = d1 - v * np.sqrt(t)
    if kind == "call":
        return s * np.exp(-q * t) * stats.norm.cdf(d1) - k * np.exp(-r * t) * stats.norm.cdf(d2)
    return k * np.exp(-r * t) * stats.norm.cdf(-d2) - s * np.exp(-q * t) * stats.norm.cdf(-d1)


@pytest.mark.parametrize("kind", ["call", "put"])
def test_matches_textbook_formula_in_the_body(kind):
    k = np.linspace(60, 160, 21)
    ours = bs_price(100, k, 1.3, 0.27, 0.04, 0.015, kind=kind)
    np.testing.assert_allclose(ours, _textbook(100, k, 1.3, 0.27, 0.04, 0.015, kind), rtol=1e-12)


def test_put_call_parity():
    # C - P = S e^{-qT} - K e^{-rT} (common practice, no source)
    k = np.linspace(20, 300, 30)
    c = bs_price(100, k, 2.0, 0.4, 0.03, 0.01)
    p = bs_price(100, k, 2.0, 0.4, 0.03, 0.01, kind="put")
    np.testing.assert_allclose(c - p, 100 * np.exp(-0.02) - k * np.exp(-0.06), atol=1e-12)


def test_deep_wing_price_keeps_relative_precision():
    # Far out of the money the textbook difference of two tails is 0 or
    # noise; the erfcx form must match C = E[(S_T - K)^+] integrated against
    # scipy.stats.lognorm by scipy.integrate.quad.
    s, k, t, v = 100.0, 400.0, 0.25, 0.2
    price = bs_price(s, k, t, v)
    assert 0 < price < 1e-40
    # Reference by direct integration of the lognormal tail (scipy.integrate.quad)
    from scipy import integrate

    m, sd = np.log(s) - 0.5 * v * v * t, v * np.sqrt(t)
    dist = stats.lognorm(sd, scale=np.exp(m))
    ref = integrate.quad(lambda x: (x - k) * dist.pdf(x), k, k * 3, epsabs=0, epsrel=1e-12)[0]
    assert price == pytest.approx(ref, rel=1e-8)


@settings(max_examples=400, deadline=None)
@given(
    st.floats(0.005, 4.0),  # vol
    st.floats(np.log(0.05), np.log(20.0)),  # log strike / spot
    st.floats(1 / 365, 30.0),  # maturity
    st.floats(-0.02, 0.1),
    st.floats(0.0, 0.06),
    st.sampled_from(["call", "put"]),
)
def test_implied_vol_round_trip(vol, logk, t, r, q, kind):
    # Round trip to 1e-10 wherever the price carries that information: the
    # vol error from rounding the price is about eps * price / vega.
    k = 100 * np.exp(logk)
    price = bs_price(100, k, t, vol, r, q, kind)
    f = 100 * np.exp((r - q) * t)
    d1 = (np.log(f / k) + 0.5 * vol * vol * t) / (vol * np.sqrt(t))
    vega = np.exp(-r * t) * f * stats.norm.pdf(d1) * np.sqrt(t)
    assume(price > 1e-280 and vega > 0 and 4e-16 * price / vega < 1e-11)
    assert implied_vol(price, 100, k, t, r, q, kind) == pytest.approx(vol, abs=1e-10)


def test_tiny_and_huge_vols_round_trip():
    for vol in (1e-3, 5e-3, 2.0, 5.0):
        p = bs_price(100, 100, 1.0, vol)
        assert implied_vol(p, 100, 100, 1.0) == pytest.approx(vol, rel=1e-10)


def test_price_outside_bounds_raises_scalar_and_nan_vectorized():
    with pytest.raises(InputError, match="below intrinsic"):
        implied_vol(1.0, 100, 80, 1.0)  # intrinsic is 20
    with pytest.raises(InputError, match="upper bound"):
        implied_vol(101.0, 100, 80, 1.0)
    vol, why = implied_vol_reason([1.0, 25.0, 101.0], 100, 80, 1.0)
    assert np.isnan(vol[0]) and np.isnan(vol[2]) and vol[1] > 0
    assert "intrinsic" in why[0] and why[1] == "" and "upper" in why[2]


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"spot": np.nan}, "spot"),
        ({"strike": -1.0}, "strike"),
        ({"maturity": 0.0}, "maturity"),
        ({"vol": -0.1}, "vol"),
        ({"kind": "straddle"}, "kind"),
        ({"strike": np.ones(3), "maturity": np.ones(2)}, "broadcast"),
    ],
)
def test_bad_input_names_the_argument(kwargs, name):
    args = {"spot": 100.0, "strike": 100.0, "maturity": 1.0, "vol": 0.2, **kwargs}
    with pytest.raises(InputError, match=name):
        bs_price(**args)


def test_greeks_hull_worked_examples():
    # Hull, Options, Futures, and Other Derivatives, "The Greek letters" chapter: the
    # call with S=49, K=50, r=5%, sigma=20%, T=20 weeks (0.3846 years), no dividend has
    # delta 0.522, gamma 0.066, theta -4.31 per year, vega 12.1, rho 8.91 (value from
    # memory, to the digits printed).
    g = bs_greeks(49.0, 50.0, 0.3846, 0.2, 0.05)
    assert g["delta"] == pytest.approx(0.522, abs=5e-4)
    assert g["gamma"] == pytest.approx(0.066, abs=5e-4)
    assert g["theta"] == pytest.approx(-4.31, abs=5e-3)
    assert g["vega"] == pytest.approx(12.1, abs=0.05)
    assert g["rho_rate"] == pytest.approx(8.91, abs=5e-3)


@pytest.mark.parametrize("kind", ["call", "put"])
def test_greeks_are_the_derivatives_of_the_price(kind):
    # common practice, no source: five-point central differences of bs_price in spot,
    # maturity, vol, rate and dividend yield (step 1e-3 relative, error O(h^4))
    s, k, t, v, r, q = 100.0, np.array([70.0, 95.0, 100.0, 130.0]), 1.3, 0.27, 0.04, 0.015
    g = bs_greeks(s, k, t, v, r, q, kind)
    args = {"spot": s, "maturity": t, "vol": v, "rate": r, "div_yield": q}

    def diff(name, second=False):
        h = 1e-3 * max(abs(args[name]), 0.1)

        def price(step):
            return bs_price(strike=k, kind=kind, **{**args, name: args[name] + step})

        if second:
            return (
                -price(2 * h) + 16 * price(h) - 30 * price(0) + 16 * price(-h) - price(-2 * h)
            ) / (12 * h * h)
        return (-price(2 * h) + 8 * price(h) - 8 * price(-h) + price(-2 * h)) / (12 * h)

    np.testing.assert_allclose(g["delta"], diff("spot"), rtol=0, atol=1e-9)
    np.testing.assert_allclose(g["gamma"], diff("spot", second=True), rtol=0, atol=1e-7)
    np.testing.assert_allclose(g["theta"], -diff("maturity"), rtol=0, atol=1e-7)
    np.testing.assert_allclose(g["vega"], diff("vol"), rtol=0, atol=1e-7)
    np.testing.assert_allclose(g["rho_rate"], diff("rate"), rtol=0, atol=1e-7)
    np.testing.assert_allclose(g["rho_div"], diff("div_yield"), rtol=0, atol=1e-7)


def test_greeks_put_call_parity():
    # d/d(.) of C - P = S e^{-qT} - K e^{-rT} (common practice, no source)
    s, k, t, r, q = 100.0, np.linspace(40.0, 250.0, 12), 2.0, 0.03, 0.01
    c, p = bs_greeks(s, k, t, 0.35, r, q, "call"), bs_greeks(s, k, t, 0.35, r, q, "put")
    np.testing.assert_allclose(c["delta"] - p["delta"], np.exp(-q * t), atol=1e-15)
    np.testing.assert_allclose(c["gamma"], p["gamma"], rtol=1e-14)
    np.testing.assert_allclose(c["vega"], p["vega"], rtol=1e-14)
    parity_theta = q * s * np.exp(-q * t) - r * k * np.exp(-r * t)
    np.testing.assert_allclose(c["theta"] - p["theta"], parity_theta, atol=1e-12)
    np.testing.assert_allclose(c["rho_rate"] - p["rho_rate"], t * k * np.exp(-r * t), atol=1e-11)
    np.testing.assert_allclose(c["rho_div"] - p["rho_div"], -t * s * np.exp(-q * t), atol=1e-11)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"spot": 0.0}, "spot"),
        ({"strike": "abc"}, "strike"),
        ({"maturity": -1.0}, "maturity"),
        ({"vol": 0.0}, "vol"),
        ({"rate": np.inf}, "rate"),
        ({"div_yield": None}, "div_yield"),
        ({"kind": "digital"}, "kind"),
        ({"strike": np.ones(3), "vol": np.ones(2) * 0.2}, "broadcast"),
    ],
)
def test_greeks_bad_input_names_the_argument(kwargs, name):
    args = {"spot": 100.0, "strike": 100.0, "maturity": 1.0, "vol": 0.2, **kwargs}
    with pytest.raises(InputError, match=name):
        bs_greeks(**args)
