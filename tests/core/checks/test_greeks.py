"""compare_greeks: Monte Carlo Greeks held against Fourier (Europeans) and the grid (barriers)."""

import math

import pytest

from rootvar.core import (
    BarrierOption,
    EuropeanOption,
    HestonParams,
    InputError,
    compare_greeks,
    default_greek_tolerances,
)

# a Feller-breaking set (ratio 0.48), the kind the desk calibrates (invented)
P = HestonParams(v0=0.04, kappa=1.5, theta=0.04, vol_of_vol=0.5, rho=-0.7)


def test_european_greeks_are_held_against_fourier_with_stated_tolerances():
    c = compare_greeks(P, 100.0, EuropeanOption("call", 100.0, 1.0), 0.03, 0.01, paths=50_000)
    assert c.reference_method == "fourier"
    t = c.table
    assert t.index[0] == "price" and {"delta", "gamma", "theta", "vega"} <= set(t.index)
    tol = default_greek_tolerances(100.0)
    assert (t["tolerance"] == [tol[n] for n in t.index]).all()
    # the band is z standard errors plus the reference's own error figure
    row = t.loc["delta"]
    assert row["band"] == pytest.approx(3.0 * row["mc_std_error"] + row["reference_error"])
    # delta and gamma of the conditional estimator are tight enough to decide at 50,000 paths
    assert t.loc["delta", "verdict"] == "consistent"
    assert t.loc["gamma", "verdict"] == "consistent"
    # no Greek of a correct engine is called biased here, and the overall verdict is the worst row
    assert "biased" not in set(t["verdict"])
    assert c.verdict in {"consistent", "undecided"}


def test_a_biased_greek_is_called_biased_when_the_tolerance_is_far_below_the_gap():
    # a tolerance of 1e-12 on the price: the Euler bias at 8 steps cannot fit inside it
    c = compare_greeks(
        P,
        100.0,
        EuropeanOption("call", 100.0, 1.0),
        paths=50_000,
        steps=8,
        tolerances={"price": 1e-12},
    )
    row = c.table.loc["price"]
    if abs(row["difference"]) > row["band"]:
        assert row["verdict"] == "biased" and c.verdict == "biased"
    else:
        assert row["verdict"] == "undecided"


def test_a_barrier_is_held_against_the_grid():
    product = BarrierOption("call", 100.0, 1.0, barrier=80.0, direction="down", knock="out")
    c = compare_greeks(P, 100.0, product, 0.03, 0.01, paths=20_000)
    assert c.reference_method == "pde"
    assert {"price", "delta", "gamma", "d_v0"} <= set(c.table.index)
    assert all(math.isfinite(x) for x in c.table["reference"])


@pytest.mark.parametrize(
    "kwargs, named",
    [
        ({"spot": -1.0}, "spot"),
        ({"z": 0.0}, "z"),
        ({"tolerances": {"charm": 1.0}}, "tolerances"),
        ({"tolerances": {"delta": -1.0}}, "tolerances['delta']"),
        ({"product": "call"}, "product"),
    ],
)
def test_bad_input_names_the_argument(kwargs, named):
    args = {"params": P, "spot": 100.0, "product": EuropeanOption("call", 100.0, 1.0)}
    args.update(kwargs)
    with pytest.raises(InputError, match=named.replace("[", r"\[").replace("]", r"\]")):
        compare_greeks(**args, paths=1_000)


def test_paths_to_settle_plan_a_rerun_that_decides():
    """An undecided Greek's paths to settle give a rerun whose band fits the tolerance.

    The plan is the price check's (``deciding_paths``: noise per path from this run,
    the reference's error held fixed).  Delta's tolerance is set to twice its
    standard error at 20,000 paths, so the band of 3 standard errors straddles it; at 64
    steps a year the Euler bias of delta is a tenth of that tolerance (at 16 it is half,
    and a rerun rightly stays undecided: a bias near the tolerance never settles).
    """
    from rootvar.core.checks.exotic import deciding_paths

    option = EuropeanOption("call", 100.0, 1.0)
    first = compare_greeks(P, 100.0, option, 0.03, 0.01, paths=20_000, steps=64)
    se = first.table.loc["delta", "mc_std_error"]
    err = first.table.loc["delta", "reference_error"]
    tol = 2.0 * se + err
    c = compare_greeks(P, 100.0, option, 0.03, 0.01, paths=20_000, steps=64,
                       tolerances={"delta": tol})  # fmt: skip
    row = c.table.loc["delta"]
    assert row["verdict"] == "undecided"
    settle = int(row["paths_to_settle"])
    assert settle == deciding_paths(20_000, se, 0.0, err, tol, 3.0) > 20_000
    # decided rows carry 0
    assert all(
        int(r["paths_to_settle"]) == 0 for _, r in c.table.iterrows() if r["verdict"] != "undecided"
    )
    rerun = compare_greeks(P, 100.0, option, 0.03, 0.01, paths=settle, steps=64,
                           tolerances={"delta": tol})  # fmt: skip
    again = rerun.table.loc["delta"]
    # the noise per path is a property of the estimator: it shrinks as 1 / sqrt(paths)
    assert again["mc_std_error"] == pytest.approx(se * math.sqrt(20_000 / settle), rel=0.05)
    assert again["verdict"] == "consistent"  # a correct engine, decided (90% of reruns)
    assert int(again["paths_to_settle"]) == 0


def test_paths_to_settle_say_when_the_reference_error_fills_the_tolerance():
    option = EuropeanOption("call", 100.0, 1.0)
    c = compare_greeks(P, 100.0, option, paths=20_000, steps=16, tolerances={"d_v0": 1e-300})
    row = c.table.loc["d_v0"]
    if row["verdict"] == "undecided":  # the certified error 1e-8 x spot alone exceeds 1e-300
        assert int(row["paths_to_settle"]) == -1
    else:
        assert row["verdict"] == "biased" and int(row["paths_to_settle"]) == 0
