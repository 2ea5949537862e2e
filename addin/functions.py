"""Spreadsheet functions: thin wrappers over ``rootvar.core``, one per idea.

Each function converts its arguments through :mod:`rootvar.addin.cells` and
returns a number, a text, a column, or a table with a header row (which
spills in the spreadsheet).  It never raises into the host: any problem
comes back as one short text starting with ``[rootvar]``.

Under Windows with the xlwings add-in these are user-defined functions; the
same Python functions are what the headless engine (:mod:`rootvar.addin.engine`)
calls, so a workbook computes the same numbers with or without Excel.

Monte Carlo functions are deterministic (``seed`` defaults to
:data:`rootvar.core.DEFAULT_SEED`), keep their default work near a second
(:data:`MC_PATHS` paths and :data:`MC_STEPS` steps for a price, the step study
:data:`STUDY_PATHS` paths per cell of its grid), refuse more than
:data:`MAX_PATH_STEPS` path-steps in one call, and serve repeated identical
calls from an in-process cache.
"""

from __future__ import annotations

import contextlib
import contextvars
import functools
import inspect
import math
import traceback
from dataclasses import dataclass

import numpy as np
import xlwings as xw

from rootvar.addin.cells import (
    CellError,
    error_text,
    to_bool,
    to_choice,
    to_int,
    to_number,
    to_numbers,
    to_params,
    to_table,
    to_text_list,
    within,
)
from rootvar.core import (
    DEFAULT_PATHS,
    DEFAULT_SEED,
    DEFAULT_TOLERANCE_BP,
    DEFAULT_Z,
    MAX_Z,
    SCHEMES,
    FourierCheckError,
    InputError,
    __version__,
    cir_transition,
    cir_transition_shapes,
    compare_mc_fourier,
    euler_max_step,
    euler_negative_probability,
    euler_worst_case,
    feller_ratio,
    heston_implied_vol,
    heston_price,
    implied_vol_reason,
    mc_price,
    step_study,
    variance_report,
)

__all__ = ["MAX_PATH_STEPS", "MAX_SEED", "REGISTRY", "SheetFunction", "work_cap"]

#: Most path-steps one cell may ask for in a spreadsheet program; bigger runs
#: belong in an asynchronous function or the headless engine, which has no
#: cap unless one is asked for (``rootvar compute --max-path-steps``).
MAX_PATH_STEPS = 50_000_000
#: Paths and time steps of a Monte Carlo price in a cell when left empty.
MC_PATHS, MC_STEPS = 20_000, 32

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


KINDS = ("call", "put")
#: Largest seed a cell takes: 15 digits, all a spreadsheet keeps of a number, so a
#: seed copied out of a cell and typed back in is the same seed.
MAX_SEED = 10**15 - 1
SCHEME_NAMES = tuple(SCHEMES)


@dataclass(frozen=True)
class SheetFunction:
    """A registered spreadsheet function and the documentation shown for it."""

    name: str
    func: object
    summary: str
    args: tuple  # (name, doc) pairs
    result: str


REGISTRY: dict[str, SheetFunction] = {}

PARAMS_DOC = (
    "Heston parameters: a two-column label/value block (v0, kappa, theta, "
    "vol_of_vol, rho) or five cells in that order"
)


def sheet_function(result: str, **arg_docs: str):
    """Register a spreadsheet function, guard it, and declare it to xlwings.

    The guard turns any exception into an error text, so the host never
    sees one; the xlwings decorators carry the argument docs to the
    function wizard.
    """

    def decorate(f):
        signature = inspect.signature(f)
        needed = [n for n, p in signature.parameters.items() if p.default is p.empty]

        @functools.wraps(f)
        def guarded(*args):
            try:
                signature.bind(*args)
            except TypeError:
                return error_text(_arity_text(f.__name__, needed, len(signature.parameters), args))
            try:
                return f(*args)
            except CellError as exc:
                return error_text(str(exc))
            except Exception as exc:
                return error_text(_plain_failure(f.__name__, exc))

        wrapped = guarded
        for arg, doc in reversed(list(arg_docs.items())):
            wrapped = xw.arg(arg, doc=doc)(wrapped)
        wrapped = xw.func(wrapped)
        summary = (f.__doc__ or "").strip().splitlines()[0]
        REGISTRY[f.__name__] = SheetFunction(
            f.__name__, wrapped, summary, tuple(arg_docs.items()), result
        )
        return wrapped

    return decorate


def _arity_text(name: str, needed: list[str], most: int, args) -> str:
    if len(args) > most:
        return f"{name} takes at most {most} arguments, got {len(args)}"
    missing = needed[len(args) :]
    return f"{name} needs {', '.join(needed)}; missing {', '.join(missing)}"


def _plain_failure(name: str, exc: Exception) -> str:
    """Words for an unexpected failure: the rule or the cause, never a Python class name.

    Inputs are checked up front, so reaching here means a computation failed
    on inputs that passed; the message says so and what to try.
    """
    if isinstance(exc, InputError):  # a core rule, named after the core's argument
        return f"{name} could not compute these inputs: {exc}"
    if isinstance(exc, FourierCheckError):
        return f"{name}: the Fourier price could not be certified for these inputs ({exc})"
    if isinstance(exc, MemoryError):
        return f"{name}: these inputs need more memory than is available; reduce the work"
    if isinstance(exc, (OverflowError, FloatingPointError, ZeroDivisionError)):
        return f"{name}: an intermediate number overflowed for these inputs; check their scale"
    where = traceback.extract_tb(exc.__traceback__)[-1].name
    return f"{name} failed on these inputs ({exc or 'no detail'}, in {where}); please report it"


def _column(values) -> list[list]:
    return [[float(v)] for v in np.ravel(values)]


def _one_or_column(values, single: bool):
    return float(np.ravel(values)[0]) if single else _column(values)


def _finite(value):
    """Spreadsheets have no NaN or infinity: show them as empty text."""
    if isinstance(value, (float, np.floating)) and not math.isfinite(value):
        return ""
    if isinstance(value, np.generic):
        return value.item()
    return value


def _header(column: str) -> str:
    """Plain words for a core column name."""
    fixed = {
        "horizon_years": "horizon (years)",
        "std": "std dev",
        "p_below_near_zero": "P(variance < near-zero level)",
        "euler_neg_prob_at_v0": "Euler negative-step prob. at v0",
        "notes": "notes",
        "dt": "dt (years)",
        "std_error": "std error",
        "bias_price": "bias",
        "bias_vol_bp": "bias (vol bp)",
        "z_score": "z-score",
    }
    if column in fixed:
        return fixed[column]
    return column.replace("_", " ")


def step_words(dt: float) -> str:
    """A step in years as header words: years and trading days (252 a year)."""
    return f"step {dt:.4g} y = {trading_days(dt)}"


def trading_days(years: float) -> str:
    """Years as trading days (252 a year, common practice, no source), in words."""
    days = f"{years * 252:.3g}"
    return f"{days} trading day" + ("" if days == "1" else "s")


def _step_headers(rows: list[list], dt: float) -> list[list]:
    """State the production step in the header of every column that depends on it."""
    step = step_words(dt)
    dependent = {
        "Euler negative-step prob. at v0": f"Euler negative-step prob. at v0 ({step})",
        "euler worst case": f"Euler worst-case negative-step prob. ({step})",
        "euler worst level": f"riskiest variance level v* ({step})",
        "p at or below worst level": f"P(variance <= v*) ({step})",
    }
    rows[0] = [dependent.get(h, h) for h in rows[0]]
    return rows


def _table(frame, index_name=None) -> list[list]:
    """A pandas DataFrame as a header row of plain words plus data rows."""
    frame = frame.reset_index() if index_name else frame
    rows = [[_header(str(c)) for c in frame.columns]]
    rows += [[_finite(v) for v in row] for row in frame.itertuples(index=False)]
    return rows


def _pairs(rows) -> list[list]:
    """Label / value rows with plain Python values."""
    return [[label, _finite(value)] for label, value in rows]


#: Longest maturity or horizon a cell takes, years.
MAX_YEARS = 100.0
#: Shortest option maturity a cell prices, years (about two trading hours): below
#: it the certified Fourier range needs more terms than its cap for high variances.
MIN_MATURITY = 1e-3
#: Largest noncentrality of the exact law a cell evaluates: its left-tail
#: quantiles sum a Poisson series of about that many terms (memory and time).
MAX_NONCENTRALITY = 1e7


def _horizons(name: str, p, values) -> np.ndarray:
    """Horizons in (0, 100] years on which the exact law is affordable, checked up front."""
    hs = np.atleast_1d(values)
    for t in hs:
        within(name, float(t), 0.0, MAX_YEARS)
    shapes = cir_transition_shapes(p.v0, p.kappa, p.theta, p.vol_of_vol, hs)
    nc = np.atleast_1d(shapes[1])
    if np.any(nc > MAX_NONCENTRALITY):
        # nc ~ 4 v0 / (vol_of_vol^2 t) for short horizons: the shortest affordable one
        shortest = 4.0 * p.v0 / (p.vol_of_vol**2 * MAX_NONCENTRALITY)
        raise CellError(
            f"{name} is too short for this v0 and vol_of_vol: the exact law would need a "
            f"series of more than {MAX_NONCENTRALITY:,.0f} terms; use a horizon of at least "
            f"{float(f'{shortest * 1.01:.2g}'):g} years, got {float(hs[np.argmax(nc)])!r}"
        )
    return hs


def _law(params, horizon):
    """Exact law of the variance at a horizon, from cell arguments."""
    p = to_params("params", params)
    t = float(_horizons("horizon", p, to_number("horizon", horizon, ">0"))[0])
    return cir_transition(p.v0, p.kappa, p.theta, p.vol_of_vol, t)


def _market(spot, strike, maturity, rate, div_yield, kind):
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


def _single_strike(strikes) -> float:
    if strikes.size != 1:
        raise CellError(f"strike must be a single cell here, got {strikes.size} strikes")
    return float(strikes[0])


def _check_work(paths: int, steps: int, cells: int = 1) -> None:
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


# --------------------------------------------------------------------------- functions


@sheet_function("text: the installed rootvar version")
def ROOTVAR_VERSION():
    """Version of the rootvar library behind these functions."""
    return f"rootvar {__version__}"


@sheet_function("number: 2 kappa theta / vol_of_vol^2", params=PARAMS_DOC)
def ROOTVAR_FELLER(params):
    """Feller ratio of the parameter set (the condition holds at 1 and above)."""
    p = to_params("params", params)
    return feller_ratio(p.kappa, p.theta, p.vol_of_vol)


@sheet_function(
    "number: probability in [0, 1]",
    params=PARAMS_DOC,
    dt="Euler step in years, > 0 (1/252 is one trading day)",
    variance="variance at the start of the step (empty: v0 of the parameters), >= 0",
)
def ROOTVAR_EULER_NEG_PROB(params, dt, variance=None):
    """Chance that one Euler step of the variance comes out negative."""
    p = to_params("params", params)
    step = to_number("dt", dt, ">0")
    v = to_number("variance", variance, ">=0", default=p.v0)
    return euler_negative_probability(v, p.kappa, p.theta, p.vol_of_vol, step)


@sheet_function(
    "number: years, or the text 'unbounded' when no step breaches the tolerance",
    params=PARAMS_DOC,
    tolerance="acceptable one-step negative probability, in (0, 1)",
    variance="variance at the start of the step (empty: v0 of the parameters), >= 0",
)
def ROOTVAR_EULER_SAFE_STEP(params, tolerance, variance=None):
    """Largest Euler step keeping the negative-step chance within the tolerance."""
    p = to_params("params", params)
    tol = to_number("tolerance", tolerance, "(0,1)")
    v = to_number("variance", variance, ">=0", default=p.v0)
    step = euler_max_step(v, p.kappa, p.theta, p.vol_of_vol, tol)
    return "unbounded" if math.isinf(step) else step


@sheet_function(
    "number: annualised variance (0 where it underflows a double)",
    params=PARAMS_DOC,
    horizon="horizon in years, in (0, 100]",
    probability="level in (0, 1)",
)
def ROOTVAR_VARIANCE_QUANTILE(params, horizon, probability):
    """Quantile of the exact law of the variance at a horizon."""
    return float(_law(params, horizon).ppf(to_number("probability", probability, "(0,1)")))


@sheet_function(
    "number: probability in [0, 1]",
    params=PARAMS_DOC,
    horizon="horizon in years, in (0, 100]",
    level="variance level, >= 0",
)
def ROOTVAR_VARIANCE_CDF(params, horizon, level):
    """Probability that the variance is at or below a level at a horizon (exact law)."""
    return float(_law(params, horizon).cdf(to_number("level", level, ">=0")))


@sheet_function(
    "table: header row, then one row per horizon",
    params=PARAMS_DOC,
    horizons="range of horizons in years, in (0, 100]",
    probabilities="range of quantile levels in (0, 1) (empty: 0.1% to 99%, eight levels)",
    dt="production Euler step in years (empty: 1/252)",
    near_zero="variance level counted as near zero (empty: 1e-4)",
)
def ROOTVAR_VARIANCE_TABLE(params, horizons, probabilities=None, dt=None, near_zero=None):
    """Exact-law table of the variance: mean, spread, quantiles, mass near zero, Euler risk.

    The Euler columns are the one-step negative probability at v0, the worst
    case of that probability over every variance level, the level v* where
    it sits, and the exact-law probability of being at or below v*; each
    header states the step.
    """
    from rootvar.core import DEFAULT_QUANTILES

    p = to_params("params", params)
    hs = _horizons("horizons", p, to_numbers("horizons", horizons, ">0"))
    qs = (
        DEFAULT_QUANTILES
        if probabilities is None
        else to_numbers("probabilities", probabilities, "(0,1)")
    )
    step = to_number("dt", dt, ">0", default=1 / 252)
    table = variance_report(p, hs, qs, step, to_number("near_zero", near_zero, ">0", default=1e-4))
    rows = _table(table.drop(columns=["feller_ratio", "regime"]), index_name="horizon_years")
    return _step_headers(rows, step)


@sheet_function(
    "number, or a column for a range of strikes",
    params=PARAMS_DOC,
    spot="spot price, > 0",
    strike="strike or range of strikes, > 0",
    maturity="years, in [0.001, 100]",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    kind="call or put (empty: call)",
)
def ROOTVAR_FOURIER_PRICE(params, spot, strike, maturity, rate=None, div_yield=None, kind=None):
    """European option price under Heston by the certified COS Fourier method."""
    p = to_params("params", params)
    s, ks, t, r, q, kd = _market(spot, strike, maturity, rate, div_yield, kind)
    return _one_or_column(heston_price(p, s, ks, t, r, q, kd), ks.size == 1)


@sheet_function(
    "number, or a column for a range of strikes (empty text where no volatility exists)",
    params=PARAMS_DOC,
    spot="spot price, > 0",
    strike="strike or range of strikes, > 0",
    maturity="years, in [0.001, 100]",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
)
def ROOTVAR_FOURIER_VOL(params, spot, strike, maturity, rate=None, div_yield=None):
    """Heston Fourier prices quoted as Black-Scholes implied volatilities."""
    p = to_params("params", params)
    s, ks, t, r, q, _ = _market(spot, strike, maturity, rate, div_yield, None)
    vols = np.atleast_1d(heston_implied_vol(p, s, ks, t, r, q))
    cells = [[_finite(float(v))] for v in vols]
    return cells[0][0] if ks.size == 1 else cells


@sheet_function(
    "number: annualised volatility",
    price="option price, > 0",
    spot="spot price, > 0",
    strike="strike, > 0",
    maturity="years, in [0.001, 100]",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    kind="call or put (empty: call)",
)
def ROOTVAR_IMPLIED_VOL(price, spot, strike, maturity, rate=None, div_yield=None, kind=None):
    """Black-Scholes implied volatility of an option price."""
    value = to_number("price", price)
    s, ks, t, r, q, kd = _market(spot, strike, maturity, rate, div_yield, kind)
    vol, why = implied_vol_reason(value, s, _single_strike(ks), t, r, q, kd)
    if str(why):
        raise CellError(f"price must lie within the no-arbitrage bounds ({why}), got {value!r}")
    return float(vol)


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


@functools.lru_cache(maxsize=256)
def _cached_mc(p, s, k, t, r, q, kind, scheme, steps, paths, seed, anti, cond):
    return mc_price(p, s, k, t, r, q, kind, scheme, steps, paths, seed, anti, cond)


def _mc_args(
    params, spot, strike, maturity, rate, div_yield, kind, scheme, steps, paths, seed, n=MC_PATHS
):
    p = to_params("params", params)
    s, ks, t, r, q, kd = _market(spot, strike, maturity, rate, div_yield, kind)
    k = _single_strike(ks)
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
    _check_work(args[-2], args[-3])
    r = _cached_mc(*args, anti, cond)
    return _pairs(
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
    _check_work(n_paths, n_steps)
    run = _cached_mc(p, s, k, t, r, q, kd, sch, n_steps, n_paths, sd, anti, True)
    c = compare_mc_fourier(p, s, k, t, r, q, kd, tolerance_bp=tol, z=width, mc_result=run)
    reason = str(c.reason)
    cap = _CAP.get()
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
    return _pairs(
        [
            ["Fourier price", c.fourier_price],
            ["Monte Carlo price", run.price],
            ["std error", run.std_error],
            ["difference", c.diff_price],
            ["difference (vol bp)", _finite(c.diff_vol_bp)],
            ["z-score", _finite(c.z_score)],
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
    s, ks, t, r, q, kd = _market(spot, strike, maturity, rate, div_yield, kind)
    k = _single_strike(ks)
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
    _check_work(n_paths, sum(grid) * len(names))
    table = _cached_study(p, s, k, t, r, q, kd, tuple(names), tuple(grid), n_paths, sd, tol, anti)
    rows = _table(table)
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


@functools.lru_cache(maxsize=64)
def _cached_study(p, s, k, t, r, q, kind, names, grid, paths, seed, tol, anti):
    return step_study(
        p, s, k, t, r, q, kind, names, grid, paths, seed, tolerance_bp=tol, antithetic=anti
    )


def clear_cache() -> None:
    """Forget cached Monte Carlo results (for tests and long sessions)."""
    _cached_mc.cache_clear()
    _cached_study.cache_clear()
    # defined further down
    for name in (
        "_cached_calibration",
        "_cached_tradeoff",
        "_cached_exotic",
        "_cached_exotic_check",
        "_cached_pde",
    ):
        globals()[name].cache_clear()


def call(name: str, *args):
    """Call a registered function by its spreadsheet name (used by the engine)."""
    return REGISTRY[name].func(*args)


# --------------------------------------------------------------------------- finite differences

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


@functools.lru_cache(maxsize=64)
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
    return _pairs(
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


# --------------------------------------------------------------------------- calibration

_QUOTES_DOC = (
    "range with a header row: maturity, strike, implied_vol (or price and kind), optional "
    "weight or spread; one quote per row"
)
_CAL_DOCS = dict(
    quotes=_QUOTES_DOC,
    spot="spot price, > 0",
    rate="continuous rate (empty: 0)",
    div_yield="continuous dividend yield (empty: 0)",
    feller="free, enforce, or a minimum Feller ratio such as 0.5 (empty: free)",
    starts="Sobol start points besides the first (empty: 8; 0 for one start)",
    sobol_seed="seed of the Sobol start points (empty: 20260105)",
)


def _feller_cell(name: str, value, default: str):
    """free / enforce text, or a minimum ratio > 0."""
    if isinstance(value, (list, tuple)):
        cells = [c for c in np.ravel(np.array(value, dtype=object)) if c is not None]
        value = cells[0] if cells else None
    if value is None or (isinstance(value, str) and not value.strip()):
        return default
    if isinstance(value, str):
        key = value.strip().lower()
        if key in ("free", "enforce"):
            return key
        try:
            return to_number(name, float(key), ">0")
        except ValueError:
            raise CellError(
                f"{name} must be free, enforce or a minimum ratio > 0, got the text {value!r}"
            ) from None
    return to_number(name, value, ">0")


def _cal_args(quotes, spot, rate, div_yield, feller, starts, sobol_seed, default_feller):
    from rootvar.core.calibration.fit import DEFAULT_CALIBRATION_SEED

    table = to_table("quotes", quotes)
    key = tuple((col, tuple(vals)) for col, vals in table.items())
    return (
        key,
        to_number("spot", spot, ">0"),
        to_number("rate", rate, default=0.0),
        to_number("div_yield", div_yield, default=0.0),
        _feller_cell(
            "feller" if default_feller == "free" else "constraint", feller, default_feller
        ),
        to_int("starts", starts, 8, 0, 64),
        to_int("sobol_seed", sobol_seed, DEFAULT_CALIBRATION_SEED, 0),
    )


@functools.lru_cache(maxsize=32)
def _cached_calibration(key, spot, rate, div_yield, feller, starts, seed):
    import warnings

    from rootvar.core import calibrate

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # arbitrage findings travel in .warnings
        try:
            return calibrate(
                dict(key), spot, rate, div_yield, feller=feller, starts=starts, seed=seed
            )
        except InputError as exc:  # the core's message names the argument and row
            raise CellError(str(exc)) from exc


@functools.lru_cache(maxsize=16)
def _cached_tradeoff(key, spot, rate, div_yield, feller, starts, seed):
    import warnings

    from rootvar.core import calibration_tradeoff

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return calibration_tradeoff(
                dict(key), spot, rate, div_yield, feller=feller, starts=starts, seed=seed
            )
        except InputError as exc:
            raise CellError(str(exc)) from exc


@sheet_function(
    "table: label / value rows; the first five (v0, kappa, theta, vol_of_vol, rho) work as "
    "params of every other function; then the fit, standard errors, status and warnings",
    **_CAL_DOCS,
)
def ROOTVAR_CALIBRATE(
    quotes, spot, rate=None, div_yield=None, feller=None, starts=None, sobol_seed=None
):
    """Heston parameters fitted to implied volatilities, with the fit and its warnings."""
    c = _cached_calibration(
        *_cal_args(quotes, spot, rate, div_yield, feller, starts, sobol_seed, "free")
    )
    p = c.params
    rows = [[name, getattr(p, name)] for name in ("v0", "kappa", "theta", "vol_of_vol", "rho")]
    rows += [
        ["Feller ratio", c.feller_ratio],
        ["regime", c.regime],
        ["RMSE (bp)", c.rmse_bp],
        ["largest error (bp)", c.max_abs_bp],
    ]
    rows += [[f"std error {name}", float(v)] for name, v in c.std_errors.items()]
    rows += [
        ["constraint", c.feller],
        ["status", c.status],
        ["starts at best / tried", f"{c.starts_at_best} / {c.starts}"],
        ["quotes used / skipped", f"{len(c.residuals)} / {c.skipped_quotes}"],
        ["warnings", " | ".join(c.warnings) if c.warnings else "none"],
    ]
    return _pairs(rows)


@sheet_function(
    "table: header row, then one row per quote (maturity, strike, market and model vol, "
    "error in bp, weight)",
    **_CAL_DOCS,
)
def ROOTVAR_CALIBRATION_RESIDUALS(
    quotes, spot, rate=None, div_yield=None, feller=None, starts=None, sobol_seed=None
):
    """Quote-by-quote implied-vol errors of the fit that ROOTVAR_CALIBRATE returns."""
    c = _cached_calibration(
        *_cal_args(quotes, spot, rate, div_yield, feller, starts, sobol_seed, "free")
    )
    return _table(c.residuals)


@sheet_function(
    "table: header row, then the parameters, fit and variance checks of the free and the "
    "constrained fit, with the cost of the constraint",
    quotes=_QUOTES_DOC,
    spot=_CAL_DOCS["spot"],
    rate=_CAL_DOCS["rate"],
    div_yield=_CAL_DOCS["div_yield"],
    constraint="enforce, or a minimum Feller ratio such as 0.5 (empty: enforce)",
    starts=_CAL_DOCS["starts"],
    sobol_seed=_CAL_DOCS["sobol_seed"],
)
def ROOTVAR_FELLER_TRADEOFF(
    quotes, spot, rate=None, div_yield=None, constraint=None, starts=None, sobol_seed=None
):
    """What enforcing Feller costs in implied-vol bp and buys in variance behaviour."""
    args = _cal_args(quotes, spot, rate, div_yield, constraint, starts, sobol_seed, "enforce")
    if args[4] == "free":
        raise CellError("constraint must be enforce or a minimum ratio for a trade-off, got free")
    table = _cached_tradeoff(*args)
    rows = [["quantity", *[str(c) for c in table.columns]]]
    rows += [
        [label, *[_finite(v) for v in row]]
        for label, row in zip(table.index, table.itertuples(index=False), strict=True)
    ]
    return rows


# --------------------------------------------------------------------------- exotics

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


def _exotic_product(spot, product, kind, strike, maturity, barrier, direction, knock, rebate,
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


@functools.lru_cache(maxsize=128)
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
    prod = _exotic_product(s, product, kind, strike, maturity, barrier, direction, knock,
                           rebate, dates, start, strike_share, cash)  # fmt: skip
    r = within("rate", to_number("rate", rate, default=0.0), -1.0, 1.0)
    q = within("div_yield", to_number("div_yield", div_yield, default=0.0), -1.0, 1.0)
    sch, n_steps, n_paths, sd, cv = _exotic_run_args(scheme, steps, paths, seed, control)
    # at least this many steps in all (the grid adds the fixing and monitoring dates);
    # an arithmetic Asian's check adds a reference run at twice the steps
    least = math.ceil((n_steps or 64) * prod.maturity)
    twice = getattr(prod, "average", "") == "arithmetic" and checking
    _check_work(n_paths, least * (3 if twice else 1))
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
    return _pairs(
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
    cap = _CAP.get()
    if c.paths_to_settle > 0 and cap is not None and c.paths_to_settle * c.steps > cap:
        reason += (
            f"; {c.paths_to_settle:,} paths x {c.steps} steps is over the cap of {cap:,} "
            "path-steps for one cell"
        )
    return _pairs(
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


@functools.lru_cache(maxsize=64)
def _cached_exotic_check(key, tol, width):
    from rootvar.core import compare_exotic

    p, s, prod, r, q = key[:5]
    try:
        return compare_exotic(
            p, s, prod, r, q, tolerance=tol, z=width, mc_result=_cached_exotic(*key)
        )
    except InputError as exc:
        raise CellError(str(exc)) from exc
