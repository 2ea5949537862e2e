"""The daily control of one Heston model: pure numerics, no workbook.

:func:`check_model` takes a model and the desk's settings and returns the
result rows the control workbook shows: Feller ratio and regime, Euler risk
at the production step, exact-law quantiles at the test maturities, and
Fourier against Monte Carlo (production scheme, conditional) for every test
option, with a recommended scheme and step where the production one fails,
and the flags against the thresholds.  It depends only on its inputs, so rows
computed in any process, on any worker, agree bit for bit.
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass

import numpy as np

from rootvar.core.black_scholes import bs_price, implied_vol_reason
from rootvar.core.checks.vanilla import (
    BIASED,
    CONSISTENT,
    SCHEME_COST,
    UNDECIDED,
    compare_mc_fourier,
)
from rootvar.core.montecarlo.european import BLOCK, mc_price
from rootvar.core.montecarlo.schemes import SCHEMES
from rootvar.core.params import HestonParams
from rootvar.core.validation import InputError
from rootvar.core.variance.cir_law import cir_transition
from rootvar.core.variance.euler import (
    euler_max_step,
    euler_negative_probability,
    euler_worst_case,
    feller_ratio,
    regime_label,
)

__all__ = [
    "CHECK_FAILED",
    "ControlSettings",
    "ModelSpec",
    "check_model",
    "recommended_run",
    "row_seed",
    "screen_paths",
    "screened_out",
    "search_cells",
]

#: Verdict of a test option whose Monte Carlo check could not be formed.
CHECK_FAILED = "check failed"


@dataclass(frozen=True)
class ControlSettings:
    """The desk's thresholds and production Monte Carlo settings."""

    feller_warning: float = 0.3  # flag a Feller ratio below this
    max_negative_probability: float = 1e-3  # flag a one-step probability above this
    scheme: str = "euler_full"
    steps_per_year: int = 52
    paths: int = 40_000
    seed: int = 20240601
    tolerance_bp: float = 10.0
    z: float = 3.0
    quantiles: tuple = (0.01, 0.5, 0.99)

    def __post_init__(self):
        if self.scheme not in SCHEMES:
            raise InputError(
                f"production scheme must be one of {sorted(SCHEMES)}, got {self.scheme!r}"
            )
        for name in ("feller_warning", "tolerance_bp", "z"):
            if not (math.isfinite(getattr(self, name)) and getattr(self, name) > 0):
                raise InputError(f"{name} must be a positive number, got {getattr(self, name)!r}")
        if not 0 < self.max_negative_probability < 1:
            raise InputError(
                "max_negative_probability must lie in (0, 1), got "
                f"{self.max_negative_probability!r}"
            )
        for name in ("steps_per_year", "paths"):
            if int(getattr(self, name)) != getattr(self, name) or getattr(self, name) < 1:
                raise InputError(
                    f"{name} must be a positive whole number, got {getattr(self, name)!r}"
                )
        if not self.quantiles or not all(0 < q < 1 for q in self.quantiles):
            raise InputError(f"quantiles must be levels in (0, 1), got {self.quantiles!r}")


@dataclass(frozen=True)
class ModelSpec:
    """One model of the book and its test options."""

    model_id: str
    underlying: str
    spot: float
    rate: float
    div_yield: float
    params: HestonParams
    maturities: tuple  # years
    moneyness: tuple  # strike / spot


def row_seed(base_seed: int, model_id: str) -> int:
    """Seed of one model's Monte Carlo runs, from the base seed and the model id.

    A SHA-256 digest, not Python's ``hash`` (which is salted per process), so
    the same model gets the same seed in every process and on every worker.
    Kept below 2**49 (15 decimal digits): a spreadsheet shows and keeps 15
    significant digits, so a seed copied out of a cell reproduces the row.
    """
    digest = hashlib.sha256(f"{int(base_seed)}:{model_id}".encode()).digest()
    return int.from_bytes(digest[:8], "big") >> 15


def _steps(maturity: float, per_year: int) -> int:
    return max(1, math.ceil(per_year * maturity - 1e-9))


def recommendation_grid(settings: ControlSettings, maturity: float):
    """Schemes and step counts searched for a recommendation, as in a step study."""
    base = settings.steps_per_year
    grid = sorted(
        {_steps(maturity, n) for n in (base // 4 or 1, base // 2 or 1, base, 2 * base, 4 * base)}
    )
    schemes = tuple(dict.fromkeys(("qe", "exact_variance", settings.scheme)))
    return schemes, grid


#: A search cell's screening run takes this share of the production paths
#: (whole blocks of :data:`~rootvar.core.montecarlo.european.BLOCK`; none
#: below one block).
SCREEN_SHARE = 8
#: A cell is screened out when its screening band, scaled to the production
#: paths, is wider than this many tolerances.
SCREEN_MARGIN = 1.25


def screen_paths(paths: int) -> int:
    """Paths of a search cell's screening run: whole blocks, about 1/8 of ``paths`` (0: none)."""
    return (int(paths) // (SCREEN_SHARE * BLOCK)) * BLOCK


def _compare(spec, settings, seed, maturity, strike, scheme, steps, paths):
    return compare_mc_fourier(
        spec.params,
        spec.spot,
        strike,
        maturity,
        spec.rate,
        spec.div_yield,
        "call",
        scheme,
        steps,
        paths,
        seed,
        False,
        True,
        settings.tolerance_bp,
        None,
        settings.z,
    )


def screened_out(screen, paths: int, margin: float = SCREEN_MARGIN) -> str:
    """Why a cell's screening run rules out a consistent verdict at ``paths`` ("" if it does not).

    Two tests, each on the screening run's own paths:

    - its verdict is "biased": the 3-standard-error band already lies
      wholly outside the tolerance (the verdict's own test, at fewer paths);
    - its standard error scaled to the production paths,
      ``s sqrt(n_screen / paths)`` (the error of a Monte Carlo mean falls
      as the square root of the paths; Glasserman 2004, sec. 1.1), gives a
      band ``z s`` wider than ``margin`` tolerances.  A consistent verdict
      needs ``|d| + z s <= tol``, so it needs ``z s <= tol``: the production
      run cannot reach it unless its standard error came out below the
      screening estimate by a factor ``margin``.

    Parameters
    ----------
    screen : Comparison
        The check of the screening run (one strike).
    paths : int
        Production paths the cell would be run at.
    margin : float
        Tolerances the scaled band must exceed, > 1.

    Returns
    -------
    str
        The reason, or "" when the cell must be run at ``paths``.

    References
    ----------
    Glasserman, P. (2004), *Monte Carlo Methods in Financial Engineering*,
    Springer, sec. 1.1 (section number from memory).
    """
    if screen.verdict == BIASED:
        return "biased on the screening paths"
    tol = float(screen.tolerance_price)
    band = screen.z * float(screen.mc.std_error) * math.sqrt(screen.mc.paths / paths)
    if math.isfinite(tol) and tol > 0 and band > margin * tol:
        return f"band {band / tol:.2f} tolerances at {paths:,} paths (from the screening run)"
    return ""


def search_cells(spec, settings, seed, maturity, strike):
    """The recommendation search, cell by cell, cheapest first, up to the first consistent cell.

    Yields
    ------
    tuple
        ``(scheme, steps, verdict, screened)`` per cell tried: ``screened``
        is the reason a screening run ruled the cell out ("" when it was run
        at the production paths, whose verdict ``verdict`` then is).

    Notes
    -----
    Cells go in the step study's order (lowest steps x :data:`SCHEME_COST`,
    ties to the earlier scheme, then the fewer steps).  With enough paths
    each cell first runs on :func:`screen_paths` paths, which are the first
    blocks of its production run (same seed: block ``j`` has the same stream
    in both); :func:`screened_out` then skips the production run when it
    cannot be consistent.  A skipped cell is never the answer, so a screening
    error can only pass over a consistent cell (the answer is then a dearer
    cell or none), never recommend one that was not run in full and found
    consistent.
    """
    schemes, grid = recommendation_grid(settings, maturity)
    cells = sorted(
        ((n * SCHEME_COST[s], i, n, s) for i, s in enumerate(schemes) for n in grid),
        key=lambda c: c[:3],
    )
    few = screen_paths(settings.paths)
    for _, _, n, scheme in cells:
        if few:
            screen = _compare(spec, settings, seed, maturity, strike, scheme, n, few)
            why = screened_out(screen, settings.paths)
            if why:
                yield scheme, n, str(screen.verdict), why
                continue
        cmp_ = _compare(spec, settings, seed, maturity, strike, scheme, n, settings.paths)
        yield scheme, n, str(cmp_.verdict), ""
        if cmp_.verdict == CONSISTENT:
            return


def recommended_run(spec, settings, seed, maturity, strike) -> str:
    """Cheapest consistent scheme and step for one failing option.

    The answer is the step study's ``cheapest`` cell (lowest steps x
    :data:`SCHEME_COST`, ties to the earlier scheme, then the fewer steps),
    found without running the whole study (:func:`search_cells`): the cells
    are tried in that order and the first consistent one is the answer,
    since every cell is run with the same seed and settings as in the study.
    A cell that a screening run on an eighth of the paths shows cannot be
    consistent is not run in full; so a book where most failing options
    settle on a coarse QE step pays one or two runs, and a model no cell can
    settle at these paths pays about two instead of fifteen.
    """
    for scheme, n, verdict, screened in search_cells(spec, settings, seed, maturity, strike):
        if verdict == CONSISTENT and not screened:
            return f"{scheme} at {n / maturity:.0f} steps a year"
    return "none consistent at these paths; raise paths or steps"


def _unformed_reason(price, iv, iv_reason, spot, strike, t, rate, div_yield) -> str:
    """Why a price has no usable implied volatility ("" when it has one).

    The vol-bp difference is only meaningful when both prices invert to an
    implied volatility that reprices them.  Outside the no-arbitrage bounds,
    at rho = +-1 (where a scheme's price may sit on a bound) or at a spot so
    extreme that the Black-Scholes arithmetic overflows, it does not, and a
    fallback through the vega would print an absurd number instead.
    """
    if not math.isfinite(price):
        return "the price is not a finite number"
    if not (math.isfinite(iv) and iv > 0):
        return iv_reason or "no implied volatility reprices it"
    back = float(bs_price(spot, strike, t, iv, rate, div_yield, "call"))
    if not math.isfinite(back) or abs(back - price) > 1e-6 * max(abs(price), 1e-12 * spot):
        return "its implied volatility does not reprice it (arithmetic out of range)"
    return ""


def check_model(spec: ModelSpec, settings: ControlSettings) -> list[dict]:
    """Result rows (one per test option) for one model.

    Returns
    -------
    list of dict
        Keys: model_id, underlying, feller_ratio, regime, negative_probability,
        worst_probability and worst_level (the worst one-step Euler risk over
        all variance levels and the level v* where it sits, at the production
        step), prob_below_worst_level (exact-law P(v_T <= v*) at the maturity),
        safe_step_years, maturity, strike, fourier_price, mc_price, std_error,
        diff_price, diff_vol_bp, z_score, verdict, quantiles (dict level ->
        variance at the maturity), recommendation, flags (list of str), seed.
    """
    p = spec.params
    seed = row_seed(settings.seed, spec.model_id)
    dt = 1.0 / settings.steps_per_year
    ratio = feller_ratio(p.kappa, p.theta, p.vol_of_vol)
    neg = euler_negative_probability(p.v0, p.kappa, p.theta, p.vol_of_vol, dt)
    worst_prob, worst_level = euler_worst_case(p.kappa, p.theta, p.vol_of_vol, dt)
    safe = euler_max_step(p.v0, p.kappa, p.theta, p.vol_of_vol, settings.max_negative_probability)
    model_flags = []
    if ratio < settings.feller_warning:
        model_flags.append(f"Feller ratio {ratio:.3f} below {settings.feller_warning:g}")
    if neg > settings.max_negative_probability:
        model_flags.append(
            f"negative-step probability {neg:.2e} above {settings.max_negative_probability:g}"
        )
    rows = []
    for t in spec.maturities:
        strikes = np.array(spec.moneyness, dtype=float) * spec.spot
        law = cir_transition(p.v0, p.kappa, p.theta, p.vol_of_vol, t)
        quant = {q: float(law.ppf(q)) for q in settings.quantiles}
        # how often the variance visits the worst level: P(v_t <= v*) under the exact law
        below_worst = float(law.cdf(worst_level)) if math.isfinite(worst_level) else 1.0
        run = mc_price(
            p,
            spec.spot,
            strikes,
            t,
            spec.rate,
            spec.div_yield,
            "call",
            settings.scheme,
            _steps(t, settings.steps_per_year),
            settings.paths,
            seed,
            False,
            True,
        )
        cmp_ = compare_mc_fourier(
            p,
            spec.spot,
            strikes,
            t,
            spec.rate,
            spec.div_yield,
            tolerance_bp=settings.tolerance_bp,
            z=settings.z,
            mc_result=run,
        )
        verdicts = np.atleast_1d(cmp_.verdict).astype(object)
        diff_bp = np.array(np.atleast_1d(cmp_.diff_vol_bp), dtype=float)
        fourier = np.atleast_1d(cmp_.fourier_price)
        mc_prices = np.atleast_1d(run.price)
        reasons = [""] * len(strikes)
        for what, prices in (("Fourier", fourier), ("Monte Carlo", mc_prices)):
            ivs, whys = implied_vol_reason(
                prices, spec.spot, strikes, t, spec.rate, spec.div_yield, "call"
            )
            for i, k in enumerate(strikes):
                if reasons[i]:
                    continue  # the Fourier price already had no usable vol
                why = _unformed_reason(
                    float(prices[i]),
                    float(ivs[i]),
                    str(whys[i]),
                    spec.spot,
                    k,
                    t,
                    spec.rate,
                    spec.div_yield,
                )
                if why:
                    reasons[i] = f"no vol-bp difference: {what} price {float(prices[i]):.6g}: {why}"
                    verdicts[i], diff_bp[i] = CHECK_FAILED, math.nan
        worst = int(np.argmax(np.where(verdicts == BIASED, np.abs(diff_bp), -1.0)))
        recommendation = ""
        if (verdicts == BIASED).any():
            recommendation = recommended_run(spec, settings, seed, t, float(strikes[worst]))
        for i, k in enumerate(strikes):
            flags = list(model_flags)
            if verdicts[i] == BIASED:
                flags.append(f"Monte Carlo biased ({diff_bp[i]:+.1f} bp)")
            elif verdicts[i] == UNDECIDED:
                flags.append("Monte Carlo undecided")
            elif verdicts[i] == CHECK_FAILED:
                flags.append("Monte Carlo check could not be formed")
            rows.append(
                {
                    "model_id": spec.model_id,
                    "underlying": spec.underlying,
                    "feller_ratio": ratio,
                    "regime": regime_label(ratio),
                    "negative_probability": neg,
                    "worst_probability": float(worst_prob),
                    "worst_level": float(worst_level),
                    "prob_below_worst_level": below_worst,
                    "safe_step_years": safe,
                    "maturity": float(t),
                    "strike": float(k),
                    "fourier_price": float(cmp_.fourier_price[i]),
                    "mc_price": float(run.price[i]),
                    "std_error": float(run.std_error[i]),
                    "diff_price": float(cmp_.diff_price[i]),
                    "diff_vol_bp": float(diff_bp[i]),
                    "z_score": float(cmp_.z_score[i]),
                    "verdict": str(verdicts[i]),
                    "quantiles": quant,
                    "recommendation": recommendation if verdicts[i] in (BIASED, UNDECIDED) else "",
                    "flags": flags,
                    "seed": seed,
                    "reason": reasons[i],
                }
            )
    return rows
