"""The finite-difference cell, called as xlwings would call it: ROOTVAR_PDE_PRICE."""

import pytest
from support.cells import BLOCK, P

from rootvar.addin.cells import MARK
from rootvar.addin.functions import call
from rootvar.core import heston_price


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
