"""Greeks from the finite-difference grid: delta, gamma, theta and the variance sensitivity.

The solver (:func:`rootvar.core.pde.solver.pde_price`) already solves the finest
grid and its two halves; each level's solution gives the Greeks at
``(S0, v0)`` from its cubic spline, and the three levels give every Greek the
same Richardson extrapolation and error estimate as the price.
"""

from __future__ import annotations

import math

from rootvar.core.greeks import Greeks
from rootvar.core.pde.solver import KNOCKED, pde_price, refinement_estimate

__all__ = ["PDE_GREEKS", "pde_greeks"]

#: The Greeks the grid gives, and how.
PDE_GREEKS = {
    "delta": "grid: first spot derivative of the solution's cubic spline at (S0, v0)",
    "gamma": "grid: second spot derivative of the solution's cubic spline at (S0, v0)",
    "theta": "grid: minus the Heston operator applied to the solution at (S0, v0)",
    "d_v0": "grid: variance derivative of the solution's cubic spline at (S0, v0)",
}


def pde_greeks(params, spot, product, rate=0.0, div_yield=0.0, **solver_options) -> Greeks:
    """Price and grid Greeks of a European, barrier or digital option by finite differences.

    Parameters
    ----------
    params : HestonParams
    spot : float
        Spot price, > 0.
    product : EuropeanOption, BarrierOption or DigitalOption
    rate, div_yield : float
        Continuously compounded rate and dividend yield (decimals).
    **solver_options
        Passed to :func:`rootvar.core.pde_price` (``grid``, ``scheme``,
        ``damping``, ``tolerance``); ``refine`` is always on, since the error
        figures come from the refinement levels.

    Returns
    -------
    Greeks
        ``method="pde"``; ``values`` hold ``delta`` (per unit spot), ``gamma``
        (per unit spot squared), ``theta`` (dV/dt, ccy per year) and ``d_v0``
        (ccy per unit variance); ``errors`` the refinement error estimate of
        each, formed from the finest grid and its two halves exactly as the
        price's.  A Greek whose estimate exceeds the solver's tolerance scaled to
        its unit (``tolerance x spot`` for the price, divided by the spot for
        delta, by the spot squared for gamma, by ``v0 + theta`` for ``d_v0``,
        times one year for theta) is kept, and a note names it; when the price
        itself is "not converged" every Greek is NaN and the note says why.

    Notes
    -----
    Theta is not differenced in time: the solution satisfies
    ``u_tau = L u`` (the Heston operator of :func:`rootvar.core.pde_price`),
    so ``dV/dt = -u_tau = -(L u)`` at ``(S0, v0)`` from the spline's
    derivatives ``u_s, u_ss, u_v, u_sv, u_vv``.  A knock-in is the vanilla
    minus a knock-out: the vanilla part is Fourier with bumped Greeks and has
    no theta here, so a knock-in's theta is NaN.

    References
    ----------
    in 't Hout, K. J. & Foulon, S. (2010). ADI finite difference schemes for
    option pricing in the Heston model with correlation. Int. J. Numer. Anal.
    Model. 7(2), 303-320.
    Richardson, L. F. (1911). The approximate arithmetical solution by finite
    differences of physical problems. Phil. Trans. R. Soc. A 210, 307-357.
    """
    solver_options.pop("refine", None)
    result = pde_price(params, spot, product, rate, div_yield, refine=True, **solver_options)
    spot = float(spot)
    notes = [result.note] if result.note else []
    if result.status == KNOCKED:
        values = {
            "delta": result.delta,
            "gamma": result.gamma,
            "d_v0": result.variance_sensitivity,
        }
        errors = dict.fromkeys(values, 0.0 if product.knock == "out" else math.nan)
        return Greeks(
            price=result.price,
            values=values,
            errors=errors,
            method="pde",
            estimators={k: PDE_GREEKS[k] for k in values},
            price_error=result.error_estimate,
            notes=tuple(notes),
        )
    scale = {
        "delta": spot,
        "gamma": spot * spot,
        "theta": 1.0,
        "d_v0": params.v0 + params.theta,
    }
    values, errors = {}, {}
    for name in PDE_GREEKS:
        levels = [g[name] for g in result.level_greeks]
        if not all(math.isfinite(x) for x in levels):
            values[name], errors[name] = math.nan, math.nan
            continue
        value, error, _, _ = refinement_estimate(levels, spot)
        values[name], errors[name] = float(value), float(error)
        unit_tol = result.tolerance / scale[name]
        if result.converged and error > unit_tol:
            notes.append(
                f"{name}'s error estimate {error:.3g} exceeds the tolerance {unit_tol:.3g} "
                "in its unit: refine the grid before relying on it"
            )
    if not result.converged:
        notes.append(f"price {result.status}: Greeks not given")
        values = dict.fromkeys(values, math.nan)
    return Greeks(
        price=result.price if result.converged else math.nan,
        values=values,
        errors=errors,
        method="pde",
        estimators=dict(PDE_GREEKS),
        price_error=result.error_estimate,
        notes=tuple(notes),
    )
