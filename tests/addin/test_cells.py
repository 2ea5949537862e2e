"""Conversion and checking of cell arguments."""

import numpy as np
import pytest

from rootvar.addin.cells import (
    CellError,
    to_bool,
    to_choice,
    to_int,
    to_number,
    to_numbers,
    to_params,
)
from rootvar.core import HestonParams

SET = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)


@pytest.mark.parametrize(
    "block",
    [
        [["v0", 0.04], ["kappa", 0.5], ["theta", 0.04], ["vol_of_vol", 1.0], ["rho", -0.9]],
        [["Rho", -0.9], ["Vol of Vol", 1.0], ["THETA", 0.04], ["kappa", 0.5], ["v_0", 0.04]],
        [
            ["v0", 0.04],
            ["mean reversion", 0.5],
            ["long-run variance", 0.04],
            ["sigma", 1.0],
            ["correlation", -0.9],
        ],
        [["v0", 0.04], [None, None], ["kappa", 0.5], ["theta", 0.04], ["xi", 1.0], ["rho", -0.9]],
        [[0.04, 0.5, 0.04, 1.0, -0.9]],
        [[0.04], [0.5], [0.04], [1.0], [-0.9]],
        [0.04, 0.5, 0.04, 1.0, -0.9],
    ],
)
def test_parameter_blocks_in_every_documented_shape(block):
    assert to_params("params", block) == SET


@pytest.mark.parametrize(
    "block, fragment",
    [
        (0.04, "range of five cells"),
        ([[0.04, 0.5, 0.04, 1.0]], "five cells"),
        ([["v0", 0.04], ["kappa", 0.5], ["theta", 0.04], ["vol_of_vol", 1.0]], "missing rho"),
        (
            [
                ["v0", 0.04],
                ["kappa", 0.5],
                ["theta", 0.04],
                ["sigma", 1.0],
                ["rho", -0.9],
                ["beta", 2.0],
            ],
            "unknown label 'beta'",
        ),
        (
            [["v0", 0.04], ["kappa", 0.5], ["theta", 0.04], ["sigma", 1.0], ["xi", 1.0]],
            "vol_of_vol is given twice",
        ),
        ([[0.04, 0.5, 0.04, 1.0, "#N/A"]], "error value #N/A"),
        ([[0.04, -0.5, 0.04, 1.0, -0.9]], "kappa must be > 0, got -0.5"),
        ([[0.04, 0.5, 0.04, 1.0, True]], "logical value TRUE"),
        ([[0.04, 0.5, None, 1.0, -0.9]], "theta must be a number, got an empty cell"),
    ],
)
def test_bad_parameter_blocks_say_what_is_wrong(block, fragment):
    with pytest.raises(CellError, match="params") as info:
        to_params("params", block)
    assert fragment in str(info.value)


def test_numbers_and_defaults():
    assert to_number("spot", 100.0, ">0") == 100.0
    assert to_number("rate", None, default=0.0) == 0.0
    assert to_number("spot", [[100.0]], ">0") == 100.0
    with pytest.raises(CellError, match="spot must be a number, got the text '100'"):
        to_number("spot", "100", ">0")
    with pytest.raises(CellError, match=r"spot must be > 0, got -1\.0"):
        to_number("spot", -1.0, ">0")
    with pytest.raises(CellError, match="single cell"):
        to_number("spot", [[1.0, 2.0]])
    np.testing.assert_array_equal(to_numbers("strike", [[90.0], [None], [110.0]], ">0"), [90, 110])
    with pytest.raises(CellError, match="strike must hold numbers only"):
        to_numbers("strike", [[90.0], ["x"]], ">0")
    with pytest.raises(CellError, match="at least one number"):
        to_numbers("strike", [[None]], ">0")


def test_whole_numbers_booleans_and_choices():
    assert to_int("steps", 8.0, 32) == 8 and to_int("steps", None, 32) == 32
    with pytest.raises(CellError, match=r"steps must be a whole number, got 2\.5"):
        to_int("steps", 2.5, 32)
    with pytest.raises(CellError, match="paths must be >= 2"):
        to_int("paths", 1.0, 100, 2)
    assert to_bool("antithetic", True, False) and not to_bool("antithetic", None, False)
    assert to_bool("antithetic", "yes", False) and not to_bool("antithetic", 0.0, True)
    with pytest.raises(CellError, match="TRUE or FALSE"):
        to_bool("antithetic", 2.0, False)
    assert to_choice("kind", " Put ", ("call", "put"), "call") == "put"
    assert to_choice("kind", None, ("call", "put"), "call") == "call"
    with pytest.raises(CellError, match="kind must be one of call, put, got the text 'straddle'"):
        to_choice("kind", "straddle", ("call", "put"), "call")
