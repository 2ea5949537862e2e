"""MC-versus-Fourier verdicts and the step-size study."""

import dataclasses

import numpy as np
import pytest

from rootvar.core import (
    BIASED,
    CONSISTENT,
    UNDECIDED,
    HestonParams,
    InputError,
    compare_mc_fourier,
    heston_price,
    mc_price,
    step_study,
)

ANDERSEN_I = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
FELLER_OK = HestonParams(v0=0.04, kappa=3.0, theta=0.04, vol_of_vol=0.3, rho=-0.6)


@pytest.mark.parametrize("scheme", ["euler_absorb", "euler_reflect"])
@pytest.mark.parametrize("per_year", [1, 2])
def test_absorption_and_reflection_are_badly_biased_at_coarse_steps(scheme, per_year):
    # Andersen (2008) case I, T=10, S=K=100: both fixes are far off at 1-2
    # steps a year (Lord, Koekkoek & van Dijk 2010 report the same ordering).
    c = compare_mc_fourier(
        ANDERSEN_I, 100, 100.0, 10.0, scheme=scheme, steps=10 * per_year, paths=20_000, seed=1
    )
    assert c.verdict == BIASED
    assert abs(c.diff_vol_bp) > 100


def test_qe_at_eight_steps_a_year_is_within_a_few_basis_points():
    # Andersen (2008) case I reports small QE biases at dt = 1/8 (a few
    # hundredths in price, value from memory).  We test the ATM option at a
    # 10 bp tolerance: room for that bias plus a 3-standard-error band of
    # about 3 bp at 400,000 antithetic conditional paths.
    c = compare_mc_fourier(
        ANDERSEN_I,
        100,
        100.0,
        10.0,
        scheme="qe",
        steps=80,
        paths=400_000,
        antithetic=True,
        conditional=True,
        seed=8,
        tolerance_bp=10.0,
    )
    assert c.verdict == CONSISTENT
    assert abs(c.diff_vol_bp) < 5


def _with(result, price, se):
    return dataclasses.replace(result, price=price, std_error=se)


def test_three_states_and_paths_to_settle():
    # The decision rule on a real run whose price and error are then set:
    # tolerance 0.05 in price, z = 3.
    ref = heston_price(FELLER_OK, 100, 100.0, 1.0)
    run = mc_price(FELLER_OK, 100, 100.0, 1.0, steps=4, paths=4_096, seed=1)
    ok = compare_mc_fourier(
        FELLER_OK, 100, 100.0, 1.0, tolerance_price=0.05, mc_result=_with(run, ref + 0.01, 0.01)
    )
    assert ok.verdict == CONSISTENT and ok.paths_to_settle == 0
    bad = compare_mc_fourier(
        FELLER_OK, 100, 100.0, 1.0, tolerance_price=0.05, mc_result=_with(run, ref + 0.2, 0.02)
    )
    assert bad.verdict == BIASED
    open_ = compare_mc_fourier(
        FELLER_OK, 100, 100.0, 1.0, tolerance_price=0.05, mc_result=_with(run, ref + 0.03, 0.02)
    )
    assert open_.verdict == UNDECIDED
    # with that many paths the band 3 se shrinks to the gap |0.03 - 0.05|
    shrunk = 0.02 * np.sqrt(run.paths / open_.paths_to_settle)
    assert 3 * shrunk == pytest.approx(0.02, rel=1e-3)
    assert "paths would settle it" in open_.reason


def test_basis_point_tolerance_uses_vega():
    c = compare_mc_fourier(
        FELLER_OK, 100, [90.0, 100.0], 1.0, steps=16, paths=20_000, tolerance_bp=5.0
    )
    # ATM vega of a 20% 1-year option is about 39.7 per unit vol (Black-Scholes,
    # common practice): 5 bp is about 0.02 in price.
    assert c.tolerance_price[1] == pytest.approx(5e-4 * 39.7, rel=0.05)
    assert c.verdict.shape == (2,)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"tolerance_bp": 0.0}, "tolerance_bp"),
        ({"tolerance_price": -1.0}, "tolerance_price"),
        ({"z": 0.0}, "z"),
    ],
)
def test_bad_tolerances_raise(kwargs, name):
    with pytest.raises(InputError, match=name):
        compare_mc_fourier(FELLER_OK, 100, 100.0, 1.0, paths=4_096, **kwargs)


def test_step_study_table_and_recommendation():
    # mild correlation, so conditioning leaves little noise and cells decide
    mild = HestonParams(v0=0.04, kappa=3.0, theta=0.04, vol_of_vol=0.3, rho=-0.2)
    table = step_study(
        mild,
        100,
        100.0,
        1.0,
        schemes=("euler_full", "qe"),
        steps_grid=(2, 8, 32),
        paths=40_000,
        tolerance_bp=10.0,
    )
    assert list(table.columns) == [
        "scheme",
        "steps",
        "dt",
        "price",
        "std_error",
        "bias_price",
        "bias_vol_bp",
        "z_score",
        "verdict",
        "seconds",
    ]
    assert len(table) == 6
    coarsest = table.attrs["coarsest_consistent"]
    assert coarsest["qe"] is not None
    cheapest = table.attrs["cheapest"]
    row = table[(table.scheme == cheapest["scheme"]) & (table.steps == cheapest["steps"])]
    assert row.verdict.item() == CONSISTENT


def test_step_study_finds_no_good_step_for_absorption_in_the_hard_case():
    table = step_study(
        ANDERSEN_I, 100, 100.0, 10.0, schemes=("euler_absorb",), steps_grid=(10, 20), paths=8_192
    )
    assert table.attrs["coarsest_consistent"] == {"euler_absorb": None}
    assert (table.verdict == BIASED).all()


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"schemes": ("bogus",)}, "schemes"),
        ({"steps_grid": (0,)}, "steps_grid"),
        ({"strike": [90.0, 100.0]}, "strike"),
    ],
)
def test_step_study_bad_input(kwargs, name):
    args = {"strike": 100.0, **kwargs}
    with pytest.raises(InputError, match=name):
        step_study(FELLER_OK, 100, maturity=1.0, **args)


@pytest.mark.parametrize(
    "scheme",
    [
        "euler_absorb",
        "euler_reflect",
        "euler_partial",
        "euler_full",
        "qe",
        "qe_martingale",
        "exact_variance",
    ],
)
def test_every_scheme_is_consistent_at_fine_steps_when_feller_holds(scheme):
    # Feller ratio 2.67 and mild correlation, 50 steps a year, conditional
    # paths: every scheme converges (Lord et al. 2010; Andersen 2008), so the
    # verdict at a 10 bp tolerance is "consistent" for the ATM and OTM calls.
    mild = HestonParams(v0=0.04, kappa=3.0, theta=0.04, vol_of_vol=0.3, rho=-0.2)
    c = compare_mc_fourier(
        mild,
        100,
        [100.0, 110.0],
        1.0,
        scheme=scheme,
        steps=50,
        paths=40_000,
        conditional=True,
        seed=11,
        tolerance_bp=10.0,
    )
    assert list(c.verdict) == [CONSISTENT, CONSISTENT]
