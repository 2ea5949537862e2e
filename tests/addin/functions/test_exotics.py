"""The exotic cells, called as xlwings would: ROOTVAR_EXOTIC_PRICE and ROOTVAR_EXOTIC_CHECK."""

import pytest

from rootvar.addin.cells import MARK
from rootvar.addin.functions import call
from rootvar.core import HestonParams

#: Fang & Oosterlee (2008), SIAM J. Sci. Comput. 31(2), Heston test case, as a cell block.
FO_BLOCK = [["v0", 0.0175], ["kappa", 1.5768], ["theta", 0.0398], ["vol_of_vol", 0.5751],
            ["rho", -0.5711]]  # fmt: skip
FO = HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711)


def _exotic_args(product, check=False, **cells):
    names = ("kind", "strike", "maturity", "barrier", "direction", "knock", "rebate", "dates",
             "start", "strike_share", "cash", "rate", "div_yield", "scheme", "steps", "paths",
             "seed", "control", "tolerance", "z")  # fmt: skip
    return [FO_BLOCK, 100.0, product, *[cells.get(n) for n in names[: 20 if check else 18]]]


def test_exotic_price_spills_the_core_run_with_and_without_control():
    from rootvar.core import BarrierOption, mc_exotic

    args = _exotic_args("down and out", strike=100.0, maturity=1.0, barrier=90.0, paths=20_000)
    assert call("ROOTVAR_EXOTIC_PRICE", *args).startswith(MARK)  # not a product word
    args[2] = "barrier"
    rows = call("ROOTVAR_EXOTIC_PRICE", *args)
    table = dict(rows)
    direct = mc_exotic(FO, 100.0, BarrierOption("call", 100.0, 1.0, 90.0, "down", "out"),
                       paths=20_000)  # fmt: skip
    # the same seed and settings give the same numbers (reproducibility, README)
    assert table["price"] == direct.price and table["std error"] == direct.std_error
    assert table["control variate"] == "european"
    assert table["price without control"] == direct.uncontrolled_price
    assert table["variance reduction"] == direct.variance_reduction > 1.0
    assert table["steps"] == direct.steps
    assert [r[0] for r in rows][:2] == ["price", "std error"]


def test_exotic_check_gives_the_core_verdict():
    from rootvar.core import ForwardStartOption, compare_exotic

    args = _exotic_args("forward start", True, maturity=1.0, start=0.5, paths=20_000)
    rows = call("ROOTVAR_EXOTIC_CHECK", *args)
    table = dict(rows)
    direct = compare_exotic(FO, 100.0, ForwardStartOption("call", 0.5, 1.0, 1.0), paths=20_000)
    assert table["second method"] == "Fourier"
    assert table["second price"] == direct.second_price
    assert table["verdict"] == direct.verdict
    assert table["tolerance"] == pytest.approx(0.1)  # 0.1% of spot 100 by default
    assert rows[-1][0] == "reason" and table["reason"] == direct.reason


def test_exotic_cells_build_every_product():
    # every product word builds its contract; an empty Asian date range means monthly fixings
    for product, cells in (
        ("european", {"strike": 100.0, "maturity": 1.0}),
        ("asian", {"strike": 100.0, "maturity": 1.0}),
        ("geometric asian", {"strike": 100.0, "maturity": 0.5, "dates": [[0.25], [0.5]]}),
        ("digital", {"strike": 100.0, "maturity": 1.0, "cash": 5.0}),
        ("barrier", {"strike": 100.0, "maturity": 1.0, "barrier": 120.0, "knock": "in",
                     "dates": [[0.5], [1.0]]}),
    ):  # fmt: skip
        out = call("ROOTVAR_EXOTIC_PRICE", *_exotic_args(product, paths=2_000, steps=8, **cells))
        assert isinstance(out, list), (product, out)
    from rootvar.addin.functions.exotics import product_from_cells

    asian = product_from_cells(100.0, "asian", None, 100.0, 1.0, *[None] * 8)
    assert asian.fixings == pytest.approx([(j + 1) / 12 for j in range(12)])


@pytest.mark.parametrize(
    "product, cells, fragment",
    [
        (None, {"strike": 100.0, "maturity": 1.0}, "product must be one of"),
        ("european", {"strike": 100.0, "maturity": 1.0, "barrier": 90.0},
         "a european takes no barrier"),
        ("forward start", {"strike": 100.0, "maturity": 1.0, "start": 0.5},
         "a forward start takes no strike"),
        ("forward start", {"maturity": 1.0, "start": 1.5}, "maturity must be > start"),
        ("asian", {"strike": 100.0, "maturity": 2.0, "dates": [[0.5], [1.0]]},
         "maturity must be the last fixing date"),
        ("barrier", {"strike": 100.0, "maturity": 1.0}, "barrier must be a number"),
        ("digital", {"strike": 100.0, "maturity": 1.0, "cash": -1.0}, "cash must be > 0"),
        ("european", {"strike": 100.0, "maturity": 1.0, "paths": 1001}, "paths must be even"),
        ("barrier", {"strike": 100.0, "maturity": 1.0, "barrier": 90.0, "control": "forward start"},
         "control must be one of"),
        ("asian", {"strike": 100.0, "maturity": 1.0, "paths": 10_000_000, "steps": 1000},
         "exceeds the cap"),
    ],
)  # fmt: skip
def test_exotic_bad_input_is_marked_text(product, cells, fragment):
    for check, name in enumerate(("ROOTVAR_EXOTIC_PRICE", "ROOTVAR_EXOTIC_CHECK")):
        out = call(name, *_exotic_args(product, bool(check), **cells))
        assert isinstance(out, str) and out.startswith(MARK), out
        assert fragment in out and "InputError" not in out, out


def test_exotic_price_says_why_a_knocked_barrier_is_worth_its_exact_value():
    # a continuous down-and-out whose spot is already at the barrier is dead:
    # worth nothing without a rebate (the definition of the contract), and the
    # spill must carry the reason rather than a bare zero
    rows = call(
        "ROOTVAR_EXOTIC_PRICE",
        *_exotic_args("barrier", strike=100.0, maturity=1.0, barrier=100.0, direction="down"),
    )
    table = dict(rows)
    assert table["price"] == 0.0 and table["std error"] == 0.0
    assert "already knocked" in table["notes"]
    assert dict(call("ROOTVAR_EXOTIC_PRICE", *_exotic_args(
        "barrier", strike=100.0, maturity=1.0, barrier=90.0, paths=2_000, steps=8
    )))["notes"] == ""  # fmt: skip


def test_exotic_messages_name_the_product_in_words():
    text = call(
        "ROOTVAR_EXOTIC_PRICE",
        *_exotic_args("asian", strike=100.0, maturity=1.0, control="forward_start"),
    )
    assert text.startswith(MARK) and "for arithmetic Asian options" in text
    assert "Option" not in text and "np.float64" not in text
    text = call(
        "ROOTVAR_EXOTIC_PRICE",
        *_exotic_args("asian", strike=100.0, maturity=1.0, dates=[[0.5], [2.0]]),
    )
    assert "maturity must be the last fixing date 2 of an Asian, got 1" in text
