"""What a cell's arguments may be: the checks, ranges and choices several job modules share.

Every cell reads its arguments through :mod:`rootvar.addin.cells`; this module
holds what more than one job module asks of them: the market arguments of a
vanilla (:func:`market_args`), a strike that must be a single cell, the ranges
of maturities and seeds, the kinds and schemes a cell takes, the help text of a
parameter block, and the per-cell cap on paths x steps (:data:`MAX_PATH_STEPS`,
set for a run by :func:`work_cap`, read by :func:`path_step_cap`, checked by
:func:`check_work`).
"""

from __future__ import annotations

import contextlib
import contextvars
import math

from rootvar.addin.cells import CellError, to_choice, to_number, to_numbers, within
from rootvar.core import SCHEMES

__all__ = [
    "KINDS",
    "MAX_PATH_STEPS",
    "MAX_SEED",
    "MAX_YEARS",
    "MIN_MATURITY",
    "PARAMS_DOC",
    "SCHEME_NAMES",
    "check_work",
    "market_args",
    "path_step_cap",
    "single_strike",
    "work_cap",
]

#: Most path-steps one cell may ask for in a spreadsheet program; bigger runs
#: belong in an asynchronous function or the headless engine, which has no
#: cap unless one is asked for (``rootvar compute --max-path-steps``).
MAX_PATH_STEPS = 50_000_000

# The cap in force for the calls of this thread/context: the spreadsheet's by
# default, lifted by the headless engine through work_cap(None).
_CAP: contextvars.ContextVar[int | None] = contextvars.ContextVar("cap", default=MAX_PATH_STEPS)


@contextlib.contextmanager
def work_cap(max_path_steps: int | None):
    """Run the enclosed calls with another per-cell cap on paths x steps (``None``: no cap)."""
    token = _CAP.set(max_path_steps)
    try:
        yield
    finally:
        _CAP.reset(token)


def path_step_cap() -> int | None:
    """The cap on paths x steps in force for the calls of this thread/context (``None``: none)."""
    return _CAP.get()


KINDS = ("call", "put")
#: Largest seed a cell takes: 15 digits, all a spreadsheet keeps of a number, so a
#: seed copied out of a cell and typed back in is the same seed.
MAX_SEED = 10**15 - 1
SCHEME_NAMES = tuple(SCHEMES)


PARAMS_DOC = (
    "Heston parameters: a two-column label/value block (v0, kappa, theta, "
    "vol_of_vol, rho) or five cells in that order"
)


#: Longest maturity or horizon a cell takes, years.
MAX_YEARS = 100.0
#: Shortest option maturity a cell prices, years (about two trading hours): below
#: it the certified Fourier range needs more terms than its cap for high variances.
MIN_MATURITY = 1e-3


def market_args(spot, strike, maturity, rate, div_yield, kind):
    s = to_number("spot", spot, ">0")
    ks = to_numbers("strike", strike, ">0")
    for k in ks:  # beyond e^20 either way an option is all intrinsic or worthless
        within("strike / spot", float(k) / s, math.exp(-20.0), math.exp(20.0))
    return (
        s,
        ks,
        within("maturity", to_number("maturity", maturity, ">0"), MIN_MATURITY, MAX_YEARS),
        within("rate", to_number("rate", rate, default=0.0), -1.0, 1.0),
        within("div_yield", to_number("div_yield", div_yield, default=0.0), -1.0, 1.0),
        to_choice("kind", kind, KINDS, "call"),
    )


def single_strike(strikes) -> float:
    if strikes.size != 1:
        raise CellError(f"strike must be a single cell here, got {strikes.size} strikes")
    return float(strikes[0])


def check_work(paths: int, steps: int, cells: int = 1) -> None:
    cap = _CAP.get()
    if cap is not None and paths * steps * cells > cap:
        where = (
            "a spreadsheet cell; rootvar compute runs it headless without this cap"
            if cap == MAX_PATH_STEPS
            else "this run (rootvar compute --max-path-steps)"
        )
        raise CellError(
            f"paths x steps = {paths * steps * cells:,} exceeds the cap of {cap:,} "
            f"path-steps for {where}"
        )
