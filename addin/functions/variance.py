"""Cells on the variance: the Feller ratio, one Euler step's risk and the exact law.

ROOTVAR_FELLER, ROOTVAR_EULER_NEG_PROB and ROOTVAR_EULER_SAFE_STEP wrap
``rootvar.core.variance.euler``; ROOTVAR_VARIANCE_QUANTILE, ROOTVAR_VARIANCE_CDF
and ROOTVAR_VARIANCE_TABLE the exact law of ``rootvar.core.variance.cir_law``
and its report, on horizons checked up front to be affordable.  The Euler
worst case over every variance level (ROOTVAR_EULER_WORST_CASE and
ROOTVAR_EULER_WORST_LEVEL) follows the step study in :mod:`.monte_carlo`,
where the registry has always listed it.
"""

from __future__ import annotations

import math

import numpy as np

from rootvar.addin.cells import CellError, to_number, to_numbers, to_params, within
from rootvar.addin.functions.arguments import MAX_YEARS, PARAMS_DOC
from rootvar.addin.functions.registry import sheet_function
from rootvar.addin.functions.results import frame_rows, step_words
from rootvar.core import (
    cir_transition,
    cir_transition_shapes,
    euler_max_step,
    euler_negative_probability,
    feller_ratio,
    variance_report,
)

__all__ = [
    "MAX_NONCENTRALITY",
    "ROOTVAR_EULER_NEG_PROB",
    "ROOTVAR_EULER_SAFE_STEP",
    "ROOTVAR_FELLER",
    "ROOTVAR_VARIANCE_CDF",
    "ROOTVAR_VARIANCE_QUANTILE",
    "ROOTVAR_VARIANCE_TABLE",
]

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
    rows = frame_rows(table.drop(columns=["feller_ratio", "regime"]), index_name="horizon_years")
    return _step_headers(rows, step)
