"""Exotics priced twice: Monte Carlo against the PDE, Fourier or a reference run."""

import math

import numpy as np
import pytest

from rootvar.core import (
    BIASED,
    CONSISTENT,
    UNDECIDED,
    AsianOption,
    BarrierOption,
    DigitalOption,
    EuropeanOption,
    ForwardStartOption,
    FourierConvergenceError,
    HestonParams,
    InputError,
    compare_exotic,
    mc_exotic,
    planning_paths,
)
from rootvar.core.checks import exotic as exotic_check
from rootvar.core.checks.exotic import (
    DEFAULT_DIGITAL_TOLERANCE_SHARE,
    DEFAULT_TOLERANCE_SHARE,
    band_verdict,
    deciding_paths,
)

#: Fang & Oosterlee (2008), SIAM J. Sci. Comput. 31(2), Heston test case.
FO = HestonParams(v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)
#: Andersen (2008), J. Computational Finance 11(3), case I.
ANDERSEN_I = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
MONTHLY = tuple((j + 1) / 12 for j in range(12))

DOWN_OUT = BarrierOption("call", 100.0, 1.0, 90.0, "down", "out")
FORWARD = ForwardStartOption("call", 0.5, 1.0, 1.0)
GEOMETRIC = AsianOption("call", 100.0, MONTHLY, "geometric")
ARITHMETIC = AsianOption("call", 100.0, MONTHLY, "arithmetic")


def _consistent(c):
    """The verdict's own rule, restated: the band lies inside the tolerance."""
    assert c.verdict == CONSISTENT, c.reason
    assert abs(c.diff) + c.band <= c.tolerance
    assert c.paths_to_settle == 0


@pytest.mark.parametrize(
    ("product", "method"),
    [(DOWN_OUT, "PDE"), (FORWARD, "Fourier"), (GEOMETRIC, "Fourier")],
    ids=["down-and-out", "forward-start", "geometric-asian"],
)
def test_fo_set_exotics_are_consistent_with_their_second_method(product, method):
    # FO set (Fang & Oosterlee 2008); QE at 64 steps a year with the bridge and a control
    # variate, against the PDE (in 't Hout & Foulon 2010 ADI, refinement error) or the
    # certified Fourier price (Kim & Wee 2014; Kruse & Noegel 2005).  Tolerance: 0.1% of spot
    # (common practice, no source).
    c = compare_exotic(FO, 100.0, product, seed=11)
    assert c.second_method == method
    assert c.second_error_kind == "bound"
    _consistent(c)
    # the check is sharp: its band is a small part of the tolerance
    assert c.mc.std_error < 0.015
    assert c.tolerance == pytest.approx(DEFAULT_TOLERANCE_SHARE * 100.0)


def test_fo_arithmetic_asian_is_consistent_with_the_reference_run():
    # the reference run: exact variance sampling (Broadie & Kaya 2006), at least the check's
    # steps, the European control instead of the geometric Asian, an independent seed
    c = compare_exotic(FO, 100.0, ARITHMETIC, seed=12)
    assert c.second_method == "reference Monte Carlo"
    assert c.second_error_kind == "standard error"
    ref = c.second.result
    assert ref.scheme == "exact_variance" and ref.control == "european"
    assert ref.seed != c.mc.seed
    assert c.second_status == "simulated"
    assert ref.steps >= c.mc.steps
    assert ref.std_error < 0.015
    assert c.combined_error == pytest.approx(math.hypot(c.mc.std_error, ref.std_error))
    _consistent(c)


def test_fo_digital_is_consistent_with_the_pde():
    # a digital's default tolerance is 1% of its cash, not 0.1% of the spot (common practice,
    # no source): here 0.05 for a digital paying 5
    c = compare_exotic(FO, 100.0, DigitalOption("call", 100.0, 1.0, cash=5.0), seed=13)
    assert c.second_method == "PDE"
    assert c.tolerance == pytest.approx(DEFAULT_DIGITAL_TOLERANCE_SHARE * 5.0)
    assert "1% of the cash" in c.reason
    _consistent(c)


def test_euler_absorption_at_coarse_steps_is_found_biased():
    # Andersen (2008) case I breaks Feller badly; Euler with absorption at one step a year
    # is far off there (Lord, Koekkoek & van Dijk 2010, Table; Andersen 2008 for the
    # vanilla).  The forward start's Fourier price is certified, so the bias shows.
    product = ForwardStartOption("call", 1.0, 5.0, 1.0)
    c = compare_exotic(ANDERSEN_I, 100.0, product, scheme="euler_absorb", steps=1, seed=3)
    assert c.second_method == "Fourier"
    assert c.verdict == BIASED, c.reason
    assert abs(c.diff) - c.band > c.tolerance
    good = compare_exotic(ANDERSEN_I, 100.0, product, scheme="qe", steps=16, seed=3)
    assert abs(good.diff) < abs(c.diff) / 5


def test_a_pde_that_cannot_meet_its_tolerance_gives_no_verdict():
    # a tolerance of 1e-9 x spot is far below what the default grid reaches
    c = compare_exotic(FO, 100.0, DOWN_OUT, seed=4, paths=20_000, pde_tolerance=1e-9)
    assert c.second_status == "not converged"
    assert c.verdict == UNDECIDED
    assert c.paths_to_settle == -1
    assert "did not converge" in c.reason and "refine the grid" in c.reason
    assert math.isnan(c.diff)


def test_an_uncertified_fourier_price_gives_no_verdict(monkeypatch):
    def fails(*args, **kwargs):
        raise FourierConvergenceError("the forward-start series could not be certified")

    monkeypatch.setattr(exotic_check, "forward_start_price", fails)
    c = compare_exotic(FO, 100.0, FORWARD, seed=5, paths=20_000)
    assert c.second_status == "not certified"
    assert c.verdict == UNDECIDED and c.paths_to_settle == -1
    assert "could not be certified" in c.reason


def test_the_three_states_follow_the_band():
    # the rule of compare_mc_fourier (README, "Verdict"), with a bound added to the band
    assert band_verdict(0.01, 0.01, 0.0, 0.02, 0.1, 3.0)[0] == CONSISTENT  # 0.01 + 0.05 <= 0.1
    assert band_verdict(0.06, 0.01, 0.0, 0.02, 0.1, 3.0)[0] == UNDECIDED  # 0.06 + 0.05 straddles
    assert band_verdict(-0.2, 0.01, 0.0, 0.02, 0.1, 3.0)[0] == BIASED  # -0.2 + 0.05 < -0.1
    # standard errors add in quadrature: sqrt(0.03^2 + 0.04^2) = 0.05
    state, stat, half = band_verdict(0.0, 0.03, 0.04, 0.0, 0.1, 3.0)
    assert stat == pytest.approx(0.05) and half == pytest.approx(0.15)
    assert state == UNDECIDED


def test_paths_to_settle_account_for_the_second_methods_error():
    # with an exact second method the figure is planning_paths' own
    assert deciding_paths(10_000, 0.02, 0.0, 0.0, 0.1, 3.0) == int(
        planning_paths(10_000, 0.02, 0.1, 3.0)
    )
    # a bound eats into the room: more paths needed than without it
    assert deciding_paths(10_000, 0.02, 0.0, 0.05, 0.1, 3.0) > deciding_paths(
        10_000, 0.02, 0.0, 0.0, 0.1, 3.0
    )
    # an error the size of the tolerance leaves no room at any count
    assert deciding_paths(10_000, 0.02, 0.0, 0.1, 0.1, 3.0) == -1
    assert deciding_paths(10_000, 0.02, 0.0, 0.3, 0.1, 3.0) == -1  # a bound past the tolerance
    assert deciding_paths(10_000, 0.02, 0.03, 0.0, 0.1, 3.0) == -1  # (3 + 1.645) x 0.03 > 0.1


def test_a_rerun_at_the_planned_paths_has_a_band_inside_the_tolerance():
    # planning_paths' rule (README, "Verdict defaults"): at N paths z s_N + bound <= tol - q s_N,
    # so the band fits inside the tolerance and a rerun can come out "consistent"
    c = compare_exotic(FO, 100.0, DOWN_OUT, seed=6, paths=2_000, tolerance=0.05)
    assert c.verdict == UNDECIDED and c.paths_to_settle > 2_000
    again = compare_exotic(FO, 100.0, DOWN_OUT, seed=7, paths=c.paths_to_settle, tolerance=0.05)
    assert c.band > c.tolerance > again.band


def test_the_step_study_can_choose_the_scheme_and_step():
    c = compare_exotic(FO, 100.0, DOWN_OUT, seed=8, paths=20_000, study=True)
    assert c.scheme_source.startswith("step study on the vanilla")
    assert c.scheme in ("euler_full", "qe", "exact_variance")


def test_a_finished_run_is_reused():
    first = compare_exotic(FO, 100.0, FORWARD, seed=9, paths=20_000)
    again = compare_exotic(FO, 100.0, FORWARD, mc_result=first.mc)
    assert again.mc is first.mc and again.diff == first.diff
    assert again.scheme_source == "given run"


@pytest.mark.parametrize(
    ("kwargs", "words"),
    [
        ({"tolerance": 0.0}, "tolerance must be > 0"),
        ({"tolerance": -1.0}, "tolerance must be > 0"),
        ({"z": 0.0}, "z must be > 0"),
        ({"scheme": "milstein"}, "scheme must be"),
        ({"steps": 0}, "steps"),
        ({"paths": -4}, "paths"),
        ({"pde_tolerance": 0.0}, "pde_tolerance must be > 0"),
    ],
)
def test_bad_settings_are_refused(kwargs, words):
    with pytest.raises(InputError, match=words):
        compare_exotic(FO, 100.0, DOWN_OUT, **kwargs)


def test_bad_model_product_or_market_are_refused():
    with pytest.raises(InputError, match="params must be a HestonParams"):
        compare_exotic((0.04, 1, 0.04, 0.5, -0.5), 100.0, DOWN_OUT)
    with pytest.raises(InputError, match="product must be one of"):
        compare_exotic(FO, 100.0, "barrier")
    with pytest.raises(InputError, match="spot must be > 0"):
        compare_exotic(FO, -1.0, DOWN_OUT)
    with pytest.raises(InputError, match="spot must be a single number"):
        compare_exotic(FO, np.array([100.0, 101.0]), DOWN_OUT)


def test_a_european_is_checked_against_the_pde():
    # a European has no control variate in the engine: its noise needs a wider tolerance
    # (0.2% of spot, overriding the default) at the default paths
    c = compare_exotic(FO, 100.0, EuropeanOption("put", 100.0, 1.0), seed=10, tolerance=0.2)
    assert c.second_method == "PDE"
    _consistent(c)


def test_the_check_depends_only_on_its_inputs_and_seed():
    # reproducibility (README, "Monte Carlo"): the reference run's seed is derived from the
    # check's, so an arithmetic Asian's whole check repeats exactly
    a = compare_exotic(FO, 100.0, ARITHMETIC, seed=21, paths=20_000, reference_paths=20_000)
    b = compare_exotic(FO, 100.0, ARITHMETIC, seed=21, paths=20_000, reference_paths=20_000)
    assert (a.mc.price, a.second_price, a.reason) == (b.mc.price, b.second_price, b.reason)
    c = compare_exotic(FO, 100.0, ARITHMETIC, seed=22, paths=20_000, reference_paths=20_000)
    assert c.second.result.seed != a.second.result.seed and c.second_price != a.second_price


def test_a_handed_on_run_must_match_the_check_and_z_is_bounded():
    run = mc_exotic(FO, 100.0, FORWARD, paths=2_000, steps=8)
    # the same run is accepted ...
    assert compare_exotic(FO, 100.0, FORWARD, mc_result=run).mc is run
    # ... a run of another spot, product or model is refused, not compared
    with pytest.raises(InputError, match="mc_result must be a run of the same product"):
        compare_exotic(FO, 120.0, FORWARD, mc_result=run)
    with pytest.raises(InputError, match="mc_result must be a run of the same product"):
        compare_exotic(ANDERSEN_I, 100.0, FORWARD, mc_result=run)
    with pytest.raises(InputError, match="mc_result must be a run of the same product"):
        compare_exotic(FO, 100.0, GEOMETRIC, mc_result=run)
    with pytest.raises(InputError, match="mc_result must be an ExoticMCResult, got str"):
        compare_exotic(FO, 100.0, FORWARD, mc_result="x")
    # a band wider than 10 standard errors decides nothing more (normal tail below 1e-23)
    with pytest.raises(InputError, match="z must be <= 10 standard errors, got 1e"):
        compare_exotic(FO, 100.0, FORWARD, mc_result=run, z=1e300)
    with pytest.raises(InputError, match="paths must be >= 100, got 4"):
        mc_exotic(FO, 100.0, DOWN_OUT, paths=4)
    with pytest.raises(InputError, match="steps must be <= 100,000 a year, got 1,000,000,000"):
        mc_exotic(FO, 100.0, DOWN_OUT, steps=10**9)
