"""The trader's one-table view of a Heston variance: exact law and Euler risk per horizon."""

from __future__ import annotations

import numpy as np
import pandas as pd

from rootvar.core.params import HestonParams, as_params
from rootvar.core.validation import InputError, as_float_array
from rootvar.core.variance.cir_law import TINY_VARIANCE, cir_transition
from rootvar.core.variance.euler import (
    euler_negative_probability,
    euler_worst_case,
    feller_ratio,
    regime_label,
)

__all__ = ["DEFAULT_QUANTILES", "variance_report"]

#: Quantile levels shown by default: the left tail matters most here.
DEFAULT_QUANTILES = (0.001, 0.01, 0.05, 0.25, 0.5, 0.75, 0.95, 0.99)

#: Displayed instead of a quantile that underflows a double.
UNDERFLOW_TEXT = "below 1e-300"


def _level_name(q: float) -> str:
    return f"q{100 * q:g}%"


def variance_report(
    params: HestonParams,
    horizons,
    quantiles=DEFAULT_QUANTILES,
    dt: float = 1.0 / 252.0,
    near_zero: float = 1e-4,
) -> pd.DataFrame:
    """Exact-law quantiles, mass near zero and Euler risk of the variance, per horizon.

    Parameters
    ----------
    params : HestonParams
        Model parameters (only v0, kappa, theta and vol_of_vol are used).
    horizons : array_like
        Horizons in years, > 0.
    quantiles : sequence of float
        Probability levels in (0, 1) for the exact-law quantiles.
    dt : float
        Production Euler step in years, > 0 (default one trading day).
    near_zero : float
        Variance level counted as "near zero" (annualised), > 0.  The default
        1e-4 is a volatility of 1%.

    Returns
    -------
    pandas.DataFrame
        One row per horizon, indexed by ``horizon_years``, with columns
        ``mean``, ``std``, one ``q<level>%`` column per quantile, ``p_below_near_zero``,
        ``euler_neg_prob_at_v0`` (the one-step negative probability at step
        ``dt`` from today's variance), ``euler_worst_case`` and
        ``euler_worst_level`` (the largest one-step probability over every
        variance level and the level ``v*`` where it sits, see
        :func:`rootvar.core.euler_worst_case`) and ``p_at_or_below_worst_level``
        (the exact-law ``P(v_t <= v*)``: how often the process is at or below
        the riskiest level), plus ``feller_ratio``, ``regime`` and
        ``notes``.  A quantile that underflows a double is shown as 0.0 and
        ``notes`` says which ones are ``below 1e-300``.  ``DataFrame.attrs``
        carries the inputs, the Feller ratio and the regime.

    Notes
    -----
    Mean and standard deviation come from the exact transition law (scaled
    noncentral chi-square), as do the quantiles and ``P(v_t < near_zero)``.

    The table carries no Euler risk *at* the low quantiles: at a variance
    near zero the noise of an Euler step vanishes with the variance, so the
    risk there reads 0 even when most of the mass sits near zero.  The risk
    lives at intermediate levels; the worst case, its level and the mass up
    to that level say where and how often.
    """
    as_params(params)
    horizons = as_float_array("horizons", horizons, ">0").reshape(-1)
    if horizons.size == 0:
        raise InputError("horizons must hold at least one horizon, got an empty list")
    levels = as_float_array("quantiles", quantiles, "(0,1)").reshape(-1)
    if levels.size == 0:
        raise InputError("quantiles must hold at least one level, got an empty list")
    dt = float(as_float_array("dt", dt, ">0"))
    near_zero = float(as_float_array("near_zero", near_zero, ">0"))

    p = params
    law = cir_transition(p.v0, p.kappa, p.theta, p.vol_of_vol, horizons[:, None])
    table = np.asarray(law.ppf(levels[None, :]), dtype=float)
    ratio = feller_ratio(p.kappa, p.theta, p.vol_of_vol)

    cols: dict[str, object] = {"mean": np.ravel(law.mean()), "std": np.ravel(law.std())}
    for j, q in enumerate(levels):
        cols[_level_name(q)] = table[:, j]
    cols["p_below_near_zero"] = np.ravel(law.cdf(near_zero))
    cols["euler_neg_prob_at_v0"] = euler_negative_probability(
        p.v0, p.kappa, p.theta, p.vol_of_vol, dt
    )
    worst, level = euler_worst_case(p.kappa, p.theta, p.vol_of_vol, dt)
    cols["euler_worst_case"] = worst
    cols["euler_worst_level"] = level
    cols["p_at_or_below_worst_level"] = (
        np.ones(horizons.size) if np.isinf(level) else np.ravel(law.cdf(level))
    )
    cols["feller_ratio"] = ratio
    cols["regime"] = regime_label(ratio)
    notes = []
    for row in table:
        low = [_level_name(q) for q, x in zip(levels, row, strict=True) if x < 1e-300]
        notes.append(f"{', '.join(low)} {UNDERFLOW_TEXT}" if low else "")
    cols["notes"] = notes
    out = pd.DataFrame(cols, index=pd.Index(horizons, name="horizon_years"))
    out.attrs.update(
        params=p,
        dt=dt,
        near_zero=near_zero,
        feller_ratio=ratio,
        regime=regime_label(ratio),
        tiny_variance=TINY_VARIANCE,
    )
    return out
