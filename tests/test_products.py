"""Option products: validation, stored form, payoffs."""

import dataclasses

import numpy as np
import pytest

from rootvar.core import BarrierOption, EuropeanOption, InputError


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
        ({"monitoring": [0.5, 0.5]}, "monitoring dates must differ"),
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
