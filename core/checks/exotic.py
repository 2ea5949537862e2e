"""An exotic priced twice: Monte Carlo against a second method, with a three-state verdict.

The Monte Carlo price comes from :func:`rootvar.core.montecarlo.exotic` (full
log-price paths, control variates).  The second price comes from a method
that shares as little as possible with it:

* European, single-barrier and digital options: the finite-difference
  solver :func:`rootvar.core.pde_price`, with its refinement error estimate;
* geometric Asians and forward starts: the certified Fourier pricers of
  :mod:`rootvar.core.fourier.exotics`, certified to about ``1e-10 x spot``;
* arithmetic Asians: no deterministic method exists here, so a reference
  Monte Carlo run with exact variance sampling, another control variate and
  an independent seed, with its standard error.

The verdict follows :func:`rootvar.core.compare_mc_fourier`, with a
tolerance in price (exotics have no implied volatility).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.stats import norm

from rootvar.core.brief_repr import BriefRepr
from rootvar.core.checks.vanilla import (
    BIASED,
    CONSISTENT,
    DEFAULT_Z,
    MAX_Z,
    PLANNING_SHARE,
    UNDECIDED,
    planning_paths,
)
from rootvar.core.fourier.exotics import (
    FourierConvergenceError,
    forward_start_price,
    geometric_asian_price,
)
from rootvar.core.fourier.series import RANGE_TOL
from rootvar.core.montecarlo.european import DEFAULT_SEED
from rootvar.core.montecarlo.exotic import ExoticMCResult, mc_exotic
from rootvar.core.montecarlo.schemes import SCHEMES
from rootvar.core.params import as_params
from rootvar.core.pde.solver import CONVERGED, DEFAULT_GRID, KNOCKED, pde_price
from rootvar.core.products import (
    AsianOption,
    BarrierOption,
    DigitalOption,
    EuropeanOption,
    ForwardStartOption,
)
from rootvar.core.validation import InputError, as_float, as_positive_int, check_choice

__all__ = [
    "DEFAULT_DIGITAL_TOLERANCE_SHARE",
    "DEFAULT_EXOTIC_PATHS",
    "DEFAULT_EXOTIC_SCHEME",
    "DEFAULT_TOLERANCE_SHARE",
    "ExoticComparison",
    "compare_exotic",
    "second_price",
]

#: Default tolerance of the exotic check, as a share of the spot: 0.1% of the
#: notional.  A price error that size is well inside a typical bid-offer on a
#: barrier or an Asian (a few tenths of a per cent of notional; common practice,
#: no source), and at the default paths the controlled Monte Carlo band of
#: 3 standard errors fits inside it with room for the second method's error.
DEFAULT_TOLERANCE_SHARE = 1e-3
#: Default tolerance of a digital's check, as a share of its cash: a digital is quoted
#: as a share of what it pays, with a bid-offer of a few per cent of it (its hedge is
#: a tight call spread; common practice, no source).  0.1% of the spot would be a
#: sixth of an at-the-money digital paying 1 on a spot of 100.
DEFAULT_DIGITAL_TOLERANCE_SHARE = 1e-2
#: Default Monte Carlo scheme of the check (see :func:`compare_exotic`, Notes).
DEFAULT_EXOTIC_SCHEME = "qe"
#: Default paths of the check (antithetic, control variate on).
DEFAULT_EXOTIC_PATHS = 100_000
#: The PDE of the check must estimate its error within this share of the tolerance,
#: leaving the rest of the band for the Monte Carlo noise.
PDE_SHARE = 0.25
#: Reference Monte Carlo of an arithmetic Asian: at least this many steps a year (the
#: engine's default), more when the check itself runs finer.
REFERENCE_STEPS_PER_YEAR = 64
#: Paths of the reference run by default: about a second of exact variance sampling at
#: 64 steps a year on 2 cores; its standard error (about 0.01 on spot 100 with the
#: European control) is a tenth of the default tolerance.
REFERENCE_PATHS = 50_000
#: Salt of the reference run's seed, so its stream is independent of the check's.
REFERENCE_SALT = 15

PDE = "PDE"
FOURIER = "Fourier"
REFERENCE_MC = "reference Monte Carlo"
BOUND = "bound"
STANDARD_ERROR = "standard error"


@dataclass(frozen=True, repr=False)
class SecondPrice(BriefRepr):
    """The second method's price, its error and whether it can be used.

    Attributes
    ----------
    method : str
        "PDE", "Fourier" or "reference Monte Carlo".
    price : float
        Price in the currency of the spot (NaN when not certified).
    error : float
        Its error: a bound for the PDE and Fourier (``error_kind`` "bound"),
        a standard error for the reference Monte Carlo.
    error_kind : str
        "bound", "standard error" or "" (no price).
    status : str
        "converged", "already knocked" or "not converged" (PDE),
        "certified" or "not certified" (Fourier), "simulated" (reference run).
    usable : bool
        Whether a verdict may be built on ``price``.
    detail : str
        How the price was obtained, or why it cannot be used.
    result : object
        The full result (:class:`PDEResult`, :class:`ExoticMCResult`) or None.
    """

    method: str
    price: float
    error: float
    error_kind: str
    status: str
    usable: bool
    detail: str
    result: object = None


@dataclass(frozen=True, repr=False)
class ExoticComparison(BriefRepr):
    """Monte Carlo against the second method for one exotic.

    Attributes
    ----------
    mc : ExoticMCResult
        The Monte Carlo run (price, standard error, control variate).
    second_method : str
        "PDE", "Fourier" or "reference Monte Carlo".
    second_price, second_error : float
        The second price and its error (NaN when not certified).
    second_error_kind : str
        "bound" (PDE, Fourier: added to the band in full) or "standard error"
        (reference Monte Carlo: combined with the Monte Carlo's in quadrature).
    second_status : str
        See :class:`SecondPrice`.
    diff : float
        Monte Carlo minus second price, currency units.
    combined_error : float
        Standard error of ``diff``: ``sqrt(se_mc^2 + se_2^2)``, ``se_2`` the
        reference run's standard error (0 for a deterministic second method).
    band : float
        Half-width of the band around ``diff``:
        ``z x combined_error + bound`` (``bound`` the deterministic error).
    tolerance : float
        Tolerance in price (currency units).
    z : float
    verdict : str
        "consistent", "biased" or "undecided".
    paths_to_settle : int
        Paths at which a rerun of an undecided check decides in 90% of cases;
        0 when decided, -1 when no path count can (the second method must be
        refined, or is not converged).
    reason : str
        Plain words.
    scheme, steps : str, int
        The Monte Carlo scheme and its total number of time steps.
    scheme_source : str
        Where they came from: "given", "default" or the step study's words.
    second : SecondPrice
        The second method in full.
    """

    mc: ExoticMCResult
    second_method: str
    second_price: float
    second_error: float
    second_error_kind: str
    second_status: str
    diff: float
    combined_error: float
    band: float
    tolerance: float
    z: float
    verdict: str
    paths_to_settle: int
    reason: str
    scheme: str
    steps: int
    scheme_source: str
    second: SecondPrice


_PRODUCTS = (EuropeanOption, BarrierOption, AsianOption, ForwardStartOption, DigitalOption)


def _matching_vanilla(product, spot):
    """The vanilla whose step study stands for the exotic's: same kind, strike, maturity."""
    if isinstance(product, ForwardStartOption):
        return EuropeanOption(product.kind, product.strike_share * spot, product.maturity)
    return EuropeanOption(product.kind, product.strike, product.maturity)


def _reference_seed(seed: int) -> int:
    """A seed for the reference run whose stream is independent of ``seed``'s."""
    state = np.random.SeedSequence([int(seed), REFERENCE_SALT]).generate_state(1, np.uint64)
    return int(state[0] % np.uint64(2**62))


def second_price(
    params,
    spot,
    product,
    rate=0.0,
    div_yield=0.0,
    *,
    pde_tolerance=None,
    pde_grid=DEFAULT_GRID,
    reference=None,
):
    """The second price of an exotic, with its error and status.

    Parameters
    ----------
    params, spot, product, rate, div_yield
        As in :func:`compare_exotic`.
    pde_tolerance : float, optional
        Largest accepted PDE error estimate, as a share of the spot
        (default: the PDE's own, 1e-3).
    pde_grid : (int, int, int)
        Finest PDE grid (see :func:`rootvar.core.pde_price`).
    reference : dict, optional
        Settings of the reference Monte Carlo for an arithmetic Asian:
        ``steps``, ``paths``, ``seed`` (required then).

    Returns
    -------
    SecondPrice
        Never raises for a method that cannot certify its price: the status
        says "not converged" / "not certified" and ``usable`` is False.
    """
    if isinstance(product, (EuropeanOption, BarrierOption, DigitalOption)):
        kwargs = {"grid": pde_grid}
        if pde_tolerance is not None:
            kwargs["tolerance"] = pde_tolerance
        res = pde_price(params, spot, product, rate, div_yield, **kwargs)
        usable = res.status in (CONVERGED, KNOCKED)
        detail = res.note or f"{res.method}, grid {res.grid[0]} x {res.grid[1]} x {res.time_steps}"
        if not usable:
            detail = (
                f"the PDE did not converge: error estimate {res.error_estimate:.3g} exceeds its "
                f"tolerance {res.tolerance:.3g}; refine the grid or loosen the tolerance"
            )
        return SecondPrice(
            PDE, res.price, res.error_estimate, BOUND, res.status, usable, detail, res
        )
    if isinstance(product, ForwardStartOption) or (
        isinstance(product, AsianOption) and product.average == "geometric"
    ):
        forward = isinstance(product, ForwardStartOption)
        pricer = forward_start_price if forward else geometric_asian_price
        try:
            price = float(pricer(params, spot, product, rate, div_yield))
        except FourierConvergenceError as exc:
            return SecondPrice(
                FOURIER, math.nan, math.nan, "", "not certified", False,
                f"the Fourier price could not be certified: {exc}",
            )  # fmt: skip
        # certified so that doubling the range moves the price by at most RANGE_TOL x spot;
        # that figure is the error bound used (module notes of fourier_exotics)
        bound = RANGE_TOL * float(spot)
        return SecondPrice(
            FOURIER, price, bound, BOUND, "certified", True,
            f"certified COS Fourier price, error bound {RANGE_TOL:g} x spot",
        )  # fmt: skip
    if isinstance(product, AsianOption):
        ref = reference or {}
        run = mc_exotic(
            params,
            spot,
            product,
            rate,
            div_yield,
            scheme="exact_variance",
            steps=ref["steps"],
            paths=ref["paths"],
            seed=ref["seed"],
            antithetic=True,
            control="european",
        )
        return SecondPrice(
            REFERENCE_MC, run.price, run.std_error, STANDARD_ERROR, "simulated", True,
            f"reference Monte Carlo: exact variance sampling, {run.steps} steps in all, "
            f"{run.paths:,} paths, control {run.control}, independent seed {run.seed}",
            run,
        )  # fmt: skip
    raise InputError(f"product has no second method here, got {type(product).__name__}")


def band_verdict(d, se_mc, se_2, bound, tol, z):
    """The three states from the band ``d +- (z sqrt(se_mc^2 + se_2^2) + bound)``."""
    stat = math.sqrt(se_mc**2 + se_2**2)
    half = z * stat + bound
    lo, hi = d - half, d + half
    if lo >= -tol and hi <= tol:
        return CONSISTENT, stat, half
    if lo > tol or hi < -tol:
        return BIASED, stat, half
    return UNDECIDED, stat, half


def deciding_paths(paths, se_mc, se_2, bound, tol, z):
    """Paths at which a rerun of the Monte Carlo decides, or -1 when the second method must move.

    The second method's error does not shrink with the check's paths: a rerun
    at ``N`` paths decides in :data:`PLANNING_SHARE` of cases when
    ``(z + q) sqrt(s_N^2 + se_2^2) + bound <= tol`` (``q`` as in
    :func:`rootvar.core.planning_paths`), so the check's noise must fit in
    ``sqrt((tol - bound)^2 - ((z + q) se_2)^2) / (z + q)``.
    """
    q = float(norm.ppf(0.5 * (1.0 + PLANNING_SHARE)))
    if tol <= bound or se_mc <= 0:
        return -1
    room = (tol - bound) ** 2 - ((z + q) * se_2) ** 2
    if room <= 0:
        return -1
    return int(planning_paths(paths, se_mc, math.sqrt(room), z))


def _study_choice(params, spot, product, rate, div_yield, seed):
    """Scheme and steps recommended by the step study on the matching vanilla."""
    from rootvar.core.checks.vanilla import step_study

    v = _matching_vanilla(product, spot)
    table = step_study(
        params,
        spot,
        v.strike,
        v.maturity,
        rate,
        div_yield,
        v.kind,
        schemes=("euler_full", "qe", "exact_variance"),
        steps_grid=(2, 4, 8, 16, 32),
        paths=100_000,
        seed=seed,
        antithetic=True,
    )
    best = table.attrs["cheapest"]
    if best is None:
        return None
    # the study counts steps over the vanilla's maturity; the engine takes them per year
    return best["scheme"], int(best["steps"]), max(1, math.ceil(best["steps"] / v.maturity))


def compare_exotic(
    params,
    spot,
    product,
    rate=0.0,
    div_yield=0.0,
    *,
    scheme=None,
    steps=None,
    paths=DEFAULT_EXOTIC_PATHS,
    seed=DEFAULT_SEED,
    antithetic=True,
    control="auto",
    tolerance=None,
    z=DEFAULT_Z,
    study=False,
    pde_grid=DEFAULT_GRID,
    pde_tolerance=None,
    reference_paths=None,
    mc_result=None,
) -> ExoticComparison:
    """Price an exotic by Monte Carlo and by a second method, and decide whether they agree.

    Parameters
    ----------
    params : HestonParams
    spot : float
        Spot today, > 0.
    product : EuropeanOption, BarrierOption, AsianOption, ForwardStartOption or DigitalOption
    rate, div_yield : float
        Continuously compounded rate and dividend yield (decimals).
    scheme : str, optional
        Monte Carlo scheme (a key of :data:`rootvar.core.SCHEMES`).  Default:
        the step study's when ``study`` is True, else "qe".
    steps : int, optional
        Time steps per year, as in :func:`rootvar.core.montecarlo.exotic` (every
        fixing, monitoring and start date is a grid node).  Default: the step
        study's (its steps over the maturity, per year) when ``study`` is
        True, else :func:`rootvar.core.montecarlo.exotic`'s default (64 a year, 256 for a
        continuously watched barrier).
    paths, seed, antithetic, control
        As in :func:`rootvar.core.montecarlo.exotic` (default 100,000 antithetic
        paths, control variate chosen by product).
    tolerance : float, optional
        Tolerance in price (currency units), > 0.  Default
        :data:`DEFAULT_TOLERANCE_SHARE` x spot (0.1% of the spot); for a
        digital :data:`DEFAULT_DIGITAL_TOLERANCE_SHARE` x cash (1% of what
        it pays).
    z : float
        Band width in Monte Carlo standard errors, > 0 (default 3).
    study : bool
        Run the step study (:func:`rootvar.core.step_study`, 100,000
        antithetic paths per cell, schemes euler_full, qe, exact_variance
        at 2 to 32 steps) on the vanilla with the same kind, strike and
        maturity, and price with its cheapest consistent cell (default
        False; the given ``scheme``/``steps`` win over it).
    pde_grid : (int, int, int)
        Finest PDE grid (barriers and Europeans).
    pde_tolerance : float, optional
        Largest accepted PDE error estimate, share of the spot.  Default
        :data:`PDE_SHARE` x tolerance / spot, so a converged PDE leaves
        three quarters of the tolerance for the Monte Carlo band.
    reference_paths : int, optional
        Paths of the reference run for arithmetic Asians (default
        :data:`REFERENCE_PATHS`, 50,000).
    mc_result : ExoticMCResult, optional
        Reuse a finished Monte Carlo run of ``product`` instead of simulating.

    Returns
    -------
    ExoticComparison

    Raises
    ------
    InputError
        Bad parameters, product, spot, rates, tolerance, z or settings.

    Notes
    -----
    **Scheme and step.**  By default the check prices with QE at
    :func:`~rootvar.core.montecarlo.exotic`'s default step, without a step study:
    the study prices 15 vanillas (about a second on two cores) and would
    double the check in a cell, and the structurer runs it once per model on
    the *Step study* sheet, whose recommendation goes into ``scheme`` and
    ``steps``.  ``study=True`` runs it here instead.  The vanilla's study
    measures the variance-discretisation bias of the terminal law; an exotic
    also depends on the path (monitoring, fixings), which is what this
    check then tests.

    **Second method and its error.**  With ``d = MC - second``,
    ``se_mc`` the Monte Carlo standard error, ``se_2`` the reference run's
    standard error (0 for the PDE and Fourier) and ``b`` the deterministic
    method's error estimate (0 for the reference run), the band is

    .. math:: d \\pm (z \\sqrt{se_{mc}^2 + se_2^2} + b).

    Random errors combine in quadrature.  A deterministic error estimate (the
    PDE's refinement estimate, the Fourier certification ``1e-10 x spot``)
    is the size of a systematic error, not a draw from a normal law: rerunning
    cannot average it down and ``z`` has no meaning for it, so it widens the
    band by its full size.  That is conservative: a PDE estimate of a quarter
    of the tolerance leaves three quarters for the noise.

    **Verdict.**  "consistent" when the band lies within
    ``[-tolerance, tolerance]``, "biased" when it lies wholly outside,
    "undecided" otherwise, with the paths at which a rerun decides in 90% of
    cases (:func:`rootvar.core.planning_paths` on the room the second
    method's error leaves; -1 when it leaves none, and the reason says the
    second method must be refined).  A second method that is not converged
    or not certified gives "undecided" with its reason: no verdict is built
    on an uncertified number.

    **Arithmetic Asians.**  The reference run uses exact variance sampling
    (Broadie & Kaya 2006) at the check's steps per year, at least
    :data:`REFERENCE_STEPS_PER_YEAR`, the European vanilla as control
    variate instead of the geometric Asian, and a seed derived independently
    from ``seed``.  Its variance has no discretisation bias, and it shares no
    variance scheme, random stream or control mean with the check, so it
    catches the check's variance-discretisation bias, a step too coarse for
    the check's scheme and a wrong geometric-Asian control mean.  It shares the path engine, the
    log-price step and the payoff code, so an error there would go unseen;
    its "error" is a standard error, not a bound.

    References
    ----------
    Broadie, M. & Kaya, O. (2006). Exact simulation of stochastic volatility
    and other affine jump diffusion processes. Operations Research 54(2).
    """
    as_params(params)
    if not isinstance(product, _PRODUCTS):
        names = ", ".join(p.__name__ for p in _PRODUCTS)
        raise InputError(f"product must be one of {names}, got {type(product).__name__}")
    spot = as_float("spot", spot, ">0")
    rate = as_float("rate", rate)
    div_yield = as_float("div_yield", div_yield)
    z = as_float("z", z, ">0")
    if z > MAX_Z:
        raise InputError(f"z must be <= {MAX_Z:g} standard errors, got {z!r}")
    if tolerance is not None:
        tol = as_float("tolerance", tolerance, ">0")
        scale = f"{tol / spot:.3%} of spot"
    elif isinstance(product, DigitalOption):
        tol = DEFAULT_DIGITAL_TOLERANCE_SHARE * product.cash
        scale = f"{DEFAULT_DIGITAL_TOLERANCE_SHARE:.0%} of the cash"
    else:
        tol = DEFAULT_TOLERANCE_SHARE * spot
        scale = f"{tol / spot:.3%} of spot"
    if scheme is not None:
        check_choice("scheme", scheme, tuple(SCHEMES))
    if steps is not None:
        steps = as_positive_int("steps", steps)
    paths = as_positive_int("paths", paths)
    if pde_tolerance is None:
        pde_tolerance = PDE_SHARE * tol / spot
    else:
        pde_tolerance = as_float("pde_tolerance", pde_tolerance, ">0")

    source = "given" if scheme is not None or steps is not None else "default"
    if mc_result is None:
        if study and (scheme is None or steps is None):
            choice = _study_choice(params, spot, product, rate, div_yield, seed)
            if choice is None:
                source = "default (the step study found no consistent scheme and step)"
            else:
                scheme = scheme or choice[0]
                steps = steps or choice[2]
                source = (
                    f"step study on the vanilla: {choice[0]} at {choice[1]} steps over "
                    f"{_matching_vanilla(product, spot).maturity:g} years"
                )
        mc = mc_exotic(
            params,
            spot,
            product,
            rate,
            div_yield,
            scheme=scheme or DEFAULT_EXOTIC_SCHEME,
            steps=steps,
            paths=paths,
            seed=seed,
            antithetic=antithetic,
            control=control,
        )
    else:
        if not isinstance(mc_result, ExoticMCResult):
            raise InputError(f"mc_result must be an ExoticMCResult, got {type(mc_result).__name__}")
        if mc_result.product != product or mc_result.market != (params, spot, rate, div_yield):
            raise InputError(
                "mc_result must be a run of the same product, params, spot, rate and "
                "div_yield as the check, got a run of other inputs"
            )
        mc = mc_result
        source = "given run"

    ref_paths = (
        REFERENCE_PATHS
        if reference_paths is None
        else as_positive_int("reference_paths", reference_paths)
    )
    second = second_price(
        params,
        spot,
        product,
        rate,
        div_yield,
        pde_tolerance=pde_tolerance,
        pde_grid=pde_grid,
        reference={
            # the run's total steps back to steps per year
            "steps": max(REFERENCE_STEPS_PER_YEAR, math.ceil(mc.steps / product.maturity)),
            "paths": ref_paths + ref_paths % 2,
            "seed": _reference_seed(mc.seed),
        },
    )
    return _compare(mc, second, tol, z, scale, source)


def _compare(mc, second, tol, z, scale, source) -> ExoticComparison:
    """The verdict of one Monte Carlo run against one second price."""
    se_mc = float(mc.std_error)
    d = float(mc.price) - second.price if second.usable else math.nan
    se_2 = second.error if second.error_kind == STANDARD_ERROR else 0.0
    bound = second.error if second.error_kind == BOUND else 0.0
    name = second.method
    if not second.usable:
        verdict, stat, half, settle = UNDECIDED, math.nan, math.nan, -1
        reason = f"no verdict: {second.detail}"
    else:
        verdict, stat, half = band_verdict(d, se_mc, se_2, bound, tol, z)
        err = (
            f" + {bound:.3g} ({name} error bound)"
            if bound > 0
            else (f" (with the {name}'s std error {se_2:.3g})" if se_2 > 0 else "")
        )
        band = f"MC - {name} = {d:+.6g} +- {z:g} x {stat:.3g}{err}"
        where = f"the tolerance {tol:.4g} ({scale})"
        settle = 0
        if verdict == CONSISTENT:
            reason = f"{band} lies within {where}"
        elif verdict == BIASED:
            reason = f"{band} lies wholly outside {where}"
        else:
            settle = deciding_paths(mc.paths, se_mc, se_2, bound, tol, z)
            if settle < 0:
                reason = (
                    f"{band} straddles {where}; the {name}'s own error leaves no room for "
                    f"the Monte Carlo band: refine the {name} (finer grid, more paths), "
                    "or widen the tolerance"
                )
            else:
                reason = (
                    f"{band} straddles {where}; at about {settle:,} paths a rerun decides "
                    f"in {PLANNING_SHARE:.0%} of cases, unless the bias sits near the "
                    "tolerance itself"
                )
    return ExoticComparison(
        mc=mc,
        second_method=second.method,
        second_price=float(second.price),
        second_error=float(second.error),
        second_error_kind=second.error_kind,
        second_status=second.status,
        diff=d,
        combined_error=stat,
        band=half,
        tolerance=tol,
        z=z,
        verdict=verdict,
        paths_to_settle=settle,
        reason=reason,
        scheme=mc.scheme,
        steps=int(mc.steps),
        scheme_source=source,
        second=second,
    )
