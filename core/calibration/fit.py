"""Calibration of Heston parameters to an implied-volatility surface, with or without Feller."""

from __future__ import annotations

import numbers
import os
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.optimize import least_squares
from scipy.stats import qmc

from rootvar.core.black_scholes import bs_otm_price, bs_vega, implied_vol_reason
from rootvar.core.brief_repr import BriefRepr
from rootvar.core.calibration.quotes import QuoteSet, read_quotes
from rootvar.core.fourier.cos import heston_implied_vol, heston_price_details
from rootvar.core.fourier.gradient import GRID_TOL, PARAM_NAMES, SurfacePricer, grid_from_details
from rootvar.core.params import HestonParams
from rootvar.core.validation import InputError, as_float_array, as_positive_int
from rootvar.core.variance.cir_law import cir_transition
from rootvar.core.variance.euler import euler_max_step, euler_negative_probability, regime_label

__all__ = ["DEFAULT_CALIBRATION_SEED", "Calibration", "calibrate", "calibration_tradeoff"]

#: Seed of the low-discrepancy start points when none is given.
DEFAULT_CALIBRATION_SEED = 20260105
#: Start points drawn besides the reasonable one (a power of two suits Sobol).
DEFAULT_STARTS = 8
#: A start "reached the best optimum" when its RMSE (on the grid certified at its
#: own optimum) is within this many bp, or this fraction, of the best (whichever
#: is larger).
SAME_OPTIMUM_BP = 0.05
SAME_OPTIMUM_REL = 0.01
#: Evaluation cap of the first, loose stage of a run (on the start's grid).
FIRST_STAGE_EVALUATIONS = 60
#: Tolerances (xtol, ftol, gtol of least_squares) of the first stage and of the
#: stages on grids certified at the optimum.  Tighter final tolerances only add
#: evaluations: on the benchmark surface 1e-8 and 1e-12 end within 4e-11
#: (relative) of each other in every parameter, 4 evaluations against 17.
LOOSE_TOL = 1e-6
TIGHT_TOL = 1e-8
#: Grid re-certifications per start before giving up.
MAX_STAGES = 4
#: Largest |rho| a fit may reach.  At |rho| = 1 the model degenerates (one
#: Brownian motion drives price and variance), the far call wing prices below the
#: certification floor, and the certified COS grid needs some 8 times the terms;
#: 0.999 costs an enforced fit of the benchmark equity skew 0.13 bp of objective
#: against rho = -1 (144.06 -> 144.18 bp) for 27% fewer terms.
RHO_BOUND = 0.999
#: A direction of parameter space is "not pinned down" when a 10% move along it
#: changes the quotes by less than this RMS (vol, i.e. 1 bp).
IDENTIFY_RMS = 1e-4
#: A parameter counts as identified when one basis point of independent noise
#: per quote moves it by less than this (relative; absolute for rho).
IDENTIFY_REL_SE = 0.01
_BP = 1e4
#: Out-of-the-money prices below this (x spot) give no volatility, as in heston_implied_vol.
_PRICE_FLOOR = 1e-9


@dataclass(frozen=True, repr=False)
class Calibration(BriefRepr):
    """Result of :func:`calibrate`.

    Attributes
    ----------
    params : HestonParams
        Calibrated parameters.
    feller : str
        ``"free"``, ``"enforce"`` or ``"ratio >= R"``.
    min_ratio : float or None
        Smallest Feller ratio allowed (None when free).
    rmse_bp, max_abs_bp : float
        Weighted root-mean-square and largest absolute implied-vol error in
        basis points, from certified Fourier prices.
    residuals : pandas.DataFrame
        One row per quote: ``maturity``, ``strike``, ``market_vol``,
        ``model_vol``, ``error_bp`` (model minus market), ``weight``.
    feller_ratio : float
    regime : str
        Plain-words Feller regime (:func:`rootvar.core.regime_label`).
    std_errors : pandas.Series
        Standard error of each parameter from the Jacobian.
    correlation : pandas.DataFrame
        Correlation matrix of the parameter estimates.
    identified : pandas.Series of bool
        Whether the quotes pin each parameter down (see Notes of :func:`calibrate`).
    warnings : tuple of str
        Identifiability, static-arbitrage and certification warnings.
    status : str
        ``"converged"``, or the reason it is not, and any quotes without a
        certified model volatility.
    converged : bool
        The optimiser converged on a grid certified at the optimum.
    evaluations : int
        Surface evaluations (prices with their gradient) over every start.
    seconds : float
    starts : int
        Start points tried.
    starts_at_best : int
        How many of them reached the best optimum (RMSE on the grid
        certified at their own optimum within 0.05 bp or 1% of the best).
    skipped_quotes : int
        Empty or NaN quote rows left out.
    """

    params: HestonParams
    feller: str
    min_ratio: float | None
    rmse_bp: float
    max_abs_bp: float
    residuals: pd.DataFrame
    feller_ratio: float
    regime: str
    std_errors: pd.Series
    correlation: pd.DataFrame
    identified: pd.Series
    warnings: tuple
    status: str
    converged: bool
    evaluations: int
    seconds: float
    starts: int
    starts_at_best: int
    skipped_quotes: int


# ------------------------------------------------------------ parameterisations


class Coordinates:
    """``x = (ln v0, ln kappa, ln theta, ln R, rho)`` with ``R`` the Feller ratio.

    ``vol_of_vol = sqrt(2 kappa theta / R)``.  The Feller constraint becomes a
    bound on one coordinate, ``ln R >= ln R_min``; ``rho`` is bounded to
    ``[-RHO_BOUND, RHO_BOUND]``, strictly inside ``(-1, 1)``; ``v0``,
    ``kappa`` and ``theta`` are unbounded on a log scale.  Free fits use the
    same coordinates with ``ln R`` unbounded.
    """

    size = 5
    names = ("v0", "kappa", "theta", "Feller ratio", "rho")

    def __init__(self, min_ratio=None):
        self.min_ratio = min_ratio
        low = -np.inf if min_ratio is None else np.log(min_ratio)
        self.bounds = (
            [-np.inf, -np.inf, -np.inf, low, -RHO_BOUND],
            [np.inf, np.inf, np.inf, np.inf, RHO_BOUND],
        )

    def values(self, x):
        """Natural parameters ``(v0, kappa, theta, vol_of_vol, rho)`` at ``x``, as an array.

        The optimiser's callbacks use these directly: building (and
        validating) a :class:`HestonParams` per evaluation costs as much as
        the compiled surface evaluation itself.
        """
        v0, kappa, theta, ratio = np.exp(np.clip(x[:4], -40.0, 12.0))
        if self.min_ratio is not None:
            ratio = max(ratio, self.min_ratio)  # exp(ln R_min) may round below R_min
        vol = np.sqrt(2.0 * kappa * theta / ratio)
        if self.min_ratio is not None:
            # the ratio recomputed from the parameters must not round below the bound,
            # or a fit on the bound would read as a breach: step vol_of_vol down an ulp
            for _ in range(4):
                if 2.0 * kappa * theta / vol**2 >= self.min_ratio:
                    break
                vol = np.nextafter(vol, 0.0)
        return np.array([v0, kappa, theta, vol, min(max(float(x[4]), -RHO_BOUND), RHO_BOUND)])

    def params(self, x):
        return HestonParams(*(float(v) for v in self.values(x)))

    def chain(self, x, p):
        """d(natural parameters) / dx at ``x`` (``p = values(x)``), shape (5, 5)."""
        m = np.diag([p[0], p[1], p[2], 0.0, 1.0])
        m[3, 1] = m[3, 2] = 0.5 * p[3]
        m[3, 3] = -0.5 * p[3]
        return m

    def start(self, p):
        ratio = p.feller_ratio
        if self.min_ratio is not None:
            ratio = max(ratio, 1.2 * self.min_ratio)  # start strictly inside
        rho = float(np.clip(p.rho, -0.99 * RHO_BOUND, 0.99 * RHO_BOUND))  # strictly inside
        return np.array([np.log(p.v0), np.log(p.kappa), np.log(p.theta), np.log(ratio), rho])


def _feller_mode(feller):
    """(label, minimum ratio or None) from "free", "enforce" or a number."""
    if isinstance(feller, str):
        key = feller.strip().lower()
        if key == "free":
            return "free", None
        if key == "enforce":
            return "enforce", 1.0
        try:
            feller = float(key)
        except ValueError:
            raise InputError(
                f"feller must be 'free', 'enforce' or a minimum ratio > 0, got {feller!r}"
            ) from None
    if isinstance(feller, bool) or not isinstance(feller, numbers.Real):
        raise InputError(f"feller must be 'free', 'enforce' or a minimum ratio > 0, got {feller!r}")
    ratio = float(as_float_array("feller", feller, ">0"))
    return f"ratio >= {ratio:g}", ratio


# ------------------------------------------------------------ the problem


@dataclass
class _Run:
    params: HestonParams
    x: np.ndarray
    transform: object
    rmse_bp: float
    certified: bool
    status: str
    pricer: SurfacePricer
    details: object  # certified puts at ``params`` (FourierDetails)


class _Problem:
    """Vega-scaled price residuals of one quote set, with the analytic Jacobian."""

    def __init__(self, quotes: QuoteSet, spot, rate, div_yield):
        self.q = quotes
        self.spot, self.rate, self.div_yield = spot, rate, div_yield
        k, t, v = quotes.strike, quotes.maturity, quotes.implied_vol
        self.market = bs_otm_price(spot, k, t, v, rate, div_yield)
        self.scale = np.sqrt(quotes.weight) / np.maximum(
            bs_vega(spot, k, t, v, rate, div_yield), 1e-12 * spot * np.sqrt(t)
        )
        self.evaluations = 0
        self._lock = threading.Lock()

    def details(self, p):
        q = self.q
        # the COS route: the fit differentiates on the certified COS grid of these details
        return heston_price_details(
            p, self.spot, q.strike, q.maturity, self.rate, self.div_yield, "put", method="cos"
        )

    def pricer(self, p, details):
        q = self.q
        grid = grid_from_details(details, p, self.rate - self.div_yield)
        return SurfacePricer(grid, self.spot, q.strike, q.maturity, self.rate, self.div_yield)

    def run(self, start: HestonParams, transform, tight=True) -> _Run | None:
        """Least squares from ``start`` on the certified grid of the start.

        The grid is checked against certified prices at the optimum and,
        when the optimum has moved off it, rebuilt there and the fit resumed.
        Without ``tight`` the fits on grids certified at the optimum stop at
        the loose tolerance too (a start of a multi-start, compared with the
        others before the best is polished).  None when the start has no
        certified grid.
        """
        details = self.details(start)
        if details.fallbacks:
            return None
        pricer = self.pricer(start, details)
        return self._stages(pricer, transform.start(start), transform, tight, first_loose=True)

    def polish(self, run: _Run) -> _Run:
        """``run`` finished at the tight tolerance, from its optimum on its certified grid."""
        return self._stages(run.pricer, run.x, run.transform, True, first_loose=False)

    def _stages(self, pricer, x, transform, tight, first_loose) -> _Run:
        status = "converged"
        certified = False
        details = None
        # a loose fit on the start's grid first, then fits on grids certified at the
        # optimum found, so no precision is spent on a grid about to change
        for stage in range(MAX_STAGES):
            loose = (stage == 0 and first_loose) or not tight
            x, ok = self._least_squares(pricer, transform, x, tight=not loose)
            status = "converged" if ok else "not converged: evaluation limit reached"
            p = transform.params(x)
            details = self.details(p)
            if details.fallbacks:
                status = "not converged: no certified COS grid at the optimum"
                break
            put, _ = pricer.evaluate(p)
            put = put - np.where(pricer.call_side, pricer.parity, 0.0)
            on_grid = np.max(np.abs(put - details.price)) <= GRID_TOL * self.spot
            if on_grid and (stage > 0 or not first_loose):
                certified = True
                break
            if not on_grid:
                pricer = self.pricer(p, details)  # the optimum moved off the grid's safe zone
        else:
            status = "not converged: the COS grid kept moving with the optimum"
        p = transform.params(x)
        res, _ = self._residuals(pricer, x, transform)
        rmse = float(np.sqrt(np.mean(res * res)) * _BP)
        return _Run(p, x, transform, rmse, certified, status, pricer, details)

    def _residuals(self, pricer, x, transform, with_jac=False):
        with self._lock:
            self.evaluations += 1
        p = transform.values(x)
        price, grad = pricer.evaluate(p)
        res = (price - self.market) * self.scale
        # a trial point far outside the grid's reach can overflow; a large finite
        # residual (100 vol points) makes the solver step back instead of stopping,
        # and the reported fit is recomputed from certified prices anyway
        if not with_jac:
            return np.where(np.isfinite(res), res, 1.0), None
        jac = (grad * self.scale[:, None]) @ transform.chain(x, p)
        return np.where(np.isfinite(res), res, 1.0), np.where(np.isfinite(jac), jac, 0.0)

    def _least_squares(self, pricer, transform, x0, tight):
        """Trust-region least squares; the residuals and Jacobian share one evaluation."""
        cache = {}

        def both(x):
            key = x.tobytes()
            if key not in cache:
                cache.clear()
                cache[key] = self._residuals(pricer, x, transform, True)
            return cache[key]

        tol = TIGHT_TOL if tight else LOOSE_TOL
        out = least_squares(
            lambda x: both(x)[0],
            x0,
            jac=lambda x: both(x)[1],
            bounds=transform.bounds,
            method="trf",
            x_scale="jac",
            xtol=tol,
            ftol=tol,
            gtol=tol,
            max_nfev=400 if tight else FIRST_STAGE_EVALUATIONS,
        )
        return out.x, out.status > 0


# ------------------------------------------------------------ starts


def reasonable_start(q: QuoteSet, spot, rate, div_yield) -> HestonParams:
    """ATM variance of the first and last maturity, moderate reversion and vol of vol.

    ``rho`` takes the sign of the short-dated skew (falling vols in strike:
    negative).  Common practice, no source.
    """
    fwd = spot * np.exp((rate - div_yield) * q.maturity)
    x = np.log(q.strike / fwd)
    times = np.unique(q.maturity)

    def atm(t):
        sel = q.maturity == t
        return float(q.implied_vol[sel][np.argmin(np.abs(x[sel]))])

    first = q.maturity == times[0]
    slope = np.polyfit(x[first], q.implied_vol[first], 1)[0] if first.sum() > 1 else -1.0
    return HestonParams(
        atm(times[0]) ** 2, 1.5, atm(times[-1]) ** 2, 0.6, -0.6 if slope < 0 else 0.2
    )


def _sobol_starts(base: HestonParams, count: int, seed) -> list[HestonParams]:
    """Scrambled Sobol points over a box around the reasonable start (deterministic)."""
    if count == 0:
        return []
    u = qmc.Sobol(d=5, scramble=True, seed=seed).random(count)
    # wider boxes reach vol_of_vol and theta corners whose certified grids need
    # ten times the terms, and their fits end in far worse optima anyway
    lo = np.log([0.5 * base.v0, 0.3, 0.5 * base.theta, 0.2])
    hi = np.log([2.0 * base.v0, 6.0, 2.0 * base.theta, 1.5])
    logs = lo + u[:, :4] * (hi - lo)
    rho = -0.9 + u[:, 4] * 1.2
    return [HestonParams(*np.exp(row), r) for row, r in zip(logs, rho, strict=True)]


# ------------------------------------------------------------ public entry


def calibrate(
    quotes,
    spot,
    rate=0.0,
    div_yield=0.0,
    *,
    feller="free",
    weights=None,
    start=None,
    seed=DEFAULT_CALIBRATION_SEED,
    starts=DEFAULT_STARTS,
    workers=None,
) -> Calibration:
    """Fit Heston parameters to implied volatilities by least squares.

    Parameters
    ----------
    quotes : pandas.DataFrame, dict of columns, list of records, or QuoteSet
        See :func:`rootvar.core.calibration.quotes.read_quotes` (maturity, strike,
        implied_vol or price and kind, optional weight or spread).
    spot : float
        Spot, > 0.
    rate, div_yield : float
        Continuous rate and dividend yield (decimals).
    feller : {"free", "enforce"} or float
        ``"free"``: no constraint.  ``"enforce"``: ``2 kappa theta >= vol_of_vol^2``.
        A number ``R > 0``: the Feller ratio must be at least ``R`` (a desk
        threshold such as 0.5).
    weights : array_like, optional
        One weight per quote row (overrides the quotes' own).
    start : HestonParams, optional
        First start point (default: a reasonable point read off the quotes).
    seed : int
        Seed of the scrambled Sobol start points; same inputs and seed give
        the same answer.
    starts : int
        Sobol start points besides the first one (0 for a single start).
    workers : int, optional
        Threads fitting the start points (default: up to 2).  The answer
        does not depend on it: each start is fitted on its own.

    Returns
    -------
    Calibration

    Notes
    -----
    *Objective.*  The residual of quote ``i`` is its out-of-the-money
    price error divided by the market Black-Scholes vega,
    ``sqrt(w_i) (P_i(model) - P_i(market)) / vega_i``, which equals the
    implied-vol error to first order.  Price residuals need no implied-vol
    inversion per evaluation (which costs more than the pricing and fails
    where a trial parameter set prices below the floor), and their
    Jacobian is the exact price gradient
    (:func:`rootvar.core.fourier.gradient.heston_price_gradient`) divided by a
    constant.  The reported RMSE, largest error and residual table are
    implied-vol errors from certified prices
    (:func:`rootvar.core.heston_implied_vol`) at the end.

    *Feller by reparameterisation.*  The fit runs in the coordinates
    ``(ln v0, ln kappa, ln theta, ln R, rho)`` with ``R = 2 kappa theta /
    vol_of_vol^2`` the Feller ratio itself, so ``vol_of_vol = sqrt(2 kappa theta
    / R)``.  The constraint ``R >= R_min`` is then a plain bound on one
    coordinate, which the trust-region reflective solver keeps exactly and can
    sit on; ``v0``, ``kappa`` and ``theta`` stay unbounded (log scale) and
    ``rho`` is bounded to ``[-0.999, 0.999]`` (:data:`RHO_BOUND`: at
    ``|rho| = 1`` the model degenerates and the certified grid needs about 8
    times the terms; a fit on the bound says so in its warnings).  A penalty
    would let the optimum sit slightly outside the constraint and bend the
    objective near it; a smooth map of an unbounded variable onto
    ``R >= R_min`` (``R_min + e^y``, or a squared slack) puts the boundary at
    infinity or at a stationary point, where the solver crawls: a binding
    constraint is the usual case.

    *Method.*  ``scipy.optimize.least_squares`` (trust-region reflective,
    Jacobian scaling) with the analytic Jacobian, from the reasonable start and ``starts`` scrambled
    Sobol points (``scipy.stats.qmc``, seeded), each fitted to the end; the
    best is kept.  Each run prices on the certified COS grid of its start; at
    its optimum the grid is checked against certified prices and, if it
    moved, rebuilt and the run resumed, so every start's fit is compared on
    a grid certified at its own optimum.

    *Standard errors* from ``s^2 (J^T J)^{-1}`` with ``J`` the Jacobian of the
    weighted implied-vol residuals in the fitted parameters and
    ``s^2 = SSE / (n - k)``.  A parameter is *identified* when one basis
    point of independent noise per quote gives it a standard error below 1%
    (relative; 0.01 absolute for rho).  An identifiability warning names the
    weakest direction of the Jacobian when a 10% move along it changes the
    quotes by less than 1 bp RMS.

    References
    ----------
    Cui, Y., del Baño Rollin, S. & Germano, G. (2017). Full and fast
    calibration of the Heston stochastic volatility model. European Journal
    of Operational Research 263(2), 625-638.
    Branch, M. A., Coleman, T. F. & Li, Y. (1999). A subspace, interior, and
    conjugate gradient method for large-scale bound-constrained minimization
    problems. SIAM J. Sci. Comput. 21(1), 1-23.
    """
    began = time.perf_counter()
    label, min_ratio = _feller_mode(feller)
    n_starts = 0 if starts == 0 else as_positive_int("starts", starts)
    if start is not None and not isinstance(start, HestonParams):
        raise InputError(f"start must be a HestonParams, got {type(start).__name__}")
    spot = float(as_float_array("spot", spot, ">0"))
    rate = float(as_float_array("rate", rate))
    div_yield = float(as_float_array("div_yield", div_yield))
    q = (
        quotes
        if isinstance(quotes, QuoteSet)
        else read_quotes(quotes, spot, rate, div_yield, weights)
    )
    if isinstance(quotes, QuoteSet) and weights is not None:
        raise InputError("weights must be left out when quotes is a QuoteSet, got both")
    problem = _Problem(q, spot, rate, div_yield)
    first = start or reasonable_start(q, spot, rate, div_yield)
    points = [first, *_sobol_starts(first, n_starts, seed)]
    transform = Coordinates(min_ratio)
    # every start is fitted on grids certified at its own optimum, so the fits
    # compare on certified prices: a start stopped on its own start's grid (once
    # the screening here) reads tens of bp off and hides that it would have reached
    # the same optimum.  With several starts each stops at the loose tolerance, and
    # only the best is polished to the tight one.
    if len(points) == 1:
        runs = [_try(problem, points[0], transform, True)]
    else:
        with ThreadPoolExecutor(max_workers=_workers(workers, len(points))) as pool:
            runs = list(pool.map(lambda pt: _try(problem, pt, transform, False), points))
    runs = [r for r in runs if r is not None]
    if not runs:
        raise InputError("quotes could not be fitted: no start point had a certified COS grid")
    ranked = [r for r in runs if r.certified] or runs
    best = min(ranked, key=lambda r: r.rmse_bp)
    near = max(SAME_OPTIMUM_BP, SAME_OPTIMUM_REL * best.rmse_bp)
    at_best = sum(r.rmse_bp <= best.rmse_bp + near for r in ranked)
    if len(points) > 1 and best.certified:
        best = _polished(problem, best)
    return _finish(problem, best, label, min_ratio, len(points), at_best, began)


def _try(problem, point, transform, tight):
    """One run, or None when the start has no certified grid or breaks the arithmetic."""
    try:
        return problem.run(point, transform, tight)
    except (InputError, FloatingPointError, np.linalg.LinAlgError):
        return None


def _polished(problem, run):
    """The best start finished at the tight tolerance; itself if that fails to certify."""
    try:
        done = problem.polish(run)
    except (InputError, FloatingPointError, np.linalg.LinAlgError):
        return run
    return done if done.certified else run


def _workers(workers, jobs) -> int:
    """Threads for the start points: numpy releases the interpreter lock in its loops."""
    if workers is None:
        workers = min(2, os.cpu_count() or 1)
    return max(1, min(as_positive_int("workers", workers), jobs))


def _finish(problem: _Problem, run: _Run, label, min_ratio, tried, at_best, began):
    q, p = problem.q, run.params
    spot, rate, div_yield = problem.spot, problem.rate, problem.div_yield
    if run.certified:
        model = _certified_vols(problem, run.details)
    else:
        model = np.asarray(
            heston_implied_vol(p, spot, q.strike, q.maturity, rate, div_yield, "cos"), dtype=float
        ).reshape(-1)
    err = model - q.implied_vol
    w = q.weight
    notes = list(q.warnings)
    status = run.status
    if not run.certified and status == "converged":
        status = "not converged: the COS grid could not be certified at the optimum"
    converged = status == "converged"
    missing = ~np.isfinite(err)
    if missing.any():
        status += f"; {int(missing.sum())} quote(s) without a certified model volatility"
        notes.append(
            f"{int(missing.sum())} quote(s) have no certified model volatility (model price "
            "below 1e-9 x spot) and are left out of the RMSE and largest error"
        )
    ok = ~missing
    rmse = float(np.sqrt(np.sum(w[ok] * err[ok] ** 2) / np.sum(w[ok])) * _BP)
    max_abs = float(np.max(np.abs(err[ok])) * _BP) if ok.any() else float("nan")
    residuals = pd.DataFrame(
        {
            "maturity": q.maturity,
            "strike": q.strike,
            "market_vol": q.implied_vol,
            "model_vol": model,
            "error_bp": err * _BP,
            "weight": w,
        }
    )
    se, corr, identified, warn = _uncertainty(problem, run, err, ok)
    notes.extend(warn)
    if abs(p.rho) >= RHO_BOUND * (1 - 1e-12):
        notes.append(
            f"rho sits on its bound {p.rho:+.3f}: the quotes ask for a more extreme "
            "correlation than the fit allows (|rho| <= 0.999)"
        )
    return Calibration(
        params=p,
        feller=label,
        min_ratio=min_ratio,
        rmse_bp=rmse,
        max_abs_bp=max_abs,
        residuals=residuals,
        feller_ratio=p.feller_ratio,
        regime=regime_label(p.feller_ratio),
        std_errors=se,
        correlation=corr,
        identified=identified,
        warnings=tuple(notes),
        status=status,
        converged=converged,
        evaluations=problem.evaluations,
        seconds=time.perf_counter() - began,
        starts=tried,
        starts_at_best=int(at_best),
        skipped_quotes=q.skipped,
    )


def _certified_vols(problem: _Problem, details) -> np.ndarray:
    """Implied vols of the certified puts at the fit, as :func:`heston_implied_vol` gives them.

    The put strip certified at the optimum is already at hand, so it is not
    priced again: out-of-the-money price (put below the forward, call by
    parity above it), inverted by :func:`rootvar.core.implied_vol_reason`,
    NaN below ``1e-9 x spot`` where the certified accuracy says nothing
    about the volatility.  A test holds this equal to ``heston_implied_vol``.
    """
    q = problem.q
    spot, rate, div_yield = problem.spot, problem.rate, problem.div_yield
    put = np.asarray(details.price, dtype=float)
    spot_df = spot * np.exp(-div_yield * q.maturity)
    strike_df = q.strike * np.exp(-rate * q.maturity)
    gap = spot_df - strike_df
    call = np.clip(put + gap, np.maximum(gap, 0.0), spot_df)
    use_put = q.strike < spot * np.exp((rate - div_yield) * q.maturity)
    vol_put, _ = implied_vol_reason(put, spot, q.strike, q.maturity, rate, div_yield, "put")
    vol_call, _ = implied_vol_reason(call, spot, q.strike, q.maturity, rate, div_yield, "call")
    otm = np.where(use_put, put, call)
    vol = np.where(use_put, vol_put, vol_call)
    return np.where(otm >= _PRICE_FLOOR * spot, vol, np.nan)


def _uncertainty(problem: _Problem, run: _Run, err, ok):
    """Standard errors, correlation, identified flags and warnings from the Jacobian."""
    p, transform = run.params, run.transform
    _, grad = run.pricer.evaluate(p)
    chain = transform.chain(run.x, transform.values(run.x))
    fitted = transform.names
    if transform.min_ratio is not None and p.feller_ratio <= transform.min_ratio * (1 + 1e-9):
        # on the constraint the ratio is held, not estimated: four free directions
        chain = np.delete(chain, 3, axis=1)
        fitted = fitted[:3] + fitted[4:]
    # Jacobian of the weighted implied-vol residuals in the fitted directions
    jac = (grad * problem.scale[:, None]) @ chain
    jac = jac[ok]
    n, k = jac.shape
    weighted = np.sqrt(problem.q.weight[ok]) * err[ok]
    s2 = float(weighted @ weighted) / max(n - k, 1)
    # columns per relative move of v0, kappa, theta and R; per unit of rho
    _, sing, vt = np.linalg.svd(jac, full_matrices=False)
    with np.errstate(divide="ignore"):
        inv = np.where(sing > 0, 1.0 / sing**2, np.inf)
    cov_x = (vt.T * inv) @ vt
    cov = chain @ cov_x @ chain.T
    # x-space scale is already relative (log) for the positive parameters
    cov = np.where(np.isfinite(cov), cov, np.inf)
    var = np.diag(cov).copy()
    se = np.sqrt(s2 * var)
    names = list(PARAM_NAMES)
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.sqrt(np.outer(var, var))
    values = np.array([getattr(p, name) for name in names])
    scale = np.where(np.array(names) == "rho", 1.0, np.abs(values))
    rel_se_1bp = 1e-4 * np.sqrt(var) / scale
    identified = pd.Series(rel_se_1bp <= IDENTIFY_REL_SE, index=names)
    notes = []
    weakest = sing[-1] * 0.1 / np.sqrt(n) if sing.size else 0.0
    if weakest < IDENTIFY_RMS:
        direction = vt[-1] / np.max(np.abs(vt[-1]))
        parts = [
            f"{name} {d:+.2f}" for name, d in zip(fitted, direction, strict=True) if abs(d) >= 0.25
        ]
        loose = [name for name in names if not identified[name]]
        notes.append(
            "identifiability: the quotes barely pin down the mix of relative moves "
            f"({', '.join(parts)}): a 10% move along it changes them by "
            f"{weakest * _BP:.2g} bp RMS"
            + (f"; not identified: {', '.join(loose)}" if loose else "")
        )
    return (
        pd.Series(se, index=names),
        pd.DataFrame(corr, index=names, columns=names),
        identified,
        notes,
    )


# ------------------------------------------------------------ trade-off


def calibration_tradeoff(
    quotes,
    spot,
    rate=0.0,
    div_yield=0.0,
    *,
    feller="enforce",
    weights=None,
    start=None,
    seed=DEFAULT_CALIBRATION_SEED,
    starts=DEFAULT_STARTS,
    dt=1.0 / 252.0,
    tolerance=1e-3,
    near_zero=1e-4,
) -> pd.DataFrame:
    """The free fit and a Feller-constrained fit side by side, with what each costs and buys.

    Parameters
    ----------
    quotes, spot, rate, div_yield, weights, start, seed, starts
        As in :func:`calibrate`.
    feller : "enforce" or float
        The constraint of the second fit (default: the Feller condition).
    dt : float
        Production Euler step in years (default one trading day).
    tolerance : float
        Acceptable one-step negative probability for the largest safe step.
    near_zero : float
        Variance level counted as near zero (annualised; 1e-4 is 1% vol).

    Returns
    -------
    pandas.DataFrame
        Rows: the five parameters, Feller ratio and regime, RMSE and largest
        error (bp) with the quote where the largest sits, Euler one-step
        negative probability from v0 at ``dt``, largest safe Euler step
        (years), probability that the variance is below ``near_zero`` at 1
        year (exact CIR law), status, starts at the best optimum, and where
        the constraint costs most.  Columns ``free``, the constraint's label
        (``enforce`` or ``ratio >= R``) and ``cost`` (constrained minus free,
        for the numeric rows).
        ``DataFrame.attrs`` holds both :class:`Calibration` objects.

    Notes
    -----
    The constrained fit is never better than the free one in theory (its
    set of parameters is a subset).  When the free fit lands on a worse local
    optimum than the constrained fit, the free fit is run again from the
    constrained optimum, which it may also use, so the table never shows
    a negative cost from a missed optimum.
    """
    label, min_ratio = _feller_mode(feller)
    if min_ratio is None:
        raise InputError("feller must be 'enforce' or a minimum ratio for a trade-off, got 'free'")
    dt = float(as_float_array("dt", dt, ">0"))
    tolerance = float(as_float_array("tolerance", tolerance, "(0,1)"))
    near_zero = float(as_float_array("near_zero", near_zero, ">0"))
    spot = float(as_float_array("spot", spot, ">0"))
    q = (
        quotes
        if isinstance(quotes, QuoteSet)
        else read_quotes(quotes, spot, rate, div_yield, weights)
    )
    common = dict(rate=rate, div_yield=div_yield, start=start, seed=seed, starts=starts)
    free = calibrate(q, spot, feller="free", **common)
    tied = calibrate(q, spot, feller=feller, **common)
    if tied.rmse_bp < free.rmse_bp:
        again = calibrate(q, spot, feller="free", **{**common, "start": tied.params, "starts": 0})
        if again.rmse_bp < free.rmse_bp:
            free = again
    rows = {}
    for name in PARAM_NAMES:
        rows[name] = (getattr(free.params, name), getattr(tied.params, name))
    rows["Feller ratio"] = (free.feller_ratio, tied.feller_ratio)
    rows["regime"] = (free.regime, tied.regime)
    rows["RMSE (bp)"] = (free.rmse_bp, tied.rmse_bp)
    rows["largest error (bp)"] = (free.max_abs_bp, tied.max_abs_bp)
    rows["largest error at"] = (_worst(free), _worst(tied))
    # RMSE and largest error leave these out, so a fit that prices far wings at
    # zero would otherwise look cheaper than it is
    rows["quotes without a model vol"] = tuple(
        int(c.residuals["model_vol"].isna().sum()) for c in (free, tied)
    )
    checks = [_variance_checks(c.params, dt, tolerance, near_zero) for c in (free, tied)]
    for key in checks[0]:
        rows[key] = (checks[0][key], checks[1][key])
    rows["status"] = (free.status, tied.status)
    rows["starts at best / tried"] = (
        f"{free.starts_at_best} / {free.starts}",
        f"{tied.starts_at_best} / {tied.starts}",
    )
    gap = tied.residuals["error_bp"].abs() - free.residuals["error_bp"].abs()
    i = int(np.nanargmax(gap.to_numpy()))
    r = tied.residuals.iloc[i]
    rows["constraint costs most at"] = (
        "",
        f"maturity {r['maturity']:g}, strike {r['strike']:g} (+{gap.iloc[i]:.1f} bp)",
    )
    table = pd.DataFrame.from_dict(rows, orient="index", columns=["free", label])
    numeric = [k for k, (a, b) in rows.items() if _is_num(a) and _is_num(b)]
    cost = pd.Series("", index=table.index, dtype=object)
    for key in numeric:
        cost[key] = float(rows[key][1]) - float(rows[key][0])
    table["cost"] = cost
    table.index.name = "quantity"
    table.attrs.update(free=free, constrained=tied, dt=dt, tolerance=tolerance, near_zero=near_zero)
    return table


def _is_num(value) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def _worst(cal: Calibration) -> str:
    res = cal.residuals
    i = int(np.nanargmax(res["error_bp"].abs().to_numpy()))
    return f"maturity {res['maturity'].iloc[i]:g}, strike {res['strike'].iloc[i]:g}"


def _variance_checks(p: HestonParams, dt, tolerance, near_zero) -> dict:
    step = euler_max_step(p.v0, p.kappa, p.theta, p.vol_of_vol, tolerance)
    law = cir_transition(p.v0, p.kappa, p.theta, p.vol_of_vol, 1.0)
    return {
        f"Euler negative-step prob. at dt {dt:.4g} y": float(
            euler_negative_probability(p.v0, p.kappa, p.theta, p.vol_of_vol, dt)
        ),
        f"largest safe Euler step (years, prob. <= {tolerance:g})": float(step),
        f"P(variance < {near_zero:g}) at 1 year": float(law.cdf(near_zero)),
    }
