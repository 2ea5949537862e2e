"""The hedge priced twice: Monte Carlo Greeks against Fourier (Europeans) or the grid (barriers).

One verdict per Greek, in the three states of the price check
(:func:`rootvar.core.checks.exotic.band_verdict`): the difference with its band
``z sqrt(se_mc^2 + se_ref^2) + bound`` lies inside the Greek's tolerance
("consistent"), outside it ("biased"), or straddles it ("undecided": more paths
would decide).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import pandas as pd

from rootvar.core.brief_repr import BriefRepr
from rootvar.core.checks.exotic import band_verdict, deciding_paths
from rootvar.core.checks.vanilla import BIASED, CONSISTENT, UNDECIDED
from rootvar.core.fourier.greeks import heston_greeks
from rootvar.core.greeks import GREEK_NAMES, GREEK_UNITS, Greeks
from rootvar.core.montecarlo.european import DEFAULT_SEED
from rootvar.core.montecarlo.greeks import DEFAULT_GREEKS_SCHEME, mc_greeks
from rootvar.core.params import as_params
from rootvar.core.pde.greeks import pde_greeks
from rootvar.core.products import BarrierOption, DigitalOption, EuropeanOption
from rootvar.core.validation import InputError, as_float

__all__ = ["GreeksComparison", "compare_greeks", "default_greek_tolerances"]

#: Share of spot each tolerance is stated in (common practice, no source): the desk
#: books a hedge to about half a delta point, and a price-like Greek to about 1% of
#: the spot per unit of its parameter.
DELTA_TOL = 0.005
GAMMA_TOL_SPOT = 0.05  # gamma tolerance 0.05 / spot: 5e-4 per unit spot^2 at spot 100
THETA_TOL_SPOT = 0.002  # per year
VEGA_TOL_SPOT = 0.005  # per unit volatility: 0.005 ccy per vol point at spot 100
OTHER_TOL_SPOT = 0.01
PRICE_TOL_SPOT = 0.001


def default_greek_tolerances(spot) -> dict:
    """The tolerance each Greek's verdict uses by default, in the Greek's own unit.

    Parameters
    ----------
    spot : float
        Spot price, > 0.

    Returns
    -------
    dict
        ``"price"`` and every name of :data:`rootvar.core.GREEK_NAMES` -> tolerance:
        price 0.1% of spot; delta 0.005; gamma ``0.05 / spot``; theta 0.2% of
        spot per year; vega 0.5% of spot per unit volatility; every other
        sensitivity 1% of spot per unit of its parameter.  Common practice, no
        source: a desk's sense of a hedge that matters, not a published figure.
    """
    s = as_float("spot", spot, ">0")
    out = dict.fromkeys(GREEK_NAMES, OTHER_TOL_SPOT * s)
    out.update(
        price=PRICE_TOL_SPOT * s,
        delta=DELTA_TOL,
        gamma=GAMMA_TOL_SPOT / s,
        theta=THETA_TOL_SPOT * s,
        vega=VEGA_TOL_SPOT * s,
    )
    return out


@dataclass(frozen=True, repr=False)
class GreeksComparison(BriefRepr):
    """Monte Carlo Greeks held against a second method, Greek by Greek.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per Greek both methods give (and the price first), indexed by
        name, with columns ``unit``, ``monte_carlo``, ``mc_std_error``,
        ``reference``, ``reference_error``, ``difference`` (Monte Carlo minus
        reference), ``band`` (half-width ``z sqrt(se_mc^2 + se_ref^2) + bound``),
        ``tolerance``, ``verdict``, ``paths_to_settle`` (for an "undecided" Greek,
        the paths at which a rerun decides in 90% of cases,
        :func:`rootvar.core.checks.exotic.deciding_paths`; 0 where decided, -1
        where the reference's own error leaves no room or a figure is missing)
        and ``mc_estimator``.
    verdict : str
        The worst row: "biased" before "undecided" before "consistent".
    reference_method : str
        ``"fourier"`` (Europeans) or ``"pde"`` (barriers and digitals).
    monte_carlo, reference : Greeks
        The two results compared.
    z : float
        Width of the statistical band in standard errors.
    notes : tuple of str
        Greeks one method gives and the other does not, and each method's notes.
    """

    table: pd.DataFrame
    verdict: str
    reference_method: str
    monte_carlo: Greeks
    reference: Greeks
    z: float
    notes: tuple


def compare_greeks(
    params,
    spot,
    product,
    rate=0.0,
    div_yield=0.0,
    *,
    scheme=DEFAULT_GREEKS_SCHEME,
    steps=None,
    paths=100_000,
    seed=DEFAULT_SEED,
    z=3.0,
    tolerances=None,
) -> GreeksComparison:
    """Monte Carlo Greeks against Fourier (Europeans) or finite differences (barriers, digitals).

    Parameters
    ----------
    params : HestonParams
    spot : float
        Spot price, > 0.
    product : EuropeanOption, BarrierOption or DigitalOption
    rate, div_yield : float
        Continuously compounded rate and dividend yield (decimals).
    scheme, steps, paths, seed
        The Monte Carlo run (:func:`rootvar.core.montecarlo.greeks.mc_greeks`).
    z : float
        Band width in standard errors, > 0 (default 3).
    tolerances : dict, optional
        Greek name -> tolerance in its unit, over :func:`default_greek_tolerances`.

    Returns
    -------
    GreeksComparison

    Notes
    -----
    For a Greek with Monte Carlo value ``m`` (standard error ``s_m``) and
    reference ``f`` (error figure ``e``), the band is
    ``m - f +- (z s_m + e)`` for a certified reference (Fourier: ``e`` its
    bound; the grid: ``e`` its refinement estimate), and the verdict is
    "consistent" when the whole band lies within ``+-tolerance``, "biased"
    when it lies wholly outside, "undecided" otherwise.  With ``z = 3`` a
    correct engine is called biased in about 0.27% of Greeks by chance.

    References
    ----------
    Glasserman, P. (2004). Monte Carlo Methods in Financial Engineering,
    Springer, ch. 7 (estimating sensitivities).
    Broadie, M. & Glasserman, P. (1996). Estimating security price derivatives
    using simulation. Management Science 42(2), 269-285.
    """
    as_params(params)
    spot = as_float("spot", spot, ">0")
    z = as_float("z", z, ">0")
    tol = default_greek_tolerances(spot)
    for name, value in dict(tolerances or {}).items():
        if name not in tol:
            raise InputError(f"tolerances has an unknown Greek, got {name!r}")
        tol[name] = as_float(f"tolerances[{name!r}]", value, ">0")
    if isinstance(product, EuropeanOption):
        reference = heston_greeks(
            params, spot, product.strike, product.maturity, rate, div_yield, product.kind
        )
    elif isinstance(product, BarrierOption | DigitalOption):
        reference = pde_greeks(params, spot, product, rate, div_yield)
    else:
        raise InputError(
            "product must be a EuropeanOption, BarrierOption or DigitalOption, "
            f"got {type(product).__name__}"
        )
    mc = mc_greeks(
        params, spot, product, rate, div_yield, scheme=scheme, steps=steps, paths=paths, seed=seed
    )
    rows, notes = {}, [*mc.notes, *reference.notes]
    pairs = [("price", mc.price, mc.price_error, reference.price, reference.price_error, "")]
    for name in GREEK_NAMES:
        in_mc, in_ref = name in mc.values, name in reference.values
        if in_mc and in_ref:
            pairs.append(
                (
                    name,
                    mc.values[name],
                    mc.errors.get(name, math.nan),
                    reference.values[name],
                    reference.errors.get(name, math.nan),
                    mc.estimators.get(name, ""),
                )
            )
        elif in_mc or in_ref:
            given = "Monte Carlo" if in_mc else reference.method
            notes.append(f"{name}: given by {given} only, not compared")
    for name, m, se, f, err, how in pairs:
        d = m - f
        settle = -1
        if not all(math.isfinite(x) for x in (m, se, f, err)):
            verdict, band = UNDECIDED, math.nan
            notes.append(f"{name}: a method gave no certified figure; undecided")
        else:
            verdict, _, band = band_verdict(d, se, 0.0, err, tol[name], z)
            # the reference's error does not shrink with the paths: -1 when it alone fills
            # the tolerance, so only the second method can decide
            if verdict == UNDECIDED:
                settle = deciding_paths(paths, se, 0.0, err, tol[name], z)
            else:
                settle = 0
        rows[name] = {
            "unit": "ccy" if name == "price" else GREEK_UNITS[name],
            "monte_carlo": m,
            "mc_std_error": se,
            "reference": f,
            "reference_error": err,
            "difference": d,
            "band": band,
            "tolerance": tol[name],
            "verdict": verdict,
            "paths_to_settle": int(settle),
            "mc_estimator": how,
        }
    table = pd.DataFrame.from_dict(rows, orient="index")
    table.index.name = "greek"
    states = set(table["verdict"])
    overall = BIASED if BIASED in states else UNDECIDED if UNDECIDED in states else CONSISTENT
    return GreeksComparison(
        table=table,
        verdict=overall,
        reference_method=reference.method,
        monte_carlo=mc,
        reference=reference,
        z=z,
        notes=tuple(notes),
    )
