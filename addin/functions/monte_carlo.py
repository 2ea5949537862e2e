"""Cells run by Monte Carlo on vanillas: a price, its check against Fourier, the step study.

ROOTVAR_MC_PRICE prices a European option with its statistics,
ROOTVAR_MC_CHECK holds it to the certified Fourier price with a verdict, and
ROOTVAR_STEP_STUDY measures each scheme's bias over step counts and names the
coarsest good step.  ROOTVAR_EULER_WORST_CASE and ROOTVAR_EULER_WORST_LEVEL
give the worst one-step Euler negative probability over every variance level
and where it sits.  Runs are deterministic under their seed, capped per cell
(:func:`~rootvar.addin.functions.arguments.check_work`) and cached
(:func:`~rootvar.addin.functions.registry.cell_cache`).
"""

from __future__ import annotations

import math

from rootvar.addin.cells import (
    CellError,
    to_bool,
    to_choice,
    to_int,
    to_number,
    to_numbers,
    to_params,
    to_text_list,
    within,
)
from rootvar.addin.functions.arguments import (
    MAX_PATH_STEPS,
    MAX_SEED,
    PARAMS_DOC,
    SCHEME_NAMES,
    check_work,
    market_args,
    path_step_cap,
    single_strike,
)
from rootvar.addin.functions.registry import cell_cache, sheet_function
from rootvar.addin.functions.results import finite, frame_rows, pairs
from rootvar.core import (
    DEFAULT_PATHS,
    DEFAULT_SEED,
    DEFAULT_TOLERANCE_BP,
    DEFAULT_Z,
    MAX_Z,
    compare_mc_fourier,
    euler_worst_case,
    mc_price,
    step_study,
)

__all__ = [
    "MC_PATHS",
    "MC_STEPS",
    "ROOTVAR_EULER_WORST_CASE",
    "ROOTVAR_EULER_WORST_LEVEL",
    "ROOTVAR_MC_CHECK",
    "ROOTVAR_MC_PRICE",
    "ROOTVAR_STEP_STUDY",
    "STUDY_PATHS",
]

#: Paths and time steps of a Monte Carlo price in a cell when left empty.
MC_PATHS, MC_STEPS = 20_000, 32


_MC_DOCS = dict(
    params=PARAMS_DOC,
    spot="spot price, > 0",
    strike="strike, > 0",
    maturity="years, in [0.001, 100]",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    kind="call or put (empty: call)",
    scheme="euler_absorb, euler_reflect, euler_partial, euler_full, qe, qe_martingale or "
    "exact_variance (empty: qe)",
    steps=f"time steps over the maturity (empty: {MC_STEPS})",
    paths=f"number of paths (empty: {MC_PATHS})",
    seed=f"random seed (empty: {DEFAULT_SEED})",
)


@cell_cache(maxsize=256)
def _cached_mc(p, s, k, t, r, q, kind, scheme, steps, paths, seed, anti, cond):
    return mc_price(p, s, k, t, r, q, kind, scheme, steps, paths, seed, anti, cond)


def _mc_args(
    params, spot, strike, maturity, rate, div_yield, kind, scheme, steps, paths, seed, n=MC_PATHS
):
    p = to_params("params", params)
    s, ks, t, r, q, kd = market_args(spot, strike, maturity, rate, div_yield, kind)
    k = single_strike(ks)
    sch = to_choice("scheme", scheme, SCHEME_NAMES, "qe")
    n_steps = to_int("steps", steps, MC_STEPS, 1, 100_000)
    n_paths = to_int("paths", paths, n, 2, 10_000_000)
    sd = to_int("seed", seed, DEFAULT_SEED, 0, MAX_SEED)
    return p, s, k, t, r, q, kd, sch, n_steps, n_paths, sd


@sheet_function(
    "table: label / value rows (price, std error, 95% interval, negative-step shares, seconds)",
    **_MC_DOCS,
    antithetic="TRUE to mirror the draws (empty: FALSE)",
    conditional="TRUE to price by Black-Scholes given the variance path (empty: FALSE)",
)
def ROOTVAR_MC_PRICE(
    params,
    spot,
    strike,
    maturity,
    rate=None,
    div_yield=None,
    kind=None,
    scheme=None,
    steps=None,
    paths=None,
    seed=None,
    antithetic=None,
    conditional=None,
):
    """European option price under Heston by Monte Carlo, with its statistics."""
    args = _mc_args(
        params, spot, strike, maturity, rate, div_yield, kind, scheme, steps, paths, seed
    )
    anti = to_bool("antithetic", antithetic, False)
    cond = to_bool("conditional", conditional, False)
    if anti and args[-2] % 2:
        raise CellError(f"paths must be even with antithetic TRUE, got {args[-2]}")
    check_work(args[-2], args[-3])
    r = _cached_mc(*args, anti, cond)
    return pairs(
        [
            ["price", r.price],
            ["std error", r.std_error],
            ["95% low", r.ci_low],
            ["95% high", r.ci_high],
            ["negative-step share", r.negative_step_fraction],
            ["expected negative-step share", r.expected_negative_step_fraction],
            ["zero-touch share", r.zero_touch_fraction],
            ["seconds", r.elapsed_s],
        ]
    )


@sheet_function(
    "table: label / value rows ending with the verdict and its reason",
    **{**_MC_DOCS, "paths": f"number of paths (empty: {DEFAULT_PATHS})"},
    tolerance_bp=f"tolerance in implied-vol basis points (empty: {DEFAULT_TOLERANCE_BP:g})",
    z=f"band width in standard errors (empty: {DEFAULT_Z:g})",
    antithetic="TRUE to mirror the draws (empty: TRUE)",
)
def ROOTVAR_MC_CHECK(
    params,
    spot,
    strike,
    maturity,
    rate=None,
    div_yield=None,
    kind=None,
    scheme=None,
    steps=None,
    paths=None,
    seed=None,
    tolerance_bp=None,
    z=None,
    antithetic=None,
):
    """Fourier against Monte Carlo (conditional) for one vanilla, with a verdict.

    When undecided, "paths to settle" is the count at which a rerun decides in
    90% of cases (from the tolerance and the noise per path); where that
    count is over the per-cell cap, the reason says so and what to do.
    """
    p, s, k, t, r, q, kd, sch, n_steps, n_paths, sd = _mc_args(
        params, spot, strike, maturity, rate, div_yield, kind, scheme, steps, paths, seed,
        DEFAULT_PATHS,
    )  # fmt: skip
    tol = to_number("tolerance_bp", tolerance_bp, ">0", default=DEFAULT_TOLERANCE_BP)
    width = within("z", to_number("z", z, ">0", default=DEFAULT_Z), 1e-3, MAX_Z)
    anti = to_bool("antithetic", antithetic, True)
    if anti and n_paths % 2:
        raise CellError(f"paths must be even with antithetic TRUE, got {n_paths}")
    check_work(n_paths, n_steps)
    run = _cached_mc(p, s, k, t, r, q, kd, sch, n_steps, n_paths, sd, anti, True)
    c = compare_mc_fourier(p, s, k, t, r, q, kd, tolerance_bp=tol, z=width, mc_result=run)
    reason = str(c.reason)
    cap = path_step_cap()
    settle = int(c.paths_to_settle)
    if cap is not None and settle * n_steps > cap:
        where = (
            "a spreadsheet cell: compute the workbook headless (rootvar compute), "
            "or widen the tolerance"
            if cap == MAX_PATH_STEPS
            else "this run (--max-path-steps)"
        )
        reason += (
            f"; {settle:,} paths x {n_steps} steps is over the cap of {cap:,} path-steps "
            f"for {where}"
        )
    return pairs(
        [
            ["Fourier price", c.fourier_price],
            ["Monte Carlo price", run.price],
            ["std error", run.std_error],
            ["difference", c.diff_price],
            ["difference (vol bp)", finite(c.diff_vol_bp)],
            ["z-score", finite(c.z_score)],
            ["tolerance (vol bp)", tol],
            ["verdict", str(c.verdict)],
            ["paths to settle", settle],
            ["reason", reason],
        ]
    )


#: Paths per grid cell of a step study in a cell: with antithetic draws and the compiled
#: kernels, every demo model's default study ends with a recommendation in about 1.2 s
#: (2 cores); 10,000 paths left every one of them "none consistent".
STUDY_PATHS = 200_000


@sheet_function(
    "table: header row, one row per scheme and step count, then the recommendation",
    params=PARAMS_DOC,
    spot="spot price, > 0",
    strike="strike, > 0",
    maturity="years, in [0.001, 100]",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    kind="call or put (empty: call)",
    schemes="scheme names, comma-separated or a range (empty: euler_full, qe, exact_variance)",
    steps_list="range of step counts (empty: 2, 4, 8, 16, 32)",
    paths=f"paths per cell of the grid (empty: {STUDY_PATHS})",
    seed=f"random seed (empty: {DEFAULT_SEED})",
    tolerance_bp=f"tolerance in implied-vol basis points (empty: {DEFAULT_TOLERANCE_BP:g})",
    antithetic="TRUE to mirror the draws (empty: TRUE)",
)
def ROOTVAR_STEP_STUDY(
    params,
    spot,
    strike,
    maturity,
    rate=None,
    div_yield=None,
    kind=None,
    schemes=None,
    steps_list=None,
    paths=None,
    seed=None,
    tolerance_bp=None,
    antithetic=None,
):
    """Bias of each scheme against Fourier over step counts, and the coarsest good step."""
    p = to_params("params", params)
    s, ks, t, r, q, kd = market_args(spot, strike, maturity, rate, div_yield, kind)
    k = single_strike(ks)
    names = to_text_list("schemes", schemes, SCHEME_NAMES, ("euler_full", "qe", "exact_variance"))
    grid = (
        [2, 4, 8, 16, 32]
        if steps_list is None
        else [to_int("steps_list", n, 1, 1, 100_000) for n in to_numbers("steps_list", steps_list)]
    )
    n_paths = to_int("paths", paths, STUDY_PATHS, 2, 10_000_000)
    sd = to_int("seed", seed, DEFAULT_SEED, 0, MAX_SEED)
    tol = to_number("tolerance_bp", tolerance_bp, ">0", default=DEFAULT_TOLERANCE_BP)
    anti = to_bool("antithetic", antithetic, True)
    if anti and n_paths % 2:
        raise CellError(f"paths must be even with antithetic TRUE, got {n_paths}")
    check_work(n_paths, sum(grid) * len(names))
    table = _cached_study(p, s, k, t, r, q, kd, tuple(names), tuple(grid), n_paths, sd, tol, anti)
    rows = frame_rows(table)
    best = table.attrs["cheapest"]
    rows.append(
        [
            "recommendation",
            f"{best['scheme']} at {best['steps']} steps"
            if best
            else (
                f"none consistent: no scheme's band of 3 std errors fits within {tol:g} bp at "
                "these paths and steps; add finer step counts or more paths"
            ),
        ]
        + [""] * (len(rows[0]) - 2)
    )
    return rows


@cell_cache(maxsize=64)
def _cached_study(p, s, k, t, r, q, kind, names, grid, paths, seed, tol, anti):
    return step_study(
        p, s, k, t, r, q, kind, names, grid, paths, seed, tolerance_bp=tol, antithetic=anti
    )


@sheet_function(
    "number: probability in [0, 1]",
    params=PARAMS_DOC,
    dt="Euler step in years, > 0 (1/252 is one trading day)",
)
def ROOTVAR_EULER_WORST_CASE(params, dt):
    """Worst one-step Euler negative probability over all variance levels."""
    p = to_params("params", params)
    step = to_number("dt", dt, ">0")
    return euler_worst_case(p.kappa, p.theta, p.vol_of_vol, step).probability


@sheet_function(
    "number: annualised variance, or the text 'unbounded' when the worst case is approached "
    "only as the variance grows (kappa dt >= 1)",
    params=PARAMS_DOC,
    dt="Euler step in years, > 0 (1/252 is one trading day)",
)
def ROOTVAR_EULER_WORST_LEVEL(params, dt):
    """Variance level v* where one Euler step is likeliest to turn negative."""
    p = to_params("params", params)
    step = to_number("dt", dt, ">0")
    level = euler_worst_case(p.kappa, p.theta, p.vol_of_vol, step).level
    return "unbounded" if math.isinf(level) else level
