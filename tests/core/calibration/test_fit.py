"""Calibration to an implied-volatility surface, free and with Feller."""

import warnings

import numpy as np
import pandas as pd
import pytest

from rootvar.core import (
    HestonParams,
    InputError,
    cir_transition,
    euler_max_step,
    euler_negative_probability,
    heston_implied_vol,
)
from rootvar.core.calibration.fit import calibrate, calibration_tradeoff
from rootvar.core.calibration.quotes import StaticArbitrageWarning, read_quotes

SPOT, RATE, DIV = 100.0, 0.02, 0.01
NAMES = ("v0", "kappa", "theta", "vol_of_vol", "rho")
FELLER_OK = HestonParams(0.04, 3.0, 0.05, 0.4, -0.6)  # ratio 1.875
SEVERE = HestonParams(0.04, 0.5, 0.04, 1.0, -0.8)  # ratio 0.04
LONG = (0.1, 0.25, 0.5, 1.0, 1.5, 2.0, 3.0)


def surface(p, maturities=LONG, n=11, width=3.0):
    """Model vols from rootvar.core.heston_implied_vol (certified COS), +-width sd wide."""
    t = np.asarray(maturities)[:, None]
    k = SPOT * np.exp(np.linspace(-width, width, n)[None, :] * np.sqrt(p.theta * t))
    vol = heston_implied_vol(p, SPOT, k, t, RATE, DIV)
    return pd.DataFrame(
        {
            "maturity": np.broadcast_to(t, k.shape).ravel(),
            "strike": k.ravel(),
            "implied_vol": vol.ravel(),
        }
    )


def _check_round_trip(c, p):
    # the quotes come from p itself: zero residual up to the 1e-10 x spot certification
    assert c.converged and c.status == "converged"
    assert c.rmse_bp <= 0.05
    for name in NAMES:
        if c.identified[name]:
            assert getattr(c.params, name) == pytest.approx(getattr(p, name), rel=1e-4), name


def test_round_trip_feller_set():
    c = calibrate(surface(FELLER_OK), SPOT, RATE, DIV, starts=0)
    _check_round_trip(c, FELLER_OK)
    assert c.identified.all() and c.warnings == ()
    assert c.feller_ratio == pytest.approx(1.875, rel=1e-3) and c.regime == "Feller holds"
    assert len(c.residuals) == 77 and list(c.residuals.columns) == [
        "maturity",
        "strike",
        "market_vol",
        "model_vol",
        "error_bp",
        "weight",
    ]
    assert c.evaluations > 0 and c.seconds > 0 and c.starts == 1 and c.starts_at_best == 1


@pytest.mark.slow
def test_round_trip_severe_feller_breach():
    c = calibrate(surface(SEVERE), SPOT, RATE, DIV, starts=0)
    _check_round_trip(c, SEVERE)
    assert c.feller_ratio < 0.1 and c.regime == "severe breach"
    assert c.identified.all()


def test_short_dated_surface_warns_that_kappa_is_not_pinned_down():
    # a month of quotes sees kappa and theta only through the drift of v over weeks
    p = HestonParams(0.04, 1.5, 0.06, 0.5, -0.7)
    c = calibrate(surface(p, (1 / 52, 2 / 52, 1 / 12, 1 / 8)), SPOT, RATE, DIV, starts=0)
    _check_round_trip(c, p)
    assert not c.identified["kappa"]
    assert any("identifiability" in w and "kappa" in w for w in c.warnings)


def test_fit_statistics_come_from_certified_prices():
    quotes = surface(FELLER_OK)
    quotes.loc[::7, "implied_vol"] += 0.003
    c = calibrate(quotes, SPOT, RATE, DIV, starts=0)
    ref = heston_implied_vol(
        c.params, SPOT, quotes["strike"], quotes["maturity"], RATE, DIV, method="cos"
    )
    res = c.residuals.sort_values(["maturity", "strike"])
    # the residual table is rootvar.core.heston_implied_vol at the fitted parameters, on the
    # COS route the fit is certified on (the contour route's prices differ within 1e-10 x spot)
    np.testing.assert_allclose(np.sort(res["model_vol"]), np.sort(ref), rtol=0, atol=1e-14)
    err = res["error_bp"].to_numpy()
    assert c.rmse_bp == pytest.approx(np.sqrt(np.mean(err**2)), rel=1e-12)
    assert c.max_abs_bp == pytest.approx(np.max(np.abs(err)), rel=1e-12)


@pytest.mark.slow
@pytest.mark.parametrize("seed", [0, 1, 2, 3, 4])
def test_noise_of_20bp_is_recovered_with_honest_standard_errors(seed):
    # least squares with 5 parameters and 77 quotes leaves residuals whose RMS is
    # 20 sqrt(72/77) bp in expectation (common practice, no source); the sampling sd
    # of that RMS is about 20 / sqrt(2 * 72) = 1.7 bp, so 15% is about 1.7 sd
    rng = np.random.default_rng(seed)
    quotes = surface(FELLER_OK)
    quotes["implied_vol"] += rng.normal(0.0, 20e-4, len(quotes))
    c = calibrate(quotes, SPOT, RATE, DIV, starts=0)
    expected = 20.0 * np.sqrt(72 / 77)
    assert abs(c.rmse_bp - expected) <= 0.15 * expected
    for name in NAMES:
        z = (getattr(c.params, name) - getattr(FELLER_OK, name)) / c.std_errors[name]
        assert abs(z) <= 3.0, name
    corr = c.correlation.to_numpy()
    np.testing.assert_allclose(np.diag(corr), 1.0, rtol=1e-12)
    assert np.all(np.abs(corr) <= 1 + 1e-12)


@pytest.mark.slow
def test_enforced_fit_keeps_feller_and_never_beats_the_free_fit():
    quotes = surface(HestonParams(0.035, 1.2, 0.05, 0.6, -0.7))  # ratio 0.33
    free = calibrate(quotes, SPOT, RATE, DIV, starts=0)
    tied = calibrate(quotes, SPOT, RATE, DIV, feller="enforce", starts=0)
    half = calibrate(quotes, SPOT, RATE, DIV, feller=0.5, starts=0)
    # the bound holds exactly for the ratio recomputed from the parameters
    assert tied.params.feller_ratio >= 1.0 and tied.regime == "Feller holds"
    assert half.params.feller_ratio >= 0.5
    # the constrained sets are subsets: their best fit cannot be better
    assert free.rmse_bp <= half.rmse_bp + 1e-6 <= tied.rmse_bp + 2e-6
    assert tied.feller == "enforce" and half.feller == "ratio >= 0.5" and tied.min_ratio == 1.0
    # a constraint that does not bind leaves the fit where it was
    loose = calibrate(surface(FELLER_OK), SPOT, RATE, DIV, feller="enforce", starts=0)
    _check_round_trip(loose, FELLER_OK)


def test_rho_stays_strictly_inside_minus_one_and_the_fit_says_when_it_sits_on_the_bound():
    # quotes from rho = -1 exactly (a degenerate model) ask for more than the bound allows
    p = HestonParams(0.04, 1.5, 0.04, 0.5, -1.0)
    c = calibrate(surface(p, maturities=(0.25, 1.0, 2.0), n=7), SPOT, RATE, DIV, starts=0)
    assert c.converged
    assert c.params.rho == pytest.approx(-0.999, abs=1e-12)
    assert any("rho sits on its bound -0.999" in w for w in c.warnings)
    # an interior optimum carries no such warning
    inner = calibrate(
        surface(FELLER_OK, maturities=(0.25, 1.0, 2.0), n=7), SPOT, RATE, DIV, starts=0
    )
    assert not any("rho sits on its bound" in w for w in inner.warnings)


def test_every_start_reaches_the_known_optimum_of_an_exact_surface():
    # quotes from known parameters: the global optimum is those parameters (RMSE 0 up to
    # the certification), so a start that stops elsewhere has stopped early; with starts
    # compared on a grid of the start's own (an earlier design) only 3 of 9 counted
    p = HestonParams(0.035, 1.2, 0.05, 0.6, -0.7)
    c = calibrate(surface(p), SPOT, RATE, DIV, workers=2)
    assert c.starts == 9 and c.starts_at_best == 9
    _check_round_trip(c, p)


def test_multi_start_is_deterministic_and_counts_the_starts():
    quotes = surface(FELLER_OK, maturities=(0.25, 1.0, 2.0), n=7)
    a = calibrate(quotes, SPOT, RATE, DIV, starts=4, seed=7, workers=1)
    b = calibrate(quotes, SPOT, RATE, DIV, starts=4, seed=7, workers=2)
    assert a.params == b.params and a.starts == 5
    assert 1 <= a.starts_at_best <= 5
    _check_round_trip(a, FELLER_OK)


@pytest.mark.slow
def test_tradeoff_table_puts_both_fits_side_by_side():
    quotes = surface(HestonParams(0.035, 1.2, 0.05, 0.6, -0.7))
    table = calibration_tradeoff(quotes, SPOT, RATE, DIV, starts=0)
    free, tied = table.attrs["free"], table.attrs["constrained"]
    assert list(table.columns) == ["free", "enforce", "cost"]
    assert table.loc["RMSE (bp)", "cost"] == pytest.approx(tied.rmse_bp - free.rmse_bp)
    assert table.loc["RMSE (bp)", "cost"] >= 0
    assert table.loc["Feller ratio", "enforce"] >= 1 - 1e-12
    p = tied.params
    # variance checks are the core's own functions at the production step
    assert table.loc["Euler negative-step prob. at dt 0.003968 y", "enforce"] == pytest.approx(
        euler_negative_probability(p.v0, p.kappa, p.theta, p.vol_of_vol, 1 / 252)
    )
    assert table.loc["largest safe Euler step (years, prob. <= 0.001)", "free"] == pytest.approx(
        euler_max_step(
            free.params.v0, free.params.kappa, free.params.theta, free.params.vol_of_vol, 1e-3
        )
    )
    law = cir_transition(p.v0, p.kappa, p.theta, p.vol_of_vol, 1.0)
    assert table.loc["P(variance < 0.0001) at 1 year", "enforce"] == pytest.approx(law.cdf(1e-4))
    assert "maturity" in table.loc["constraint costs most at", "enforce"]
    # quotes the RMSE leaves out are counted, per fit, from the fit's own residuals
    for column, fit in (("free", free), ("enforce", tied)):
        missing = int(fit.residuals["model_vol"].isna().sum())
        assert table.loc["quotes without a model vol", column] == missing


def test_bad_arguments_are_refused():
    quotes = surface(FELLER_OK, maturities=(0.5, 1.0), n=5)
    with pytest.raises(InputError, match="feller must be 'free', 'enforce' or a minimum ratio"):
        calibrate(quotes, SPOT, feller="sometimes")
    with pytest.raises(InputError, match=r"feller must be > 0, got -1\.0"):
        calibrate(quotes, SPOT, feller=-1.0)
    with pytest.raises(InputError, match="start must be a HestonParams"):
        calibrate(quotes, SPOT, start=(0.04, 1.0, 0.04, 0.5, -0.5))
    with pytest.raises(InputError, match="spot must be > 0"):
        calibrate(quotes, -1.0)
    with pytest.raises(InputError, match="weights must be left out when quotes is a QuoteSet"):
        calibrate(read_quotes(quotes, SPOT), SPOT, weights=np.ones(len(quotes)))
    with pytest.raises(InputError, match="feller must be 'enforce' or a minimum ratio"):
        calibration_tradeoff(quotes, SPOT, feller="free")
    bad = quotes.copy()
    bad.loc[3, "implied_vol"] = -0.1
    with pytest.raises(InputError, match=r"implied_vol must be > 0, got -0.1 \(row 4\)"):
        calibrate(bad, SPOT)
    one_maturity = surface(FELLER_OK, maturities=(0.5,), n=9)
    with pytest.raises(InputError, match="at least two maturities"):
        calibrate(one_maturity, SPOT)
    with pytest.raises(InputError, match="at least 6 usable quotes"):
        calibrate(quotes.iloc[:1], SPOT)


def test_arbitrage_in_the_quotes_is_carried_as_a_warning():
    quotes = surface(FELLER_OK, maturities=(0.5, 1.0), n=7)
    quotes.loc[quotes["maturity"] == 1.0, "implied_vol"] = 0.05
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", StaticArbitrageWarning)
        c = calibrate(quotes, SPOT, starts=0)
    assert any("calendar arbitrage" in w for w in c.warnings)
