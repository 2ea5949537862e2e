"""Price gradient in the five Heston parameters on the certified COS grid."""

import dataclasses

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from oracles import gradient_reference

from rootvar.core import HestonParams, InputError, heston_price
from rootvar.core.fourier.characteristic import heston_log_cf
from rootvar.core.fourier.gradient import (
    PARAM_NAMES,
    SurfacePricer,
    cos_grid,
    heston_price_gradient,
    log_cf_gradient,
)

P = HestonParams(0.028, 2.1, 0.045, 0.72, -0.74)


def _surface(p, spot=100.0):
    t = np.array([1 / 12, 0.5, 2.0])[:, None]
    k = spot * np.exp(np.linspace(-3, 3, 7)[None, :] * np.sqrt(p.theta * t))
    return k, np.broadcast_to(t, k.shape)


def test_log_cf_is_the_pricers_characteristic_function():
    # identity with rootvar.core.fourier.characteristic.heston_log_cf (Albrecher et al. 2007 form)
    u = np.linspace(0.0, 80.0, 41)
    for t in (1 / 52, 0.5, 5.0):
        lcf, _ = log_cf_gradient(u, P, t, 0.013)
        np.testing.assert_allclose(lcf, heston_log_cf(u, P, t, 0.013), rtol=0, atol=1e-12)


def test_log_cf_derivatives_match_central_differences():
    # common practice, no source: central differences of heston_log_cf, step 1e-6
    u = np.linspace(0.5, 40.0, 17)
    _, grad = log_cf_gradient(u, P, 0.7, 0.01)
    for j, name in enumerate(PARAM_NAMES):
        h = 1e-6
        up = dataclasses.replace(P, **{name: getattr(P, name) + h})
        down = dataclasses.replace(P, **{name: getattr(P, name) - h})
        fd = (heston_log_cf(u, up, 0.7, 0.01) - heston_log_cf(u, down, 0.7, 0.01)) / (2 * h)
        assert np.max(np.abs(fd - grad[j])) <= 1e-7 * np.max(np.abs(grad[j])), name


def test_compiled_log_cf_gradient_equals_the_numpy_version():
    # tests/gradient_reference.py: the numpy implementation the kernel replaced
    u = np.linspace(0.0, 120.0, 61)
    for t in (1 / 52, 0.5, 5.0):
        lcf, grad = log_cf_gradient(u, P, t, 0.013)
        ref_lcf, ref_grad = gradient_reference.log_cf_gradient(u, P, t, 0.013)
        np.testing.assert_allclose(lcf, ref_lcf, rtol=1e-13, atol=1e-13)
        for j in range(5):
            scale = np.max(np.abs(ref_grad[j]))
            assert np.max(np.abs(grad[j] - ref_grad[j])) <= 1e-13 * scale, PARAM_NAMES[j]


def test_compiled_surface_sums_equal_the_numpy_version():
    # tests/gradient_reference.py: the numpy COS sums (matrix products) the kernel replaced
    k, t = (a.ravel() for a in _surface(P))
    pricer = SurfacePricer(cos_grid(P, 100.0, k, t, 0.03, 0.01), 100.0, k, t, 0.03, 0.01)
    price, grad = pricer.evaluate(P)
    ref_price, ref_grad = gradient_reference.surface_evaluate(pricer, P)
    # The kernel and numpy's matrix product add the terms in different orders, and the order
    # follows the CPU's vector width: 1.7e-13 apart on an AMD EPYC (znver4) on a spot of 100.
    # 1e-12 is 1e-14 x spot, four orders below the 1e-10 x spot the prices are certified to.
    np.testing.assert_allclose(price, ref_price, rtol=0, atol=1e-12)
    for j in range(5):
        scale = np.max(np.abs(ref_grad[:, j]))
        assert np.max(np.abs(grad[:, j] - ref_grad[:, j])) <= 1e-12 * scale, PARAM_NAMES[j]


def test_prices_equal_the_certified_prices():
    # rootvar.core.heston_price (certified to 1e-10 x spot) is the reference
    k, t = _surface(P)
    for kind in ("call", "put"):
        price, grad = heston_price_gradient(P, 100.0, k, t, 0.03, 0.01, kind)
        ref = heston_price(P, 100.0, k, t, 0.03, 0.01, kind)
        assert grad.shape == k.shape + (5,)
        np.testing.assert_allclose(price, ref, rtol=0, atol=1e-9)


def test_gradient_agrees_with_differences_of_the_certified_price():
    # central differences of rootvar.core.heston_price (h = 1e-4): each price sits on
    # its own certified grid, so the check holds to the 1e-10 x spot certification / h
    k, t = _surface(P)
    _, grad = heston_price_gradient(P, 100.0, k, t, 0.03, 0.01)
    for j, name in enumerate(PARAM_NAMES):
        h = 1e-4
        up = dataclasses.replace(P, **{name: getattr(P, name) + h})
        down = dataclasses.replace(P, **{name: getattr(P, name) - h})
        fd = (
            heston_price(up, 100.0, k, t, 0.03, 0.01) - heston_price(down, 100.0, k, t, 0.03, 0.01)
        ) / (2 * h)
        assert np.max(np.abs(fd - grad[..., j])) <= 1e-4 * np.max(np.abs(grad[..., j])), name


@settings(max_examples=40, deadline=None)
@given(
    v0=st.floats(0.005, 0.2),
    kappa=st.floats(0.3, 5.0),
    theta=st.floats(0.01, 0.2),
    vol_of_vol=st.floats(0.1, 1.2),
    rho=st.floats(-0.9, 0.5),
    maturity=st.floats(0.05, 3.0),
    moneyness=st.lists(st.floats(-2.5, 2.5), min_size=1, max_size=4),
)
def test_gradient_matches_central_differences_on_its_grid(
    v0, kappa, theta, vol_of_vol, rho, maturity, moneyness
):
    # common practice, no source: five-point central differences (relative step 1e-3,
    # truncation error O(h^4)) of the price on the same fixed grid agree to 1e-6 relative
    # to the largest entry of the strip's gradient in that parameter.  The differences
    # are taken of the same COS sum in extended precision (gradient_reference, 80-bit
    # long double): in double precision the sums' rounding (some 1e-13) divided by the
    # step leaves some 3e-9 of error in the difference quotient, which at vol_of_vol 0.1,
    # maturity 3 (a gradient of 2.6e-4) is 1e-5 relative; in extended precision it is
    # 2,000 times smaller.  The floor of 1e-6 currency per unit (1e-12 absolute) is for
    # a gradient that is itself near zero, at the rounding of the double-precision
    # gradient; where long double is only double (some platforms) it is 1e-2.
    p = HestonParams(v0, kappa, theta, vol_of_vol, rho)
    strike = 100.0 * np.exp(np.array(moneyness) * np.sqrt(theta * maturity))
    t = np.full(strike.shape, maturity)
    pricer = SurfacePricer(cos_grid(p, 100.0, strike, t, 0.02, 0.0), 100.0, strike, t, 0.02, 0.0)
    _, grad = pricer.evaluate(p)
    values = np.array([getattr(p, name) for name in PARAM_NAMES], dtype=np.longdouble)
    floor = 1e-6 if np.finfo(np.longdouble).eps < 1e-18 else 1e-2
    for j in range(5):
        h = np.longdouble(1e-3 * max(abs(float(values[j])), 0.1))

        def price(step, j=j):
            moved = values.copy()
            moved[j] += step
            return gradient_reference.surface_prices_extended(pricer, moved)

        fd = (-price(2 * h) + 8 * price(h) - 8 * price(-h) + price(-2 * h)) / (12 * h)
        scale = max(np.max(np.abs(grad[:, j])), floor)
        assert np.max(np.abs(fd.astype(float) - grad[:, j])) <= 1e-6 * scale, PARAM_NAMES[j]


def test_extended_precision_prices_are_the_pricers_prices():
    # the extended-precision reference sum equals the double-precision kernel to the
    # latter's rounding, and both equal rootvar.core.heston_price (certified, 1e-10 x spot)
    k, t = (a.ravel() for a in _surface(P))
    pricer = SurfacePricer(cos_grid(P, 100.0, k, t, 0.03, 0.01), 100.0, k, t, 0.03, 0.01)
    price, _ = pricer.evaluate(P)
    put = price - np.where(pricer.call_side, pricer.parity, 0.0)
    values = np.array([getattr(P, name) for name in PARAM_NAMES], dtype=np.longdouble)
    extended = gradient_reference.surface_prices_extended(pricer, values).astype(float)
    np.testing.assert_allclose(extended, put, rtol=0, atol=1e-12)
    np.testing.assert_allclose(
        extended, heston_price(P, 100.0, k, t, 0.03, 0.01, "put"), rtol=0, atol=1e-9
    )


def test_bad_input_is_refused():
    with pytest.raises(InputError, match="params must be a HestonParams"):
        heston_price_gradient((0.04, 1, 0.04, 0.5, -0.5), 100.0, 100.0, 1.0)
    with pytest.raises(InputError, match="strike must be > 0"):
        heston_price_gradient(P, 100.0, -1.0, 1.0)
    with pytest.raises(InputError, match="kind must be one of"):
        heston_price_gradient(P, 100.0, 100.0, 1.0, kind="straddle")
