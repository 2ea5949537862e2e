"""Cells on Greeks: ROOTVAR_GREEKS (one method's table) and ROOTVAR_GREEKS_CHECK (priced twice).

ROOTVAR_GREEKS gives a European call's or put's price and every Greek of
:data:`rootvar.core.GREEK_NAMES` by one method (the certified Fourier series,
Monte Carlo on the price's own paths, or the finite-difference grid), each with
the method's error figure, its unit and how it was obtained.
ROOTVAR_GREEKS_CHECK holds the Monte Carlo Greeks of a European, a
continuously watched barrier or a digital against a second method (Fourier for
the European, the PDE for the others) with a verdict per Greek
(:func:`rootvar.core.compare_greeks`).  Both spill a fixed shape, one row per
Greek whether the method gives it or not, so an array formula over the table
never moves.  The Greek engines load on the first such call, not with the cells.
"""

from __future__ import annotations

import math

from rootvar.addin.cells import CellError, to_choice, to_int, to_number, to_params, within
from rootvar.addin.functions.arguments import (
    MAX_SEED,
    PARAMS_DOC,
    SCHEME_NAMES,
    check_work,
    market_args,
    single_strike,
)
from rootvar.addin.functions.exotics import product_from_cells
from rootvar.addin.functions.registry import cell_cache, sheet_function
from rootvar.addin.functions.results import finite
from rootvar.core import DEFAULT_SEED, DEFAULT_Z, MAX_Z, InputError
from rootvar.core.greeks import GREEK_NAMES, GREEK_UNITS

__all__ = [
    "CHECK_COLUMNS",
    "GREEKS_PATHS",
    "GREEKS_SCHEME",
    "GREEK_LABELS",
    "GREEK_METHODS",
    "GREEK_PRODUCTS",
    "NOT_CERTIFIED",
    "ROOTVAR_GREEKS",
    "ROOTVAR_GREEKS_CHECK",
    "fourier_route",
]

#: Methods ROOTVAR_GREEKS takes (spaces or hyphens for underscores).
GREEK_METHODS = ("fourier", "monte_carlo", "pde")
#: Products ROOTVAR_GREEKS_CHECK takes: those with Monte Carlo Greeks and a second method.
GREEK_PRODUCTS = ("european", "barrier", "digital")
#: The Monte Carlo scheme of a Greeks cell when left empty: an Euler scheme, so that the
#: variance Greeks have their pathwise tangent (rootvar.core.DEFAULT_GREEKS_SCHEME; a test
#: holds the two equal, the literal keeps the Monte Carlo engine unloaded with the cells).
GREEKS_SCHEME = "euler_full"
#: Paths of a Greeks cell when left empty (the core's default).
GREEKS_PATHS = 100_000
#: What a cell shows for a Greek its method computed but could not certify (a NaN).
NOT_CERTIFIED = "not certified"

#: Plain words for each Greek in a table's first column (definitions in rootvar.core.greeks).
GREEK_LABELS = {
    "price": "price",
    "delta": "delta",
    "gamma": "gamma",
    "theta": "theta",
    "vega": "vega",
    "rho_rate": "rho (rate)",
    "rho_div": "rho (dividend yield)",
    "d_v0": "dV/dv0",
    "d_kappa": "dV/dkappa",
    "d_theta": "dV/dtheta",
    "d_vol_of_vol": "dV/dvol_of_vol",
    "d_rho": "dV/drho",
}

_METHOD_WORDS = {
    "fourier": "Fourier",
    "monte_carlo": "Monte Carlo",
    "pde": "PDE (finite differences)",
}
#: How a price was found: by the Fourier route taken (:func:`fourier_route`), else the method.
_PRICE_HOW = {
    "contour": "certified contour integral",
    "COS": "certified COS series",
    "monte_carlo": "the Greeks' own paths",
    "pde": "ADI grid, refined twice",
}

_RUN_DOCS = dict(
    scheme="euler_absorb, euler_reflect, euler_partial, euler_full, qe, qe_martingale or "
    f"exact_variance (empty: {GREEKS_SCHEME}; only the Euler schemes give theta, vega and "
    "the variance Greeks)",
    steps="time steps per year (empty: 256 for a barrier, else 64)",
    paths=f"number of paths, even (antithetic), 1,000 to 10,000,000 (empty: {GREEKS_PATHS})",
    seed=f"random seed (empty: {DEFAULT_SEED})",
)

_MARKET_DOCS = dict(
    params=PARAMS_DOC,
    spot="spot price, > 0",
    kind="call or put (empty: call)",
    strike="strike, > 0",
    maturity="years, in [0.001, 100]",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
)

_GREEKS_DOCS = dict(
    **{k: _MARKET_DOCS[k] for k in ("params", "spot", "strike", "maturity")},
    **{k: _MARKET_DOCS[k] for k in ("rate", "div_yield", "kind")},
    method="fourier, monte carlo or pde (empty: fourier)",
    **{k: f"{v}; monte carlo only" for k, v in _RUN_DOCS.items()},
)

_CHECK_DOCS = dict(
    **{k: _MARKET_DOCS[k] for k in ("params", "spot")},
    product="european, barrier (watched continuously) or digital",
    **{k: _MARKET_DOCS[k] for k in ("kind", "strike", "maturity")},
    barrier="barrier level, > 0 (barrier only)",
    direction="up or down (empty: down when the barrier is below the spot, else up)",
    knock="out or in (empty: out)",
    rebate="cash paid at the hit (knock-out) or at expiry if never hit (knock-in) (empty: 0)",
    dates="leave empty: Greeks are for a continuously watched barrier (the cell keeps "
    "ROOTVAR_EXOTIC_CHECK's argument order)",
    start="leave empty (ROOTVAR_EXOTIC_CHECK's argument order)",
    strike_share="leave empty (ROOTVAR_EXOTIC_CHECK's argument order)",
    cash="digital: the amount paid (empty: 1)",
    **{k: _MARKET_DOCS[k] for k in ("rate", "div_yield")},
    **_RUN_DOCS,
    z=f"band width in standard errors (empty: {DEFAULT_Z:g})",
)


def _empty(value) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())


def _run_args(scheme, steps, paths, seed):
    sch = to_choice("scheme", scheme, SCHEME_NAMES, GREEKS_SCHEME)
    n_steps = None if _empty(steps) else to_int("steps", steps, 1, 1, 100_000)
    n_paths = to_int("paths", paths, GREEKS_PATHS, 1_000, 10_000_000)
    if n_paths % 2:
        raise CellError(f"paths must be even (antithetic draws), got {n_paths}")
    sd = to_int("seed", seed, DEFAULT_SEED, 0, MAX_SEED)
    return sch, n_steps, n_paths, sd


def _check_run_work(paths, steps, maturity, barrier):
    """The per-cell cap on paths x steps, steps per year as the Greeks engine counts them."""
    per_year = steps or (256 if barrier else 64)
    check_work(paths, max(1, math.ceil(per_year * maturity - 1e-9)))


def _noted(notes, name):
    """The reason a note gives for ``name`` (not certified / not given), or None."""
    for note in notes:
        for word in ("not certified: ", "not given: "):
            if note.startswith(f"{name} {word}"):
                return word + note[len(name) + 1 + len(word) :]
    return None


@cell_cache(maxsize=64)
def _cached_greeks(method, p, s, k, t, r, q, kind, scheme, steps, paths, seed):
    from rootvar.core import EuropeanOption, heston_greeks, mc_greeks, pde_greeks

    try:
        if method == "fourier":
            return heston_greeks(p, s, k, t, r, q, kind)
        option = EuropeanOption(kind, k, t)
        if method == "pde":
            return pde_greeks(p, s, option, r, q)
        return mc_greeks(p, s, option, r, q, scheme=scheme, steps=steps, paths=paths, seed=seed)
    except InputError as exc:  # e.g. |rho| = 1 for Monte Carlo, a diverging scheme
        raise CellError(str(exc)) from exc


@sheet_function(
    "table: a header row (Greek, unit, value, the method's error figure: std error for "
    "Monte Carlo, error estimate otherwise, estimator), the price, one row per Greek (delta, "
    "gamma, theta, vega, rho to the rate and the dividend yield, dV/d of v0, kappa, theta, "
    f"vol_of_vol, rho), then the method's notes; '{NOT_CERTIFIED}' where the method could "
    "not certify a Greek, empty where it does not give it",
    **_GREEKS_DOCS,
)
def ROOTVAR_GREEKS(
    params,
    spot,
    strike,
    maturity,
    rate=None,
    div_yield=None,
    kind=None,
    method=None,
    scheme=None,
    steps=None,
    paths=None,
    seed=None,
):
    """Price and Greeks of a European option under Heston by one method, with their errors.

    Units are the Greek's own: delta per unit spot, gamma per unit spot squared,
    theta per year of calendar time, the rhos per unit (1.00 = 100%) of the rate or
    yield, dV/dv0 and dV/dtheta per unit variance.  Vega is the desk's: a parallel
    shift of sqrt(v0) and sqrt(theta), per unit (1.00 = 100 vol points) of volatility.
    Fourier reads every Greek from the characteristic function's derivatives (nothing
    is bumped); Monte Carlo uses the price's own paths (conditional estimator, pathwise
    through the variance tangent on the Euler schemes); the PDE gives delta, gamma,
    theta and dV/dv0 from the refined grid.
    """
    p = to_params("params", params)
    s, ks, t, r, q, kd = market_args(spot, strike, maturity, rate, div_yield, kind)
    k = single_strike(ks)
    how = to_choice("method", method, GREEK_METHODS, "fourier")
    if how == "monte_carlo":
        sch, n_steps, n_paths, sd = _run_args(scheme, steps, paths, seed)
        _check_run_work(n_paths, n_steps, t, barrier=False)
    else:
        given = {"scheme": scheme, "steps": steps, "paths": paths, "seed": seed}
        extra = [name for name, value in given.items() if not _empty(value)]
        if extra:
            verb = "applies" if len(extra) == 1 else "apply"
            raise CellError(
                f"{', '.join(extra)} only {verb} to method monte carlo: leave "
                f"{'it' if len(extra) == 1 else 'them'} empty for method {how}"
            )
        sch = n_steps = n_paths = sd = None
    g = _cached_greeks(how, p, s, k, t, r, q, kd, sch, n_steps, n_paths, sd)
    figure = "std error" if how == "monte_carlo" else "error estimate"
    rows = [["Greek", "unit", "value", figure, "estimator"]]
    rows.append(["price", "ccy", _value(g.price), finite(g.price_error), _price_how(g)])
    used = set()
    for name in GREEK_NAMES:
        unit = GREEK_UNITS[name]
        why = _noted(g.notes, name)
        if why:
            used.update(n for n in g.notes if n.startswith(f"{name} not "))
        if name not in g.values:
            reason = why or f"not given by the {_METHOD_WORDS[how]} method"
            rows.append([GREEK_LABELS[name], unit, "", "", reason])
            continue
        value = g.values[name]
        how_text = g.estimators.get(name, "")
        if not math.isfinite(value):
            how_text = why or f"{NOT_CERTIFIED}: {how_text}"
        rows.append([GREEK_LABELS[name], unit, _value(value), finite(g.errors.get(name)), how_text])
    notes = [n for n in g.notes if n not in used]
    rows.append(["notes", "", "", "", "; ".join(notes)])
    return rows


def _value(x):
    """A Greek's value as a cell shows it: the number, or our text for a NaN."""
    return NOT_CERTIFIED if isinstance(x, float) and not math.isfinite(x) else finite(x)


def _greeks_product(spot, product, kind, strike, maturity, barrier, direction, knock, rebate,
                    dates, start, strike_share, cash):  # fmt: skip
    """A product a Greeks check takes: a European, a continuous barrier or a digital."""
    word = to_choice("product", product, GREEK_PRODUCTS, "")
    if not word:
        raise CellError(f"product must be one of {', '.join(GREEK_PRODUCTS)}, got an empty cell")
    if word == "barrier" and not _empty_range(dates):
        raise CellError(
            "dates must be empty for Greeks: a discretely watched barrier's knock is a jump no "
            "Monte Carlo Greek here follows (ROOTVAR_PDE_PRICE prices it), got a range"
        )
    return product_from_cells(spot, product, kind, strike, maturity, barrier, direction, knock,
                              rebate, dates, start, strike_share, cash)  # fmt: skip


def _empty_range(value) -> bool:
    if isinstance(value, (list, tuple)):
        return all(_empty_range(v) for v in value)
    return _empty(value)


@cell_cache(maxsize=32)
def _cached_check(p, s, product, r, q, scheme, steps, paths, seed, z):
    from rootvar.core import compare_greeks

    try:
        return compare_greeks(
            p, s, product, r, q, scheme=scheme, steps=steps, paths=paths, seed=seed, z=z
        )
    except InputError as exc:
        raise CellError(str(exc)) from exc


#: The header row ROOTVAR_GREEKS_CHECK spills.
CHECK_COLUMNS = (
    "Greek",
    "unit",
    "Monte Carlo",
    "std error",
    "reference",
    "reference error",
    "difference",
    "band half-width",
    "tolerance",
    "verdict",
    "paths to settle",
    "Monte Carlo estimator",
)


@sheet_function(
    "table: a header row (Greek, unit, Monte Carlo, std error, reference, reference error, "
    "difference, band half-width, tolerance, verdict, paths to settle, Monte Carlo "
    "estimator), the price and one row per Greek ('not compared' where only one method "
    "gives it), then an 'overall' row naming the reference method, the overall verdict "
    "and the notes",
    **_CHECK_DOCS,
)
def ROOTVAR_GREEKS_CHECK(
    params, spot, product, kind=None, strike=None, maturity=None, barrier=None,
    direction=None, knock=None, rebate=None, dates=None, start=None, strike_share=None,
    cash=None, rate=None, div_yield=None, scheme=None, steps=None, paths=None, seed=None,
    z=None,
):  # fmt: skip
    """Monte Carlo Greeks against Fourier (a European) or the PDE (a barrier, a digital).

    One verdict per Greek in its own unit: "consistent" when the difference with
    its band (z standard errors plus the reference's error) lies within the
    Greek's tolerance, "biased" when wholly outside, "undecided" otherwise (more
    paths would decide: "paths to settle" gives the count at which a rerun decides in
    90% of cases, "no count" where the reference's own error fills the tolerance).
    Tolerances: price 0.1% of the spot, delta 0.005, gamma 0.05 / spot, theta 0.2%
    of the spot a year, vega 0.5% of the spot per unit volatility, every other Greek
    1% of the spot per unit of its parameter.  The product arguments are
    ROOTVAR_EXOTIC_CHECK's, so a contract column serves both.
    """
    p = to_params("params", params)
    s = to_number("spot", spot, ">0")
    prod = _greeks_product(s, product, kind, strike, maturity, barrier, direction, knock,
                           rebate, dates, start, strike_share, cash)  # fmt: skip
    r = within("rate", to_number("rate", rate, default=0.0), -1.0, 1.0)
    q = within("div_yield", to_number("div_yield", div_yield, default=0.0), -1.0, 1.0)
    sch, n_steps, n_paths, sd = _run_args(scheme, steps, paths, seed)
    width = within("z", to_number("z", z, ">0", default=DEFAULT_Z), 1e-3, MAX_Z)
    from rootvar.core import BarrierOption

    _check_run_work(n_paths, n_steps, prod.maturity, isinstance(prod, BarrierOption))
    c = _cached_check(p, s, prod, r, q, sch, n_steps, n_paths, sd, width)
    mc, ref = c.monte_carlo, c.reference
    rows = [list(CHECK_COLUMNS)]
    for name in ("price", *GREEK_NAMES):
        unit = "ccy" if name == "price" else GREEK_UNITS[name]
        if name in c.table.index:
            row = c.table.loc[name]
            rows.append(
                [
                    GREEK_LABELS[name],
                    unit,
                    _value(float(row["monte_carlo"])),
                    finite(float(row["mc_std_error"])),
                    _value(float(row["reference"])),
                    finite(float(row["reference_error"])),
                    finite(float(row["difference"])),
                    finite(float(row["band"])),
                    finite(float(row["tolerance"])),
                    str(row["verdict"]),
                    _settle_text(int(row["paths_to_settle"])),
                    str(row["mc_estimator"]) or _PRICE_HOW["monte_carlo"],
                ]
            )
            continue
        in_mc = name in mc.values
        rows.append(
            [
                GREEK_LABELS[name],
                unit,
                _value(mc.values[name]) if in_mc else "",
                finite(mc.errors.get(name)) if in_mc else "",
                _value(ref.values[name]) if name in ref.values else "",
                finite(ref.errors.get(name)) if name in ref.values else "",
                "",
                "",
                "",
                "not compared",
                "",
                mc.estimators.get(name, "") if in_mc else _noted(mc.notes, name) or "",
            ]
        )
    shown = (": given by ", "not given: ", "a method gave no certified figure")
    notes = [n for n in c.notes if not any(part in n for part in shown)]
    overall = ["overall", "", "", "", _method_words(c.reference), "", "", "", ""]
    rows.append([*overall, c.verdict, "", "; ".join(notes)])
    return rows


def fourier_route(g) -> str:
    """The Fourier route a result took, as its estimators name it: contour or COS."""
    return "contour" if any("contour" in e for e in g.estimators.values()) else "COS"


def _method_words(g) -> str:
    """A result's method in words, with the Fourier route where it is Fourier."""
    if g.method == "fourier":
        return f"Fourier ({fourier_route(g)})"
    return _METHOD_WORDS[g.method]


def _price_how(g) -> str:
    """How a result's price was found, with the Fourier route where it is Fourier."""
    return _PRICE_HOW[fourier_route(g) if g.method == "fourier" else g.method]


def _settle_text(settle: int):
    """Paths to settle as the table shows them: blank once decided, words when no count can."""
    if settle == 0:
        return ""
    return NO_COUNT_DECIDES if settle < 0 else settle


#: Shown where the reference's own error fills the tolerance: more paths cannot decide.
NO_COUNT_DECIDES = "no count"
