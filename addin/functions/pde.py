"""The cell priced by finite differences: ROOTVAR_PDE_PRICE.

A European or barrier option (continuous or discrete monitoring, knock-out or
knock-in, with a rebate) priced by ``rootvar.core.pde_price`` on a refined
grid, with its error estimate and greeks, one solve per distinct input.
"""

from __future__ import annotations

from rootvar.addin.cells import (
    CellError,
    to_choice,
    to_int,
    to_number,
    to_numbers,
    to_params,
    within,
)
from rootvar.addin.functions.arguments import KINDS, MAX_YEARS, MIN_MATURITY, PARAMS_DOC
from rootvar.addin.functions.registry import cell_cache, sheet_function
from rootvar.addin.functions.results import pairs

__all__ = ["MAX_PDE_WORK", "ROOTVAR_PDE_PRICE"]

#: Most grid points times time steps one cell may ask for (about ten seconds).
MAX_PDE_WORK = 20_000_000


def _pde_product(spot, strike, maturity, kind, barrier, direction, knock, rebate, monitoring):
    """A product from plain cells: a European when ``barrier`` is empty."""
    from rootvar.core import BarrierOption, EuropeanOption, InputError

    k = to_number("strike", strike, ">0")
    t = within("maturity", to_number("maturity", maturity, ">0"), MIN_MATURITY, MAX_YEARS)
    kd = to_choice("kind", kind, KINDS, "call")
    empty = barrier is None or (isinstance(barrier, str) and not barrier.strip())
    try:
        if empty:
            extras = {"direction": direction, "knock": knock, "rebate": rebate}
            extras["monitoring"] = monitoring
            given = [name for name, value in extras.items() if value not in (None, "")]
            if given:
                raise CellError(f"barrier is empty, so leave {', '.join(given)} empty too")
            return EuropeanOption(kd, k, t)
        b = to_number("barrier", barrier, ">0")
        way = to_choice("direction", direction, ("up", "down"), "down" if b < spot else "up")
        kn = to_choice("knock", knock, ("out", "in"), "out")
        cash = to_number("rebate", rebate, ">=0", default=0.0)
        dates = None if monitoring is None else tuple(to_numbers("monitoring", monitoring, ">0"))
        return BarrierOption(kd, k, t, b, way, kn, cash, dates)
    except InputError as exc:
        raise CellError(str(exc)) from exc


@cell_cache(maxsize=64)
def _cached_pde(p, s, product, r, q, sizes):
    """One solve per distinct input: a sheet reads a block's cells with INDEX one by one."""
    from rootvar.core import pde_price

    return pde_price(p, s, product, r, q, grid=sizes)


@sheet_function(
    "table: label / value rows (price, error estimate, status, difference, delta, gamma, "
    "variance sensitivity, grid, time steps, seconds, note)",
    params=PARAMS_DOC,
    spot="spot price, > 0",
    strike="strike, > 0",
    maturity="years, > 0",
    kind="call or put (empty: call)",
    barrier="barrier level, > 0 (empty: a European option)",
    direction="up or down (empty: down when the barrier is below the spot, else up)",
    knock="out or in (empty: out)",
    rebate="cash paid at the hit (knock-out) or at expiry if never hit (knock-in) (empty: 0)",
    monitoring="range of monitoring dates in years, in (0, maturity] (empty: continuous)",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    grid="three cells: spot steps, variance steps, time steps of the finest grid "
    "(empty: 128, 64, 64)",
)
def ROOTVAR_PDE_PRICE(
    params,
    spot,
    strike,
    maturity,
    kind=None,
    barrier=None,
    direction=None,
    knock=None,
    rebate=None,
    monitoring=None,
    rate=None,
    div_yield=None,
    grid=None,
):
    """European or barrier option price under Heston by finite differences, with its error."""
    from rootvar.core import InputError
    from rootvar.core.pde.solver import DEFAULT_GRID

    p = to_params("params", params)
    s = to_number("spot", spot, ">0")
    product = _pde_product(s, strike, maturity, kind, barrier, direction, knock, rebate, monitoring)
    r = within("rate", to_number("rate", rate, default=0.0), -1.0, 1.0)
    q = within("div_yield", to_number("div_yield", div_yield, default=0.0), -1.0, 1.0)
    if grid is None:
        sizes = DEFAULT_GRID
    else:
        cells = to_numbers("grid", grid)
        if cells.size != 3:
            raise CellError(
                f"grid must be three cells (spot, variance, time steps), got {cells.size}"
            )
        sizes = tuple(
            to_int(f"grid {name}", n, 1, low)
            for name, n, low in zip(
                ("spot steps", "variance steps", "time steps"), cells, (32, 16, 8), strict=True
            )
        )
    if sizes[0] * sizes[1] * sizes[2] > MAX_PDE_WORK:
        raise CellError(
            f"grid spot x variance x time steps = {sizes[0] * sizes[1] * sizes[2]:,} exceeds "
            f"{MAX_PDE_WORK:,} for one cell"
        )
    try:
        res = _cached_pde(p, s, product, r, q, sizes)
    except InputError as exc:
        raise CellError(str(exc)) from exc
    return pairs(
        [
            ["price", res.price],
            ["error estimate", res.error_estimate],
            ["status", res.status],
            ["finest minus coarser grid", res.difference],
            ["delta", res.delta],
            ["gamma", res.gamma],
            ["variance sensitivity", res.variance_sensitivity],
            ["spot steps", res.grid[0]],
            ["variance steps", res.grid[1]],
            ["time steps", res.time_steps],
            ["seconds", res.seconds],
            ["note", res.note or res.method],
        ]
    )
