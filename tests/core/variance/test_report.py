"""variance_report: the trader's table."""

import math

import numpy as np
import pytest

from rootvar.core import HestonParams, InputError, cir_transition, variance_report


@pytest.fixture
def hard():
    # Andersen (2008) case I parameters (J. Computational Finance 11(3)), Feller ratio 0.04.
    return HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)


def test_one_row_per_horizon_with_law_values(hard):
    t = variance_report(hard, [0.5, 2.0], quantiles=(0.01, 0.5, 0.99), dt=1 / 52, near_zero=1e-3)
    assert list(t.index) == [0.5, 2.0]
    law = cir_transition(0.04, 0.5, 0.04, 1.0, 2.0)
    row = t.loc[2.0]
    assert row["mean"] == pytest.approx(law.mean(), rel=1e-14)
    assert row["q50%"] == pytest.approx(law.ppf(0.5), rel=1e-12)
    assert row["p_below_near_zero"] == pytest.approx(law.cdf(1e-3), rel=1e-12)
    assert row["feller_ratio"] == pytest.approx(0.04)
    assert row["regime"] == "severe breach"
    assert not any(c.startswith("euler_neg_prob_at_q") for c in t.columns)
    assert t.attrs["regime"] == "severe breach"


def test_underflowing_quantiles_are_zero_and_noted_never_nan():
    p = HestonParams(v0=1e-4, kappa=0.1, theta=0.01, vol_of_vol=1.0, rho=-0.9)  # ratio 0.002
    t = variance_report(p, [1.0], quantiles=(1e-3, 0.5, 0.999))
    assert not t.drop(columns=["regime", "notes"]).isna().any().any()
    assert t.loc[1.0, "q0.1%"] == 0.0
    assert "below 1e-300" in t.loc[1.0, "notes"]


def test_feller_holding_set_has_no_notes_and_little_mass_near_zero():
    p = HestonParams(v0=0.04, kappa=3.0, theta=0.04, vol_of_vol=0.3, rho=-0.5)
    t = variance_report(p, [1.0])
    assert t.loc[1.0, "notes"] == ""
    assert t.loc[1.0, "p_below_near_zero"] < 1e-6
    assert math.isclose(t.loc[1.0, "feller_ratio"], 2 * 3 * 0.04 / 0.09)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"horizons": [-1.0]}, "horizons"),
        ({"horizons": []}, "horizons"),
        ({"quantiles": [0.0]}, "quantiles"),
        ({"dt": 0.0}, "dt"),
        ({"near_zero": np.nan}, "near_zero"),
    ],
)
def test_bad_input_names_the_argument(hard, kwargs, name):
    args = {"horizons": [1.0], **kwargs}
    with pytest.raises(InputError, match=name):
        variance_report(hard, **args)


def test_params_must_be_a_parameter_set():
    with pytest.raises(InputError, match="params"):
        variance_report((0.04, 1, 0.04, 1, 0), [1.0])


def test_worst_case_columns_say_where_the_risk_lives(hard):
    # The misleading case of the old table: near v = 0 the step's noise vanishes, so the risk
    # at the low quantiles read 0 while most of the mass sits near zero.  The worst case
    # (closed form, checked against a scan in test_variance) and P(v_t <= v*) from the exact
    # law (scipy.stats.ncx2 through cir_transition) show it.
    from rootvar.core import euler_worst_case

    dt = 1 / 252
    t = variance_report(hard, [0.25, 1.0], dt=dt)
    prob, level = euler_worst_case(0.5, 0.04, 1.0, dt)
    assert (t["euler_worst_case"] == prob).all() and (t["euler_worst_level"] == level).all()
    for h in (0.25, 1.0):
        law = cir_transition(0.04, 0.5, 0.04, 1.0, h)
        assert t.loc[h, "p_at_or_below_worst_level"] == pytest.approx(law.cdf(level), rel=1e-12)
    assert prob > 0.3 and t.loc[1.0, "p_at_or_below_worst_level"] > 0.5
    assert t.loc[1.0, "euler_neg_prob_at_v0"] < 1e-3


def test_worst_level_at_infinity_gives_all_the_mass(hard):
    t = variance_report(hard, [1.0], dt=2.5)  # kappa dt = 1.25 >= 1
    assert t.loc[1.0, "euler_worst_case"] == 1.0
    assert math.isinf(t.loc[1.0, "euler_worst_level"])
    assert t.loc[1.0, "p_at_or_below_worst_level"] == 1.0
