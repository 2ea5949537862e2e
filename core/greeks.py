"""Greeks, whichever method priced them: the names, their units and one result type.

The Fourier route (:mod:`rootvar.core.fourier.greeks`), the Monte Carlo engine
(:mod:`rootvar.core.montecarlo.greeks`) and the finite-difference solver
(:mod:`rootvar.core.pde.solver`) all return a :class:`Greeks`, so that
:func:`rootvar.core.checks.greeks.compare_greeks` can hold any two of them
side by side, Greek by Greek, in the Greek's own units.

The definitions and units of the Greeks are in :class:`Greeks`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from rootvar.core.brief_repr import BriefRepr

__all__ = ["GREEK_NAMES", "GREEK_UNITS", "Greeks", "desk_vega"]

#: Every Greek rootvar reports, in the order tables show them.
GREEK_NAMES = (
    "delta",
    "gamma",
    "theta",
    "vega",
    "rho_rate",
    "rho_div",
    "d_v0",
    "d_kappa",
    "d_theta",
    "d_vol_of_vol",
    "d_rho",
)

#: The unit each Greek is stated in (the price's currency is written "ccy").
GREEK_UNITS = {
    "delta": "ccy per unit spot",
    "gamma": "ccy per unit spot squared",
    "theta": "ccy per year",
    "vega": "ccy per unit volatility",
    "rho_rate": "ccy per unit rate",
    "rho_div": "ccy per unit dividend yield",
    "d_v0": "ccy per unit variance",
    "d_kappa": "ccy per unit kappa",
    "d_theta": "ccy per unit variance",
    "d_vol_of_vol": "ccy per unit vol_of_vol",
    "d_rho": "ccy per unit rho",
}


def desk_vega(v0: float, theta: float, d_v0: float, d_theta: float) -> float:
    """The desk's vega from the two variance sensitivities.

    Parameters
    ----------
    v0, theta : float
        Initial and long-run variance (annualised, > 0).
    d_v0, d_theta : float
        dV/dv0 and dV/dtheta (ccy per unit variance).

    Returns
    -------
    float
        ``2 sqrt(v0) d_v0 + 2 sqrt(theta) d_theta``: the price change per unit
        parallel shift of ``sqrt(v0)`` and ``sqrt(theta)`` (ccy per unit volatility).
    """
    return 2.0 * math.sqrt(v0) * d_v0 + 2.0 * math.sqrt(theta) * d_theta


@dataclass(frozen=True, repr=False)
class Greeks(BriefRepr):
    """An option's price and Greeks from one method.

    Attributes
    ----------
    price : float
        The option's price (ccy).
    values : dict
        Greek name (one of :data:`GREEK_NAMES`) -> value in its unit
        (:data:`GREEK_UNITS`).  A Greek the method does not give is absent.
    errors : dict
        Greek name -> the method's own error figure for it, in the Greek's unit:
        the standard error (Monte Carlo), or the certified error estimate
        (Fourier, finite differences).  NaN where the method could not state one.
    method : str
        ``"fourier"``, ``"monte_carlo"`` or ``"pde"``.
    estimators : dict
        Greek name -> how it was obtained (for example ``"pathwise"``,
        ``"likelihood ratio"``, ``"conditional (mixing)"``,
        ``"characteristic function"``, ``"grid"``).
    price_error : float
        The price's standard error or error estimate (ccy).
    notes : tuple of str
        Anything the reader must know: a Greek not certified and why, a hand-over.

    Notes
    -----
    The Greeks, for one option in the option's currency (ccy):

    ``delta``
        dV/dS0, per unit of spot.
    ``gamma``
        d2V/dS0^2, per unit of spot squared.
    ``theta``
        dV/dt = -dV/dT at fixed spot and variance, per year of calendar time
        (negative for a long vanilla with no rates, as common practice states it).
    ``rho_rate``, ``rho_div``
        dV/dr and dV/dq, per unit (1.00 = 100%) of the continuous rate and dividend yield.
    ``d_v0``, ``d_kappa``, ``d_theta``, ``d_vol_of_vol``, ``d_rho``
        dV/d(parameter), per unit of the parameter as :class:`rootvar.core.HestonParams`
        holds it (``v0`` and ``theta`` are annualised variances).
    ``vega``
        The desk's vega: dV/ds when ``sqrt(v0)`` and ``sqrt(theta)`` both move by
        ``ds`` (a parallel shift of the volatility level, instantaneous and long-run),
        per unit (1.00 = 100 vol points) of volatility:
        ``vega = 2 sqrt(v0) d_v0 + 2 sqrt(theta) d_theta``.  As vol_of_vol -> 0 with
        ``v0 = theta`` this is the Black-Scholes vega at ``sqrt(theta)``.
        Common practice, no source; the mapping is ours and stated here.
    """

    price: float
    values: dict
    errors: dict
    method: str
    estimators: dict
    price_error: float = math.nan
    notes: tuple = field(default=())

    def __getitem__(self, name: str) -> float:
        return self.values[name]
