"""Heston Greeks on the contour route: the price's integral and its derivatives, certified.

The Greeks of :func:`rootvar.core.heston_greeks` when the contour route
takes them (``method="auto"`` for a short strip, or ``"contour"``): on the
contour the price itself would use (:func:`rootvar.core.fourier.contour.contour_prices`,
``mode="strike"``), one compiled call
(:func:`rootvar.core.fourier.contour_greeks_kernels.contour_greeks`) sums, at
the same double-exponential nodes and levels, Lewis's integrand for the price
and eight weighted copies of it, and each Greek is certified by its own
error estimate against :func:`rootvar.core.fourier_greek_tolerances`.  This
module validates nothing (its caller has) and unpacks; an option with any
Greek not certified goes back to its caller, which prices it by the COS
series and says why.
"""

from __future__ import annotations

import numpy as np

from rootvar.core.fourier.contour import MAX_TILT, REASONS, TOLERANCE
from rootvar.core.fourier.contour_greeks_kernels import (
    OUTPUTS,
    ROW_ALPHA,
    ROW_ANGLE,
    ROW_ERROR,
    ROW_FAILED,
    ROW_LEVEL,
    ROW_NODES,
    ROW_STATUS,
    ROWS,
    contour_greeks,
)
from rootvar.core.fourier.contour_kernels import CERTIFIED, H0

__all__ = ["ESTIMATORS", "certified", "greek_table", "handover_reason", "route_note", "values_of"]

#: How each Greek is obtained on the contour route (``Greeks.estimators``).
ESTIMATORS = {
    "delta": "characteristic function (contour, log-strike derivative)",
    "gamma": "characteristic function (contour, second log-strike derivative)",
    "theta": "characteristic function (contour, Riccati derivative in maturity)",
    "vega": "characteristic function (contour, from d_v0 and d_theta)",
    "rho_rate": "characteristic function (contour, forward and discount)",
    "rho_div": "characteristic function (contour, forward)",
    **{
        name: "characteristic function (contour, parameter derivative)"
        for name in ("d_v0", "d_kappa", "d_theta", "d_vol_of_vol", "d_rho")
    },
}


def tolerance_row(spot, tol):
    """The kernel's tolerances: the price's (``TOLERANCE x spot``), then each Greek's of
    ``OUTPUTS`` from ``tol`` (Greek name -> tolerance in its unit), as a writeable array."""
    return np.array([TOLERANCE * spot] + [tol[name] for name in OUTPUTS[1:]])


def greek_table(params, spot, strike, maturity, rate, div_yield, put, tol):
    """The kernel's table for already validated arguments.

    Parameters
    ----------
    params : HestonParams
        Model parameters.
    spot : float
        Spot price, > 0.
    strike : ndarray
        Contiguous 1-d float64 array of strikes, > 0 (one maturity).
    maturity : float
        Years, > 0.
    rate, div_yield : float
        Continuously compounded rate and dividend yield, decimals per year.
    put : bool
        Puts (else calls).
    tol : ndarray or dict
        The tolerances of ``OUTPUTS`` in their units: 12 floats (the price's
        first), or a dict by Greek name (as
        :func:`rootvar.core.fourier_greek_tolerances` gives), the price then
        ``TOLERANCE x spot``.

    Returns
    -------
    ndarray, shape (ROWS, n + 1)
        Rows 0-11: the price (inside the no-arbitrage bounds, stated in the
        discounted spot and strike as :func:`rootvar.core.heston_price` states
        them) and the Greeks of ``OUTPUTS`` (NaN where the strike is not
        certified); from ``ROW_ERROR`` their error estimates, in
        their units; then status, alpha, angle, nodes, level and the bit mask
        of outputs past their tolerance.  The price is certified to
        ``TOLERANCE x spot``, as the contour route's prices are.

    Notes
    -----
    With ``F = S e^{(r-q)T}``, ``k = ln(K/F)``, ``psi`` the characteristic
    function of ``ln(S_T/F)`` and ``G(z) = e^{-izk} psi(z - i) / (-z (z - i))``,
    the call is ``C = S e^{-qT} (R_0 + J_0)``, ``J_w = (1/pi) Re int G w z' dv``
    on the contour and ``R_0`` the residues crossed (Lord & Kahl 2007, eq.
    3.6: 0, 1 or ``1 - e^k``; ``R_1 = dR_0/dk``).  ``S`` enters only through
    ``k`` and the factor ``S e^{-qT}``, so with ``J_1 = J_{-iz}``,
    ``J_2 = J_{(-iz)^2}``:

    * ``delta = e^{-qT} (R_0 - R_1 + J_0 - J_1)``,
      ``gamma = e^{-qT} (J_2 - J_1) / S`` (``R_0'' = R_0'``);
    * ``d_p = S e^{-qT} J_{d ln psi / dp}`` for ``v0, kappa, theta, vol_of_vol,
      rho``: the closed forms of
      :func:`rootvar.core.fourier.gradient.log_cf_gradient` (Albrecher et al.
      2007 form) at the complex argument ``z - i``; ``vega`` from
      :func:`rootvar.core.desk_vega`;
    * ``theta = -dC/dT = q C + S e^{-qT} ((r - q) (R_1 + J_1) - J_{d ln psi/dT})``,
      ``d ln psi / dT = kappa theta B + v0 B'`` from the Riccati equations
      (Heston 1993), ``B = d ln psi / d v0``;
    * ``rho_rate = -T S e^{-qT} (R_1 + J_1)``, ``rho_div = -T S delta`` (``r``
      and ``q`` move ``k`` and the discount only);
    * puts by put-call parity, differentiated.

    Each ``J`` is summed by the price's trapezoid (levels ``h = 1/2, 1/4,
    ...``) with the price's rules, its own estimate (level difference, the
    previous one unless they fell fourfold, tail, rounding) and its own end
    (every weighted integrand below a hundredth of its share of the tightest
    tolerance it enters).  A Greek's estimate is the same combination of
    those estimates in absolute value; the option is certified from
    ``h = 1/16`` on when the price is within ``TOLERANCE x spot`` and every
    Greek within its tolerance, up to ``h = 1/128``.

    References
    ----------
    Lewis, A. L. (2001). A simple option formula for general jump-diffusion
    and other exponential Lévy processes. Envision Financial Systems.
    Lord, R. & Kahl, C. (2007). Optimal Fourier inversion in semi-analytical
    option pricing. Journal of Computational Finance 10(4), 1-30.
    Andersen, L. B. G. & Lake, M. (2018). Robust high-precision option
    pricing by Fourier transforms: contour deformations and double-exponential
    quadrature. SSRN 3231626.
    Andersen, L. B. G. & Piterbarg, V. V. (2007). Moment explosions in
    stochastic volatility models. Finance and Stochastics 11(1), 29-50.
    Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
    Heston trap. Wilmott Magazine, January 2007, 83-92.
    Heston, S. L. (1993). A closed-form solution for options with stochastic
    volatility. Review of Financial Studies 6(2), 327-343.
    """
    p = params
    model = np.array([p.kappa, p.theta, p.vol_of_vol, p.rho, p.v0])
    market = np.array([spot, maturity, rate, div_yield, 1.0 if put else 0.0, MAX_TILT, 0.0])
    if isinstance(tol, dict):
        tol = tolerance_row(spot, tol)
    out = np.empty((ROWS, strike.size + 1))
    contour_greeks(model, market, strike, tol, out)
    return out


def certified(table):
    """Per strike, True where the price and every Greek are certified (a list)."""
    return [code == CERTIFIED for code in table[ROW_STATUS, :-1].tolist()]


def handover_reason(table, s):
    """Why strike ``s`` of ``table`` was not certified on the contour, in words."""
    why = REASONS[int(table[ROW_STATUS, s])]
    mask = int(table[ROW_FAILED, s])
    past = [name for g, name in enumerate(OUTPUTS) if mask >> g & 1]
    if past and int(table[ROW_LEVEL, s]) > 0:
        why += f" ({', '.join(past)} past {'its' if len(past) == 1 else 'their'} tolerance)"
    return why


def route_note(table, s):
    """The note naming the contour and the level strike ``s``'s Greeks come from.

    Kept as short as the COS route's note (a workbook sizes its rows for it):
    the damping ``alpha`` (the contour passes through ``-i alpha``), the angle
    of its far ends, the last trapezoid step and the evaluations.
    """
    level = int(table[ROW_LEVEL, s])
    return (
        f"contour: alpha {table[ROW_ALPHA, s]:.4g}, angle {table[ROW_ANGLE, s]:.3g} rad, "
        f"step 1/{round(1 / (H0 * 0.5**level))}, {int(table[ROW_NODES, s])} evaluations"
    )


def values_of(table, s):
    """``(price, values, errors, price_error)`` of strike ``s``: dicts by Greek name."""
    column = table[:, s].tolist()
    names = OUTPUTS[1:]
    values = dict(zip(names, column[1 : len(OUTPUTS)], strict=True))
    errors = dict(zip(names, column[ROW_ERROR + 1 : ROW_ERROR + len(OUTPUTS)], strict=True))
    return column[0], values, errors, column[ROW_ERROR]
