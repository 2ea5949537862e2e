"""Option products: validation, stored form, payoffs."""

import dataclasses
import re

import numpy as np
import pytest

from rootvar.core import (
    AsianOption,
    BarrierOption,
    DigitalOption,
    EuropeanOption,
    ForwardStartOption,
    InputError,
)


def test_european_payoffs():
    s = np.array([80.0, 100.0, 120.0])
    np.testing.assert_array_equal(EuropeanOption("call", 100, 1).payoff(s), [0, 0, 20])
    np.testing.assert_array_equal(EuropeanOption("put", 100, 1).payoff(s), [20, 0, 0])


def test_products_are_frozen_and_store_floats():
    p = EuropeanOption("call", 100, 2)
    assert isinstance(p.strike, float) and isinstance(p.maturity, float)
    with pytest.raises(dataclasses.FrozenInstanceError):
        p.strike = 90.0


def test_barrier_dates_are_sorted_tuples_and_hit_side_is_inclusive():
    b = BarrierOption("put", 100, 1, 110, "up", "in", 1, [1.0, 0.25, 0.5])
    assert b.monitoring == (0.25, 0.5, 1.0) and not b.continuous
    assert b.vanilla() == EuropeanOption("put", 100.0, 1.0)
    np.testing.assert_array_equal(b.is_hit([105.0, 110.0, 120.0]), [False, True, True])
    down = BarrierOption("call", 100, 1, 90, "down", "out")
    assert down.continuous and down.rebate == 0.0
    np.testing.assert_array_equal(down.is_hit([85.0, 90.0, 95.0]), [True, True, False])


@pytest.mark.parametrize(
    "args, fragment",
    [
        (("straddle", 100, 1), "kind must be one of 'call', 'put', got 'straddle'"),
        (("call", -100, 1), "strike must be > 0, got -100.0"),
        (("call", 100, 0), "maturity must be > 0, got 0.0"),
        (("call", [100, 90], 1), "strike must be a single number"),
    ],
)
def test_bad_european(args, fragment):
    with pytest.raises(InputError, match=fragment.replace("(", r"\(").replace(")", r"\)")):
        EuropeanOption(*args)


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        ({"barrier": 0.0}, "barrier must be > 0, got 0.0"),
        ({"direction": "sideways"}, "direction must be one of"),
        ({"knock": "through"}, "knock must be one of"),
        ({"rebate": -1.0}, "rebate must be >= 0, got -1.0"),
        ({"monitoring": [0.5, 1.5]}, "monitoring dates must lie in (0, maturity=1.0], got 1.5"),
        ({"monitoring": [0.0, 0.5]}, "monitoring must be > 0, got 0.0"),
        ({"monitoring": [0.25, 0.5, 0.5, 1.0]}, "monitoring dates must differ, got 0.5 twice"),
        ({"monitoring": []}, "monitoring must hold at least one date"),
    ],
)
def test_bad_barrier(kwargs, fragment):
    args = dict(kind="call", strike=100, maturity=1.0, barrier=90, direction="down", knock="out")
    args.update(kwargs)
    with pytest.raises(
        InputError, match=fragment.replace("(", r"\(").replace(")", r"\)").replace("[", r"\[")
    ):
        BarrierOption(**args)


def test_asian_fixings_are_sorted_and_the_averages_are_the_textbook_ones():
    # Arithmetic and geometric means (common practice, no source).
    a = AsianOption("call", 100, [1.0, 0.25, 0.5], "geometric")
    assert a.fixings == (0.25, 0.5, 1.0) and a.maturity == 1.0
    spots = np.array([[50.0, 100.0, 200.0], [100.0, 100.0, 100.0]])
    np.testing.assert_allclose(a.average_of(spots), [100.0, 100.0])
    np.testing.assert_allclose(a.payoff(spots), [0.0, 0.0], atol=1e-12)
    b = AsianOption("put", 150, [0.5, 1.0, 2.0])
    assert b.average == "arithmetic"
    np.testing.assert_allclose(b.payoff(spots), [150.0 - 350.0 / 3.0, 50.0])


def test_forward_start_payoff_sets_the_strike_at_the_start():
    f = ForwardStartOption("call", 0.5, 1.0, 1.1)
    np.testing.assert_allclose(f.payoff([100.0, 50.0], [120.0, 50.0]), [10.0, 0.0])
    g = ForwardStartOption("put", 0, 1.0)
    assert g.start == 0.0 and g.strike_share == 1.0
    np.testing.assert_allclose(g.payoff([100.0, 50.0], [120.0, 40.0]), [0.0, 10.0])


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        ({"kind": "digital"}, "kind must be one of 'call', 'put', got 'digital'"),
        ({"strike": 0}, "strike must be > 0, got 0.0"),
        ({"fixings": []}, "fixings must hold at least one date"),
        ({"fixings": [0.0, 1.0]}, "fixings must be > 0, got 0.0"),
        ({"fixings": [0.5, 1.0, 0.5]}, "fixings must differ, got 0.5 twice"),
        ({"fixings": [0.5, np.nan]}, "fixings must be finite, got nan"),
        ({"average": "harmonic"}, "average must be one of 'arithmetic', 'geometric'"),
    ],
)
def test_bad_asian(kwargs, fragment):
    args = dict(kind="call", strike=100, fixings=[0.5, 1.0], average="geometric")
    args.update(kwargs)
    with pytest.raises(InputError, match=re.escape(fragment)):
        AsianOption(**args)


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        ({"kind": "straddle"}, "kind must be one of"),
        ({"start": -0.1}, "start must be >= 0, got -0.1"),
        ({"maturity": 0.5}, "maturity must be > start=0.5, got 0.5"),
        ({"maturity": -1}, "maturity must be > 0, got -1.0"),
        ({"strike_share": 0}, "strike_share must be > 0, got 0.0"),
        ({"start": [0.1, 0.2]}, "start must be a single number"),
    ],
)
def test_bad_forward_start(kwargs, fragment):
    args = dict(kind="call", start=0.5, maturity=1.0, strike_share=1.0)
    args.update(kwargs)
    with pytest.raises(InputError, match=re.escape(fragment)):
        ForwardStartOption(**args)


def test_digital_pays_cash_strictly_beyond_the_strike():
    # cash-or-nothing payoff (Hull, Options, Futures and Other Derivatives, ch. on exotics):
    # call and put pay the cash together everywhere except at the strike itself
    s = np.array([80.0, 100.0, 120.0])
    call = DigitalOption("call", 100, 1, cash=5).payoff(s)
    put = DigitalOption("put", 100, 1, cash=5).payoff(s)
    np.testing.assert_array_equal(call, [0, 0, 5])
    np.testing.assert_array_equal(put, [5, 0, 0])
    assert DigitalOption("call", 100, 1).cash == 1.0


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        ({"kind": "binary"}, "kind must be one of"),
        ({"strike": 0}, "strike must be > 0, got 0.0"),
        ({"maturity": -1}, "maturity must be > 0, got -1.0"),
        ({"cash": 0}, "cash must be > 0, got 0.0"),
        ({"cash": [1, 2]}, "cash must be a single number"),
    ],
)
def test_bad_digital(kwargs, fragment):
    args = dict(kind="call", strike=100.0, maturity=1.0)
    args.update(kwargs)
    with pytest.raises(InputError, match=re.escape(fragment)):
        DigitalOption(**args)
