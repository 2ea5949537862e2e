"""Spreadsheet functions called as xlwings would call them."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rootvar.addin.cells import MARK
from rootvar.addin.functions import REGISTRY, call, clear_cache
from rootvar.core import (
    HestonParams,
    cir_transition,
    euler_max_step,
    euler_negative_probability,
    heston_price,
    implied_vol,
    mc_price,
)

BLOCK = [["v0", 0.04], ["kappa", 0.5], ["theta", 0.04], ["vol_of_vol", 1.0], ["rho", -0.9]]
P = HestonParams(0.04, 0.5, 0.04, 1.0, -0.9)


def test_registry_names_are_ours_and_documented():
    assert len(REGISTRY) >= 12
    for name, entry in REGISTRY.items():
        assert name.startswith("ROOTVAR_")
        assert entry.summary and entry.result
        assert entry.func.__doc__


def test_values_equal_the_core():
    assert call("ROOTVAR_FELLER", BLOCK) == pytest.approx(P.feller_ratio, rel=1e-15)
    assert call("ROOTVAR_EULER_NEG_PROB", BLOCK, 1 / 52) == euler_negative_probability(
        0.04, 0.5, 0.04, 1.0, 1 / 52
    )
    assert call("ROOTVAR_EULER_NEG_PROB", BLOCK, 1 / 52, 0.01) == euler_negative_probability(
        0.01, 0.5, 0.04, 1.0, 1 / 52
    )
    assert call("ROOTVAR_EULER_SAFE_STEP", BLOCK, 1e-3) == euler_max_step(
        0.04, 0.5, 0.04, 1.0, 1e-3
    )
    assert euler_max_step(0.04, 5.0, 0.09, 0.3, 1e-3) == math.inf
    assert call("ROOTVAR_EULER_SAFE_STEP", [[0.04, 5.0, 0.09, 0.3, 0.0]], 1e-3) == "unbounded"
    law = cir_transition(0.04, 0.5, 0.04, 1.0, 2.0)
    assert call("ROOTVAR_VAR_QUANTILE", BLOCK, 2.0, 0.9) == pytest.approx(law.ppf(0.9), rel=1e-12)
    assert call("ROOTVAR_VAR_CDF", BLOCK, 2.0, 0.01) == pytest.approx(law.cdf(0.01), rel=1e-12)
    strikes = [[60.0], [100.0], [140.0]]
    column = call("ROOTVAR_FOURIER_PRICE", BLOCK, 100.0, strikes, 10.0)
    np.testing.assert_allclose(np.ravel(column), heston_price(P, 100, [60, 100, 140], 10.0))
    assert call(
        "ROOTVAR_FOURIER_PRICE", BLOCK, 100.0, 100.0, 10.0, None, None, "put"
    ) == pytest.approx(heston_price(P, 100, 100, 10.0, kind="put"))
    price = heston_price(P, 100, 100, 1.0)
    assert call("ROOTVAR_IMPLIED_VOL", price, 100, 100, 1.0) == pytest.approx(
        implied_vol(price, 100, 100, 1.0)
    )
    assert call("ROOTVAR_VERSION").startswith("rootvar ")


def test_variance_table_spills_a_header_and_one_row_per_horizon():
    rows = call("ROOTVAR_VAR_TABLE", BLOCK, [[0.5], [1.0], [2.0]], [[0.01], [0.5]])
    assert rows[0][0] == "horizon (years)" and len(rows) == 4
    assert all(len(r) == len(rows[0]) for r in rows)
    assert rows[3][0] == 2.0


def test_monte_carlo_functions_match_the_core_and_are_cached():
    clear_cache()
    out = call(
        "ROOTVAR_MC_PRICE", BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 8.0, 4096.0, 7.0
    )
    direct = mc_price(P, 100, 100.0, 1.0, scheme="qe", steps=8, paths=4096, seed=7)
    labels = [r[0] for r in out]
    assert labels[:4] == ["price", "std error", "95% low", "95% high"]
    assert out[0][1] == direct.price and out[1][1] == direct.std_error
    again = call(
        "ROOTVAR_MC_PRICE", BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 8.0, 4096.0, 7.0
    )
    assert again[-1][1] == out[-1][1]  # same elapsed time: served from the cache
    check = call(
        "ROOTVAR_MC_CHECK", BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 8.0, 4096.0, 7.0
    )
    assert dict(check)["verdict"] in ("consistent", "biased", "undecided")
    assert dict(check)["Fourier price"] == pytest.approx(heston_price(P, 100, 100.0, 1.0))


def test_step_study_spills_table_and_recommendation():
    rows = call(
        "ROOTVAR_STEP_STUDY", BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", [[2.0, 8.0]], 4096.0
    )
    assert rows[0][0] == "scheme" and rows[1][0] == "qe" and rows[-1][0] == "recommendation"
    assert len(rows) == 4


@pytest.mark.parametrize(
    "name, args, fragment",
    [
        ("ROOTVAR_FELLER", (None,), "params must be a range"),
        ("ROOTVAR_EULER_NEG_PROB", (BLOCK, "daily"), "dt must be a number, got the text 'daily'"),
        ("ROOTVAR_EULER_SAFE_STEP", (BLOCK, 1.5), "tolerance must lie in (0, 1), got 1.5"),
        ("ROOTVAR_VAR_QUANTILE", (BLOCK, 1.0, 0.0), "probability must lie in (0, 1)"),
        ("ROOTVAR_FOURIER_PRICE", (BLOCK, 100.0, -5.0, 1.0), "strike must be > 0, got -5.0"),
        ("ROOTVAR_IMPLIED_VOL", (1.0, 100.0, 80.0, 1.0), "no-arbitrage bounds"),
        (
            "ROOTVAR_MC_PRICE",
            (BLOCK, 100.0, 100.0, 1.0, None, None, None, "milstein"),
            "scheme must be one of",
        ),
        (
            "ROOTVAR_MC_PRICE",
            (BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 2.5),
            "steps must be a whole number",
        ),
        (
            "ROOTVAR_MC_PRICE",
            (BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 1000.0, 1e6),
            "exceeds",
        ),
        ("ROOTVAR_MC_CHECK", (BLOCK, 100.0, [[90.0, 100.0]], 1.0), "strike must be a single cell"),
    ],
)
def test_bad_input_comes_back_as_marked_text(name, args, fragment):
    out = call(name, *args)
    assert isinstance(out, str) and out.startswith(MARK)
    assert fragment in out


junk = st.one_of(
    st.none(),
    st.booleans(),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=6),
    st.sampled_from(["#N/A", "#DIV/0!", "call", "qe", "", " "]),
    st.lists(
        st.lists(
            st.one_of(st.none(), st.floats(-2, 2), st.text(max_size=3)), min_size=1, max_size=3
        ),
        min_size=1,
        max_size=6,
    ),
)


@settings(max_examples=300, deadline=None)
@given(st.sampled_from(sorted(REGISTRY)), st.lists(junk, max_size=6))
def test_junk_never_raises(name, args):
    # paths and steps stay small so a junk call that happens to be valid is quick
    entry = REGISTRY[name]
    n = len([p for p in __import__("inspect").signature(entry.func).parameters])
    args = args[:n]
    if name in ("ROOTVAR_MC_PRICE", "ROOTVAR_MC_CHECK", "ROOTVAR_STEP_STUDY") and len(args) > 8:
        args = [*args[:8], 2.0, 64.0]
    out = entry.func(*args)
    assert out is not None
    if isinstance(out, str) and out.startswith(MARK):
        assert "\n" not in out


def test_readme_function_reference_is_generated_from_the_code():
    from pathlib import Path

    from rootvar.addin.reference import updated_readme

    readme = Path(__file__).resolve().parents[1] / "README.md"
    text = readme.read_text(encoding="utf-8")
    assert updated_readme(text) == text, "run: python -m rootvar.addin.reference README.md"


def test_pde_price_spills_price_error_status_and_greeks():
    # identical to the core call (same grid, deterministic)
    from rootvar.core import BarrierOption, pde_price

    rows = call("ROOTVAR_PDE_PRICE", BLOCK, 100.0, 100.0, 1.0, "call", 90.0, None, None, None, None)
    table = dict(rows)
    direct = pde_price(P, 100.0, BarrierOption("call", 100.0, 1.0, 90.0, "down", "out"))
    assert table["price"] == direct.price
    assert table["error estimate"] == direct.error_estimate
    assert table["status"] in ("converged", "not converged") and table["status"] == direct.status
    assert [r[0] for r in rows][4:7] == ["delta", "gamma", "variance sensitivity"]
    european = dict(call("ROOTVAR_PDE_PRICE", BLOCK, 100.0, 100.0, 1.0, "put"))
    # certified Fourier price as the reference (rootvar.core.heston_price)
    assert abs(european["price"] - heston_price(P, 100, 100, 1.0, kind="put")) <= 0.1


@pytest.mark.parametrize(
    "args, fragment",
    [
        ((BLOCK, 100.0, 100.0, 1.0, None, None, "up"), "barrier is empty, so leave direction"),
        ((BLOCK, 100.0, 100.0, 1.0, None, 90.0, "sideways"), "direction must be one of"),
        ((BLOCK, 100.0, 100.0, 1.0, None, 90.0, None, None, None, [[0.5, 2.0]]), "monitoring"),
        ((BLOCK, 100.0, 100.0, 1.0, *[None] * 8, [[16.0, 16.0, 16.0]]), "grid spot steps"),
        ((BLOCK, 100.0, 100.0, 1.0, *[None] * 8, [[64.0, 32.0]]), "grid must be three cells"),
        ((BLOCK, 100.0, 100.0, 1.0, *[None] * 8, [[2000.0, 1000.0, 100.0]]), "exceeds"),
    ],
)
def test_pde_price_bad_input_is_marked_text(args, fragment):
    out = call("ROOTVAR_PDE_PRICE", *args)
    assert isinstance(out, str) and out.startswith(MARK) and "InputError" not in out
    assert fragment in out
