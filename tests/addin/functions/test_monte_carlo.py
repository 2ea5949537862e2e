"""The Monte Carlo cells, called as xlwings would: the price, its check, the step study."""

import pytest
from support.cells import BLOCK, P

from rootvar.addin.functions import call, clear_cache
from rootvar.core import heston_price, mc_price


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


def test_all_blank_schemes_mean_the_default():
    args = (BLOCK, 100.0, 100.0, 1.0, 0, 0, "call")
    tail = ([[2.0], [4.0]], 1000.0, 5.0, 5.0)
    blank = call("ROOTVAR_STEP_STUDY", *args, [[None], [""], ["  "]], *tail)
    default = call("ROOTVAR_STEP_STUDY", *args, None, *tail)
    assert blank == default
    assert {row[0] for row in blank[1:-1]} == {"euler_full", "qe", "exact_variance"}


def test_a_seed_read_back_from_a_cell_reproduces_the_row():
    # A spreadsheet keeps 15 significant digits (common practice, no source): the largest
    # seed a cell takes survives the round trip through the text a cell shows.
    from rootvar.addin.functions import MAX_SEED
    from rootvar.core.checks.daily import row_seed

    for seed in (MAX_SEED, row_seed(20240601, "ALD-EQX"), row_seed(7, "QLN-FXB")):
        assert seed <= MAX_SEED
        shown = f"{float(seed):.15g}"  # what the cell displays and a user copies
        assert int(float(shown)) == seed
        clear_cache()
        first = call("ROOTVAR_MC_PRICE", BLOCK, 100.0, 100.0, 1.0, 0, 0, "call", "qe", 4, 2000,
                     float(seed))  # fmt: skip
        clear_cache()
        again = call("ROOTVAR_MC_PRICE", BLOCK, 100.0, 100.0, 1.0, 0, 0, "call", "qe", 4, 2000,
                     float(shown))  # fmt: skip
        assert first[:7] == again[:7]  # every row but the timing


@pytest.mark.slow
def test_default_step_study_recommends_a_scheme_on_every_demo_model():
    # the flagship answer with every default: a scheme and step, not "none consistent"
    from rootvar.addin.workbooks.demo_desk import demo_models

    for m in demo_models():
        p = m.params
        block = [["v0", p.v0], ["kappa", p.kappa], ["theta", p.theta]]
        block += [["vol_of_vol", p.vol_of_vol], ["rho", p.rho]]
        rows = call("ROOTVAR_STEP_STUDY", block, m.spot, m.spot, 1.0)
        assert rows[-1][0] == "recommendation"
        text = rows[-1][1]
        assert text.split(" at ")[0] in ("euler_full", "qe", "exact_variance"), (m.model_id, text)
        # the recommended cell itself is consistent in the table
        scheme, steps = text.split(" at ")[0], int(text.split(" at ")[1].split()[0])
        cell = [r for r in rows[1:-1] if r[0] == scheme and r[1] == steps]
        assert cell and "consistent" in cell[0]
