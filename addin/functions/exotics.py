"""Cells on exotic options: ROOTVAR_EXOTIC_PRICE and ROOTVAR_EXOTIC_CHECK.

:func:`product_from_cells` builds a core product (European, barrier,
arithmetic or geometric Asian, forward start, digital) from plain cells;
ROOTVAR_EXOTIC_PRICE prices it by Monte Carlo with a control variate and
ROOTVAR_EXOTIC_CHECK prices it a second way (PDE, Fourier or a reference run)
with a verdict.  The exotic engines load on the first such call, not with the
cells.
"""

from __future__ import annotations

import math

import numpy as np

from rootvar.addin.cells import (
    CellError,
    to_choice,
    to_int,
    to_number,
    to_numbers,
    to_params,
    within,
)
from rootvar.addin.functions.arguments import (
    KINDS,
    MAX_SEED,
    MAX_YEARS,
    MIN_MATURITY,
    PARAMS_DOC,
    SCHEME_NAMES,
    check_work,
    path_step_cap,
)
from rootvar.addin.functions.registry import cell_cache, sheet_function
from rootvar.addin.functions.results import pairs
from rootvar.core import DEFAULT_SEED, DEFAULT_Z, MAX_Z, InputError

__all__ = [
    "ASIAN_FIXINGS_PER_YEAR",
    "EXOTIC_CONTROLS",
    "EXOTIC_PRODUCTS",
    "ROOTVAR_EXOTIC_CHECK",
    "ROOTVAR_EXOTIC_PRICE",
    "product_from_cells",
]


#: Product words a cell takes (spaces or hyphens for underscores): "asian" is the
#: arithmetic average, "geometric asian" the geometric one.
EXOTIC_PRODUCTS = ("european", "barrier", "asian", "geometric_asian", "forward_start", "digital")
#: Control variates a cell takes (see rootvar.core.montecarlo.exotic).
EXOTIC_CONTROLS = ("auto", "none", "european", "geometric_asian", "forward_start")
#: Fixings per year of an Asian whose dates are left empty (monthly).
ASIAN_FIXINGS_PER_YEAR = 12

_EXOTIC_DOCS = dict(
    params=PARAMS_DOC,
    spot="spot price, > 0",
    product="european, barrier, asian (arithmetic average), geometric asian, forward start "
    "or digital",
    kind="call or put (empty: call)",
    strike="strike, > 0 (forward start: leave empty and give strike_share)",
    maturity="years, in [0.001, 100] (Asian: the last fixing date)",
    barrier="barrier level, > 0 (barrier only)",
    direction="up or down (empty: down when the barrier is below the spot, else up)",
    knock="out or in (empty: out)",
    rebate="cash paid at the hit (knock-out) or at expiry if never hit (knock-in) (empty: 0)",
    dates="range of dates in years: a barrier's monitoring dates (empty: continuous) or an "
    "Asian's fixing dates (empty: monthly up to the maturity)",
    start="forward start: the date the strike is set, years, >= 0 and < maturity",
    strike_share="forward start: the strike as a share of the spot at the start (empty: 1)",
    cash="digital: the amount paid (empty: 1)",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    scheme="euler_absorb, euler_reflect, euler_partial, euler_full, qe, qe_martingale or "
    "exact_variance (empty: qe)",
    # Literal numbers, so that loading the cells does not load the exotic engine; a test holds
    # them to the engine's constants.
    steps="time steps per year; every fixing, monitoring and start date is a step end (empty: "
    "256 for a continuously watched barrier, else 64)",
    paths="number of paths, even, 1,000 to 10,000,000 (empty: 100000)",
    seed=f"random seed (empty: {DEFAULT_SEED})",
    control="auto, none, european, geometric asian or forward start (empty: auto)",
)


def _empty(value) -> bool:
    cells = np.ravel(np.array(value, dtype=object)) if isinstance(value, (list, tuple)) else [value]
    return all(c is None or (isinstance(c, str) and not c.strip()) for c in cells)


def product_from_cells(spot, product, kind, strike, maturity, barrier, direction, knock, rebate,
                    dates, start, strike_share, cash):  # fmt: skip
    """A core product from plain cells; arguments that do not apply must stay empty."""
    from rootvar.core import (
        AsianOption,
        BarrierOption,
        DigitalOption,
        EuropeanOption,
        ForwardStartOption,
    )

    what = to_choice("product", product, EXOTIC_PRODUCTS, "")
    if not what:
        raise CellError(f"product must be one of {', '.join(EXOTIC_PRODUCTS)}, got an empty cell")
    kd = to_choice("kind", kind, KINDS, "call")
    given = {
        "strike": strike, "barrier": barrier, "direction": direction, "knock": knock,
        "rebate": rebate, "dates": dates, "start": start, "strike_share": strike_share,
        "cash": cash,
    }  # fmt: skip
    uses = {
        "european": ("strike",),
        "barrier": ("strike", "barrier", "direction", "knock", "rebate", "dates"),
        "asian": ("strike", "dates"),
        "geometric_asian": ("strike", "dates"),
        "forward_start": ("start", "strike_share"),
        "digital": ("strike", "cash"),
    }[what]
    extra = [name for name, value in given.items() if name not in uses and not _empty(value)]
    if extra:
        words = what.replace("_", " ")
        raise CellError(f"a {words} takes no {', '.join(extra)}: leave those cells empty")
    t = within("maturity", to_number("maturity", maturity, ">0"), MIN_MATURITY, MAX_YEARS)
    try:
        if what == "forward_start":
            t0 = to_number("start", start, ">=0")
            share = to_number("strike_share", strike_share, ">0", default=1.0)
            within("strike_share", share, 0.05, 20.0)
            return ForwardStartOption(kd, t0, t, share)
        k = to_number("strike", strike, ">0")
        within("strike / spot", k / spot, math.exp(-20.0), math.exp(20.0))
        if what == "european":
            return EuropeanOption(kd, k, t)
        if what == "digital":
            return DigitalOption(kd, k, t, to_number("cash", cash, ">0", default=1.0))
        if what == "barrier":
            b = to_number("barrier", barrier, ">0")
            way = to_choice("direction", direction, ("up", "down"), "down" if b < spot else "up")
            kn = to_choice("knock", knock, ("out", "in"), "out")
            paid = to_number("rebate", rebate, ">=0", default=0.0)
            watch = None if _empty(dates) else tuple(to_numbers("dates", dates, ">0"))
            return BarrierOption(kd, k, t, b, way, kn, paid, watch)
        if _empty(dates):
            n = max(1, round(ASIAN_FIXINGS_PER_YEAR * t))
            fixings = tuple(t * (j + 1) / n for j in range(n))
        else:
            fixings = tuple(sorted(to_numbers("dates", dates, ">0")))
            if abs(fixings[-1] - t) > 1e-9 * t:
                raise CellError(
                    f"maturity must be the last fixing date {float(fixings[-1]):g} of an Asian, "
                    f"got {t:g}"
                )
        average = "geometric" if what == "geometric_asian" else "arithmetic"
        return AsianOption(kd, k, fixings, average)
    except InputError as exc:
        raise CellError(str(exc)) from exc


def _exotic_run_args(scheme, steps, paths, seed, control):
    from rootvar.core.checks.exotic import DEFAULT_EXOTIC_PATHS, DEFAULT_EXOTIC_SCHEME

    sch = to_choice("scheme", scheme, SCHEME_NAMES, DEFAULT_EXOTIC_SCHEME)
    n_steps = None if _empty(steps) else to_int("steps", steps, 1, 1, 100_000)
    n_paths = to_int("paths", paths, DEFAULT_EXOTIC_PATHS, 1_000, 10_000_000)
    if n_paths % 2:
        raise CellError(f"paths must be even (antithetic draws), got {n_paths}")
    sd = to_int("seed", seed, DEFAULT_SEED, 0, MAX_SEED)
    cv = to_choice("control", control, EXOTIC_CONTROLS, "auto")
    return sch, n_steps, n_paths, sd, cv


@cell_cache(maxsize=128)
def _cached_exotic(p, s, product, r, q, scheme, steps, paths, seed, control):
    from rootvar.core import mc_exotic

    try:
        return mc_exotic(
            p, s, product, r, q, scheme=scheme, steps=steps, paths=paths, seed=seed,
            antithetic=True, control=control,
        )  # fmt: skip
    except InputError as exc:  # e.g. a control variate that does not fit the product
        raise CellError(str(exc)) from exc


def _exotic_inputs(params, spot, product, kind, strike, maturity, barrier, direction, knock,
                   rebate, dates, start, strike_share, cash, rate, div_yield, scheme, steps,
                   paths, seed, control, checking=False):  # fmt: skip
    p = to_params("params", params)
    s = to_number("spot", spot, ">0")
    prod = product_from_cells(s, product, kind, strike, maturity, barrier, direction, knock,
                           rebate, dates, start, strike_share, cash)  # fmt: skip
    r = within("rate", to_number("rate", rate, default=0.0), -1.0, 1.0)
    q = within("div_yield", to_number("div_yield", div_yield, default=0.0), -1.0, 1.0)
    sch, n_steps, n_paths, sd, cv = _exotic_run_args(scheme, steps, paths, seed, control)
    # at least this many steps in all (the grid adds the fixing and monitoring dates);
    # an arithmetic Asian's check adds a reference run at twice the steps
    least = math.ceil((n_steps or 64) * prod.maturity)
    twice = getattr(prod, "average", "") == "arithmetic" and checking
    check_work(n_paths, least * (3 if twice else 1))
    key = (p, s, prod, r, q, sch, n_steps, n_paths, sd, cv)
    return key, _cached_exotic(*key)


@sheet_function(
    "table: label / value rows (price, std error, 95% interval, control variate, its "
    "coefficient, variance reduction, price and std error without it, scheme, steps, seconds, "
    "notes such as why an already-knocked price is exact)",
    **_EXOTIC_DOCS,
)
def ROOTVAR_EXOTIC_PRICE(
    params, spot, product, kind=None, strike=None, maturity=None, barrier=None,
    direction=None, knock=None, rebate=None, dates=None, start=None, strike_share=None,
    cash=None, rate=None, div_yield=None, scheme=None, steps=None, paths=None, seed=None,
    control=None,
):  # fmt: skip
    """Exotic option price under Heston by Monte Carlo with a control variate."""
    _, run = _exotic_inputs(params, spot, product, kind, strike, maturity, barrier, direction,
                             knock, rebate, dates, start, strike_share, cash, rate, div_yield,
                             scheme, steps, paths, seed, control)  # fmt: skip
    return pairs(
        [
            ["price", run.price],
            ["std error", run.std_error],
            ["95% low", run.ci_low],
            ["95% high", run.ci_high],
            ["control variate", run.control],
            ["control coefficient", run.control_coefficient],
            ["variance reduction", run.variance_reduction],
            ["price without control", run.uncontrolled_price],
            ["std error without control", run.uncontrolled_std_error],
            ["scheme", run.scheme],
            ["steps", int(run.steps)],
            ["seconds", run.elapsed_s],
            ["notes", "; ".join(run.notes)],  # e.g. why an already-knocked price is exact
        ]
    )


@sheet_function(
    "table: label / value rows: both prices, the second method and its error, the "
    "difference, the band, the verdict, paths to settle and the reason",
    **_EXOTIC_DOCS,
    tolerance="tolerance in price, > 0 (empty: 0.1% of the spot; a digital's 1% of its cash)",
    z=f"band width in standard errors (empty: {DEFAULT_Z:g})",
)
def ROOTVAR_EXOTIC_CHECK(
    params, spot, product, kind=None, strike=None, maturity=None, barrier=None,
    direction=None, knock=None, rebate=None, dates=None, start=None, strike_share=None,
    cash=None, rate=None, div_yield=None, scheme=None, steps=None, paths=None, seed=None,
    control=None, tolerance=None, z=None,
):  # fmt: skip
    """An exotic priced twice: Monte Carlo against the PDE, Fourier or a reference run.

    The second method is the PDE for barriers, Europeans and digitals, the
    certified Fourier price for geometric Asians and forward starts, and a
    reference Monte Carlo run (exact variance sampling, independent seed) for
    arithmetic Asians.
    """
    key, run = _exotic_inputs(
        params, spot, product, kind, strike, maturity, barrier, direction, knock, rebate,
        dates, start, strike_share, cash, rate, div_yield, scheme, steps, paths, seed, control,
        checking=True,
    )  # fmt: skip
    tol = None if _empty(tolerance) else to_number("tolerance", tolerance, ">0")
    width = within("z", to_number("z", z, ">0", default=DEFAULT_Z), 1e-3, MAX_Z)
    c = _cached_exotic_check(key, tol, width)
    reason = c.reason
    cap = path_step_cap()
    if c.paths_to_settle > 0 and cap is not None and c.paths_to_settle * c.steps > cap:
        reason += (
            f"; {c.paths_to_settle:,} paths x {c.steps} steps is over the cap of {cap:,} "
            "path-steps for one cell"
        )
    return pairs(
        [
            ["Monte Carlo price", run.price],
            ["std error", run.std_error],
            ["second method", c.second_method],
            ["second price", c.second_price],
            ["second error", c.second_error],
            ["second error is a", c.second_error_kind or "none"],
            ["second status", c.second_status],
            ["difference", c.diff],
            ["band half-width", c.band],
            ["tolerance", c.tolerance],
            ["verdict", c.verdict],
            ["paths to settle", c.paths_to_settle],
            ["reason", reason],
        ]
    )


@cell_cache(maxsize=64)
def _cached_exotic_check(key, tol, width):
    from rootvar.core import compare_exotic

    p, s, prod, r, q = key[:5]
    try:
        return compare_exotic(
            p, s, prod, r, q, tolerance=tol, z=width, mc_result=_cached_exotic(*key)
        )
    except InputError as exc:
        raise CellError(str(exc)) from exc
