"""HestonParams validation."""

import dataclasses

import numpy as np
import pytest

from rootvar.core import HestonParams, InputError


def test_valid_set_is_frozen_and_reports_feller():
    p = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
    assert p.feller_ratio == pytest.approx(0.04)
    with pytest.raises(dataclasses.FrozenInstanceError):
        p.kappa = 1.0  # type: ignore[misc]


def test_feller_breach_is_not_an_error():
    HestonParams(0.04, 0.1, 0.01, 2.0, 0.0)


@pytest.mark.parametrize(
    "field, value, rule",
    [
        ("kappa", -0.5, "> 0"),
        ("kappa", 0.0, "> 0"),
        ("theta", 0.0, "> 0"),
        ("vol_of_vol", -1.0, "> 0"),
        ("v0", -1e-9, ">= 0"),
        ("rho", 1.01, r"\[-1, 1\]"),
        ("rho", np.nan, "finite"),
        ("theta", np.inf, "finite"),
        ("v0", "0.04", "number"),
        ("kappa", [1.0, 2.0], "single number"),
    ],
)
def test_bad_parameter_message_names_parameter_rule_and_value(field, value, rule):
    args = dict(v0=0.04, kappa=1.0, theta=0.04, vol_of_vol=0.5, rho=-0.5)
    args[field] = value
    with pytest.raises(InputError, match=rf"{field} .*{rule}"):
        HestonParams(**args)


def test_message_shows_the_value():
    with pytest.raises(ValueError, match=r"kappa must be > 0, got -0\.5"):
        HestonParams(0.04, -0.5, 0.04, 1.0, 0.0)


def test_messages_show_numpy_scalars_as_plain_numbers():
    # a value read from an array is a numpy scalar; its repr would leak "np.float64(...)"
    from rootvar.core import EuropeanOption
    from rootvar.core.validation import as_positive_int

    with pytest.raises(InputError, match=r"kind must be one of 'call', 'put', got 1\.0$"):
        EuropeanOption(np.float64(1.0), 100.0, 1.0)
    with pytest.raises(InputError, match=r"paths must be a positive whole number, got 2\.5$"):
        as_positive_int("paths", np.float64(2.5))
