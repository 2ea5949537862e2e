"""Finite-difference Greeks against central differences of certified Fourier prices."""

import dataclasses
import math

import numpy as np
import pytest

from rootvar.core import BarrierOption, EuropeanOption, HestonParams, heston_price
from rootvar.core.pde.greeks import PDE_GREEKS, pde_greeks

SPOT = 100.0


def _fourier_bumped(params, strike, maturity, rate, div_yield, kind):
    """delta, gamma, theta, d_v0 by central differences of certified COS prices.

    Each price is certified to 1e-10 x spot (:func:`rootvar.core.heston_price`), so a
    step of h leaves a rounding error of about 1e-10 x spot / h in a first derivative
    and / h^2 in the second; Richardson on h and 2h (Richardson 1911) removes the h^2
    term of the differences themselves.
    """

    def price(s=SPOT, t=maturity, p=params):
        return float(heston_price(p, s, strike, t, rate, div_yield, kind))

    def central(f, x, h):
        d1 = (f(x + h) - f(x - h)) / (2 * h)
        d2 = (f(x + 2 * h) - f(x - 2 * h)) / (4 * h)
        return (4 * d1 - d2) / 3

    def second(f, x, h):
        g1 = (f(x + h) - 2 * f(x) + f(x - h)) / h**2
        g2 = (f(x + 2 * h) - 2 * f(x) + f(x - 2 * h)) / (4 * h * h)
        return (4 * g1 - g2) / 3

    hs, ht, hv = 0.01 * SPOT, 1e-3 * maturity, 1e-3 * params.v0
    return {
        "delta": central(lambda s: price(s=s), SPOT, hs),
        "gamma": second(lambda s: price(s=s), SPOT, hs),
        "theta": -central(lambda t: price(t=t), maturity, ht),
        "d_v0": central(lambda v: price(p=dataclasses.replace(params, v0=v)), params.v0, hv),
    }


def _hard_box(count=10, seed=2026):
    """Seeded Europeans: v0, theta in [0.01, 0.5], kappa [0.3, 6], vol_of_vol [0.1, 1.2]
    (Feller broken in most), rho [-0.9, 0.3], maturity [0.25, 5], strike / forward [0.7, 1.4]."""
    rng = np.random.default_rng(seed)
    for i in range(count):
        v0, theta = rng.uniform(0.01, 0.5, 2)
        params = HestonParams(
            v0, rng.uniform(0.3, 6.0), theta, rng.uniform(0.1, 1.2), rng.uniform(-0.9, 0.3)
        )
        t, r, q = rng.uniform(0.25, 5.0), rng.uniform(0.0, 0.05), rng.uniform(0.0, 0.03)
        strike = SPOT * math.exp((r - q) * t) * rng.uniform(0.7, 1.4)
        yield params, ("call", "put")[i % 2], strike, t, r, q


def test_grid_greeks_agree_with_fourier_differences_within_their_estimates():
    checked = 0
    for params, kind, strike, t, r, q in _hard_box():
        g = pde_greeks(params, SPOT, EuropeanOption(kind, strike, t), r, q)
        if not math.isfinite(g.price):
            assert any("not converged" in n for n in g.notes)
            continue
        checked += 1
        ref = _fourier_bumped(params, strike, t, r, q, kind)
        # the differences' own rounding: about 1e-10 x spot / h^2 for gamma, far below 1e-6
        noise = 1e-6 * SPOT
        scale = {"delta": SPOT, "gamma": SPOT**2, "theta": 1.0, "d_v0": params.v0 + params.theta}
        for name in PDE_GREEKS:
            gap = abs(g.values[name] - ref[name])
            assert gap <= 3 * g.errors[name] + noise / scale[name], (name, params, kind, strike, t)
    assert checked >= 6  # the sweep checks something: 10 of 10 converge today, worst gap
    # 0.29 of its estimate


def test_put_call_parity_holds_for_the_grid_greeks():
    # C - P = S e^{-qT} - K e^{-rT} (common practice, no source): delta gap e^{-qT},
    # gamma and d_v0 gaps 0, theta gap q S e^{-qT} - r K e^{-rT}.
    p = HestonParams(v0=0.05, kappa=2.0, theta=0.06, vol_of_vol=0.9, rho=-0.6)
    k, t, r, q = 105.0, 1.5, 0.03, 0.01
    call = pde_greeks(p, SPOT, EuropeanOption("call", k, t), r, q)
    put = pde_greeks(p, SPOT, EuropeanOption("put", k, t), r, q)
    err = {n: call.errors[n] + put.errors[n] + 1e-9 for n in PDE_GREEKS}
    assert call["delta"] - put["delta"] == pytest.approx(math.exp(-q * t), abs=3 * err["delta"])
    assert call["gamma"] - put["gamma"] == pytest.approx(0.0, abs=3 * err["gamma"])
    assert call["d_v0"] - put["d_v0"] == pytest.approx(0.0, abs=3 * err["d_v0"])
    gap = q * SPOT * math.exp(-q * t) - r * k * math.exp(-r * t)
    assert call["theta"] - put["theta"] == pytest.approx(gap, abs=3 * err["theta"])


def test_a_down_and_out_call_has_grid_greeks_with_estimates():
    p = HestonParams(v0=0.04, kappa=1.5, theta=0.04, vol_of_vol=0.5, rho=-0.7)
    product = BarrierOption("call", 100.0, 1.0, barrier=80.0, direction="down", knock="out")
    g = pde_greeks(p, SPOT, product, 0.03, 0.01)
    assert g.method == "pde" and set(g.values) == set(PDE_GREEKS)
    # knocked out below 80, so the option gains on a rise: delta above the vanilla's
    vanilla = pde_greeks(p, SPOT, EuropeanOption("call", 100.0, 1.0), 0.03, 0.01)
    assert vanilla["delta"] < g["delta"] < 1.0
    assert all(0 < g.errors[n] < 0.05 * abs(g[n]) for n in PDE_GREEKS)


def test_a_knock_in_has_no_theta_and_says_why():
    p = HestonParams(v0=0.04, kappa=1.5, theta=0.04, vol_of_vol=0.5, rho=-0.7)
    product = BarrierOption("call", 100.0, 1.0, barrier=80.0, direction="down", knock="in")
    g = pde_greeks(p, SPOT, product, 0.03, 0.01)
    assert math.isnan(g["theta"]) and math.isfinite(g["delta"])
