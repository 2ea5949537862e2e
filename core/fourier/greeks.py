"""Heston Greeks from the characteristic function, certified like the price.

Two routes, chosen as the price's ``method="auto"`` chooses:

* the contour route (:mod:`rootvar.core.fourier.contour_greeks`), for a
  maturity with at most ``CONTOUR_STRIKES`` strikes: Lewis's (2001) integral
  on the price's own turned contour, with the integrand multiplied by the
  derivatives of its log-strike factor and of the characteristic function;
  each Greek certified by its own level-difference estimate, an option with
  any Greek it cannot certify handed over to the COS series (its notes say
  why);
* the COS series, below.

Every Greek of a European call or put (:data:`rootvar.core.greeks.GREEK_NAMES`)
is read from the COS series of the certified pricer (Fang & Oosterlee 2008)
with the characteristic function, or the payoff coefficients, replaced by
their derivatives: nothing is bumped.  Each Greek is computed on the pricer's
certified truncation range and on its double, and the change between the two
plus a bound on the terms left out is its error estimate; a Greek whose
estimate exceeds its tolerance (:func:`fourier_greek_tolerances`) is NaN, with
a note naming it and the reason.  The compiled sums are in
:mod:`rootvar.core.fourier.greeks_kernels`.

References
----------
Fang, F. & Oosterlee, C. W. (2008). A novel pricing method for European
options based on Fourier-cosine series expansions. SIAM J. Sci. Comput. 31(2),
826-848.
Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
Heston trap. Wilmott Magazine, January 2007, 83-92.
Heston, S. L. (1993). A closed-form solution for options with stochastic
volatility. Review of Financial Studies 6(2), 327-343.
Lewis, A. L. (2001). A simple option formula for general jump-diffusion and
other exponential Lévy processes. Envision Financial Systems.
Andersen, L. B. G. & Lake, M. (2018). Robust high-precision option pricing by
Fourier transforms: contour deformations and double-exponential quadrature.
SSRN 3231626.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from types import MappingProxyType

import numpy as np

from rootvar.core.fourier.contour_greeks import ESTIMATORS as CONTOUR_ESTIMATORS
from rootvar.core.fourier.contour_greeks import (
    certified,
    greek_table,
    handover_reason,
    route_note,
    tolerance_row,
    values_of,
)
from rootvar.core.fourier.contour_greeks_kernels import contour_greeks
from rootvar.core.fourier.cos import CONTOUR_STRIKES, heston_price
from rootvar.core.fourier.greeks_kernels import (
    SUMS,
    greek_coefficients,
    greek_payoff_sums,
    greek_tails,
)
from rootvar.core.fourier.series import (
    CUTOFF_GRID,
    MAX_TERMS,
    SERIES,
    certified_puts,
    cf_cutoffs,
    law_facts,
)
from rootvar.core.greeks import GREEK_NAMES, Greeks, desk_vega
from rootvar.core.params import HestonParams, as_params
from rootvar.core.runtime import notice_if_cold
from rootvar.core.validation import InputError, as_float, as_float_array, check_choice

__all__ = [
    "GREEK_TOL",
    "clear_cache",
    "fourier_greek_tolerances",
    "heston_greeks",
    "heston_greeks_strip",
]

_KINDS = ("call", "put")
_METHODS = ("auto", "contour", "cos")

#: Tolerance of every Fourier Greek, relative to its natural scale: ``GREEK_TOL x spot``
#: for the price-like Greeks (currency per unit of the parameter, rate or year),
#: ``GREEK_TOL`` for delta (currency per unit spot), ``GREEK_TOL / spot`` for gamma.
GREEK_TOL = 1e-8

#: Share of each tolerance the terms past the last one may take; the rest is
#: left to the change between the certified range and its double.
TAIL_SHARE = 0.1

#: Multiples of the certified range tried, in order, while some Greek's change between
#: a range and its double exceeds its tolerance (the price's range certifies the price,
#: and a derivative can need more room in a fat tail).
RANGE_SCALES = (1, 2, 4)

_PARAMS = ("d_v0", "d_kappa", "d_theta", "d_vol_of_vol", "d_rho")

_ESTIMATORS = {
    "delta": "characteristic function (COS, payoff derivative in spot)",
    "gamma": "characteristic function (COS density at the strike)",
    "theta": "characteristic function (COS, Riccati derivative in maturity)",
    "vega": "characteristic function (COS, from d_v0 and d_theta)",
    "rho_rate": "characteristic function (COS, drift and discount)",
    "rho_div": "characteristic function (COS, drift)",
    **{name: "characteristic function (COS, parameter derivative)" for name in _PARAMS},
}


def fourier_greek_tolerances(spot) -> dict:
    """The tolerance each Fourier Greek is certified to, in the Greek's own unit.

    Parameters
    ----------
    spot : float
        Spot price, > 0.

    Returns
    -------
    dict
        Greek name -> tolerance: ``GREEK_TOL`` (delta), ``GREEK_TOL / spot``
        (gamma), ``GREEK_TOL x spot`` (every other Greek, and ``"price"``).
        A Greek's price change per unit move of spot, spot squared, or its
        parameter is then held to ``GREEK_TOL x spot``, a hundred times the
        price's own certification (``1e-10 x spot``).
    """
    return _tolerances(as_float("spot", spot, ">0"))


def _tolerances(spot):
    out = dict.fromkeys(("price", *GREEK_NAMES), GREEK_TOL * spot)
    out["delta"] = GREEK_TOL
    out["gamma"] = GREEK_TOL / spot
    return out


def _validated(params, spot, rate, div_yield, kind, maturity, method):
    as_params(params)
    check_choice("kind", kind, _KINDS)
    check_choice("method", method, _METHODS)
    return (
        as_float("spot", spot, ">0"),
        as_float("maturity", maturity, ">0"),
        as_float("rate", rate),
        as_float("div_yield", div_yield),
    )


def heston_greeks(
    params, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call", method="auto"
) -> Greeks:
    """Price and Greeks of a European call or put under Heston, certified.

    Parameters
    ----------
    params : HestonParams
        Model parameters (``v0`` and ``theta`` annualised variances).
    spot : float
        Spot price, > 0.
    strike : float
        Strike, > 0.
    maturity : float
        Time to expiry in years, > 0.
    rate, div_yield : float
        Continuously compounded rate and dividend yield (decimals).
    kind : {"call", "put"}
    method : {"auto", "contour", "cos"}
        ``"auto"`` (default): the contour route (a maturity with at most
        ``CONTOUR_STRIKES`` strikes, as :func:`rootvar.core.heston_price`
        chooses), an option it cannot certify handed over to COS;
        ``"contour"``: the contour route for any number of strikes, with the
        same hand-over; ``"cos"``: the COS series.

    Returns
    -------
    Greeks
        ``method="fourier"``.  On the contour route ``price`` is the contour's
        (certified to 1e-10 x spot by its own estimate, ``price_error``),
        ``estimators`` say ``"contour"`` and the first note
        (``"contour: ..."``) names the contour and the level; an option
        handed over to COS has COS's Greeks and a last note ``"handed over to
        COS by the contour route: <reason>"`` naming the Greeks past their
        tolerance.  On COS ``price`` is
        ``heston_price(..., method="cos")``'s (certified to 1e-10 x spot, as
        the default route is); ``price_error`` its estimate on this grid;
        ``values`` holds every name of :data:`rootvar.core.GREEK_NAMES` in its
        unit (:data:`rootvar.core.GREEK_UNITS`; definitions in
        :mod:`rootvar.core.greeks`), NaN where it could not be certified;
        ``errors`` the error estimate of each; ``notes`` names any Greek left
        NaN and why.

    Raises
    ------
    InputError
        On bad input, naming the argument, the rule and the value.

    Notes
    -----
    Contour route: see :func:`rootvar.core.fourier.contour_greeks.greek_table`
    (the Greeks as combinations of nine integrals on the price's contour, and
    how each is certified).

    COS route: the put on the range ``[a, b]`` with ``N`` terms, ``w_k = k pi / (b - a)``,
    ``x = ln(S_0 / K)`` and the kink ``c = -x`` (clipped to the range) is

    .. math:: P = e^{-rT} \\sum_{k<N}{}' \\mathrm{Re}\\big[\\varphi(w_k) e^{-i w_k a}\\big] V_k,
              \\quad V_k = \\tfrac{2}{b-a} K (\\psi_k - e^x \\chi_k)

    (Fang & Oosterlee 2008, eqs. 22-23).  On that fixed grid:

    * ``d_v0 .. d_rho``: ``phi`` replaced by ``phi d ln phi / dp``, the
      derivatives of the Albrecher et al. (2007) form (see
      :func:`rootvar.core.fourier.gradient.log_cf_gradient`).
    * ``theta = -dV/dT``: ``ln phi = i u mu T + A + B v0`` (Heston 1993) solves
      ``A' = kappa theta B``, ``B' = sigma^2 B^2 / 2 - (kappa - rho sigma i u) B
      - (u^2 + i u) / 2``, with ``B = d ln phi / d v0``; so
      ``d ln phi / dT = i u mu + kappa theta B + v0 B'`` and
      ``theta = r P - e^{-rT} sum' Re[phi (d ln phi / dT) e^{-i w a}] V_k``.
    * ``delta``: ``dV_k / dx = -(2/(b-a)) K e^x chi_k`` (the payoff vanishes at
      its kink), so ``delta = -e^{-rT} (2/(b-a)) sum' Re[phi e^{-i w a}] chi_k``.
    * ``gamma = e^{-rT} K f(-x) / S_0^2``, ``f`` the COS density of
      ``ln(S_T / S_0)``: ``d^2 V / dx^2 - dV / dx = e^{-rT} K f(-x)``.
    * ``rho_rate``, ``rho_div``: ``ln(S_T / S_0)`` is ``mu T`` plus a law free of
      ``mu = r - q``, so ``dV / d mu = e^{-rT} T S_0 dP_u / dS_0`` exactly
      (``d ln phi / d mu = i u T``); with the discount,
      ``rho_div = -T S_0 delta`` and ``rho_rate = -T P + T S_0 delta`` (puts).
    * ``vega``: :func:`rootvar.core.desk_vega` from ``d_v0`` and ``d_theta``.
    * Calls by put-call parity ``C = P + S_0 e^{-qT} - K e^{-rT}``: delta
      ``+ e^{-qT}``, theta ``+ q S_0 e^{-qT} - r K e^{-rT}``, rho_rate
      ``+ T K e^{-rT}``, rho_div ``- T S_0 e^{-qT}``, the rest unchanged.

    The grid is the certified COS pricer's: the range ``[a, b]`` that
    :func:`rootvar.core.fourier.series.certified_puts` accepts for the strip
    (the range of ``heston_price(..., method="cos")``) and its double.  Its
    dependence on the parameters and the maturity is left out on purpose: it
    moves the price by the truncation error only, and what is certified is the
    Greek itself, as follows.

    * Range: every sum is taken on the range and on its double in one pass
      (the double's even frequencies are the range's); the change ``D``
      between the two is the range's share of the estimate, and the value is
      the double's.  Where some Greek's ``D`` exceeds its tolerance (a
      derivative can need more room in a fat tail than the price), the pair is
      moved out to twice and four times the range (``RANGE_SCALES``), within
      ``MAX_TERMS``, and each Greek keeps the pair with its smallest estimate.
    * Terms: the terms past the top frequency ``U`` are bounded by the
      envelope of each sum (``|V_k| <= 4 K / ((b - a) w^2)``,
      ``|chi_k| <= e^c (2 + w) / (1 + w^2)``, ``|cos| <= 1``, against ``|phi|`` and
      ``|phi d ln phi / dp|``) integrated past ``U`` on the pricer's cutoff grid,
      as the price's own cutoff is; ``U`` is raised above the price's until
      those bounds are within ``TAIL_SHARE`` of each tolerance.
    * A strike whose kink lies beyond the doubled range, which neither range
      sees, adds the tail masses past the range (the doubled range's cdf at
      its ends): to delta's estimate ``K / S_0`` times the mass on the kink's
      side (``E[e^R 1{R<c}]`` at most ``e^c`` times the mass), plus
      ``e^{a_2}`` times the mass below for a kink on the right (``a_2`` the
      doubled range's lower end); to gamma's, that mass over the kink's
      distance from the range (a density rising towards the body bounds
      ``f(c)`` so); the rhos follow delta's.

    The estimate is the sum of these; past :func:`fourier_greek_tolerances`
    the Greek is NaN with a note.  ``errors`` holds the estimates of the
    values given (and of those withheld).

    References
    ----------
    Fang, F. & Oosterlee, C. W. (2008). A novel pricing method for European
    options based on Fourier-cosine series expansions. SIAM J. Sci. Comput.
    31(2), 826-848.
    Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
    Heston trap. Wilmott Magazine, January 2007, 83-92.
    Heston, S. L. (1993). A closed-form solution for options with stochastic
    volatility. Review of Financial Studies 6(2), 327-343 (the Riccati form).
    Cui, Y., del Baño Rollin, S. & Germano, G. (2017). Full and fast
    calibration of the Heston stochastic volatility model. European Journal
    of Operational Research 263(2), 625-638 (the parameter derivatives).
    Lewis, A. L. (2001). A simple option formula for general jump-diffusion
    and other exponential Lévy processes. Envision Financial Systems.
    Lord, R. & Kahl, C. (2007). Optimal Fourier inversion in semi-analytical
    option pricing. Journal of Computational Finance 10(4), 1-30.
    Andersen, L. B. G. & Lake, M. (2018). Robust high-precision option
    pricing by Fourier transforms: contour deformations and double-exponential
    quadrature. SSRN 3231626.

    Examples
    --------
    >>> from rootvar.core import HestonParams
    >>> g = heston_greeks(HestonParams(0.04, 1.5, 0.04, 0.5, -0.7), 100.0, 100.0, 1.0)
    >>> round(g.price, 4), round(g["delta"], 4), g.method
    (7.0243, 0.6393, 'fourier')
    """
    plain = _plain_numbers(params, spot, strike, maturity, rate, div_yield, kind, method)
    if plain is None:  # the general checks, which name what is wrong
        spot, maturity, rate, div_yield = _validated(
            params, spot, rate, div_yield, kind, maturity, method
        )
        strike = as_float("strike", strike, ">0")
    else:
        spot, strike, maturity, rate, div_yield = plain
    return _strip(params, spot, np.array([strike]), maturity, rate, div_yield, kind, method)[0]


#: Argument types :func:`heston_greeks` takes as they are (anything else goes
#: through the general validation).
_PLAIN = (float, int, np.float64)


def _plain_numbers(params, spot, strike, maturity, rate, div_yield, kind, method):
    """The numeric arguments as floats when they are plain valid numbers, else None.

    The general checks cost twice the contour route's Greeks of one option; a
    spreadsheet column of them passes plain numbers.  Anything else (a bool, a
    string, an array, a number breaking its rule) goes to them.
    """
    values = (spot, strike, maturity, rate, div_yield)
    for x in values:
        if type(x) not in _PLAIN:
            return None
    spot, strike, maturity, rate, div_yield = (float(x) for x in values)
    if not (
        math.isfinite(spot + strike + maturity + rate + div_yield)
        and spot > 0.0
        and strike > 0.0
        and maturity > 0.0
        and type(params) is HestonParams
        and type(kind) is str
        and kind in _KINDS
        and type(method) is str
        and method in _METHODS
    ):
        return None
    return spot, strike, maturity, rate, div_yield


def heston_greeks_strip(
    params, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call", method="auto"
) -> tuple:
    """:func:`heston_greeks` for a strip of strikes at one maturity, in one pass.

    Parameters
    ----------
    params, spot, maturity, rate, div_yield, kind, method
        As in :func:`heston_greeks`.
    strike : array_like
        Strikes, > 0 (one-dimensional, or a single number).

    Returns
    -------
    tuple of Greeks
        One per strike, in order.  On the contour route each strike has its
        own contour (the strip's moment strip is found once), and the
        strikes it hands over share one COS series.  On COS the strip shares
        one truncation range (the certified pricer's for the strip) and one
        term count; each strike's Greeks are certified on their own.  Where
        the pricer cannot certify a COS range for the strip (it then prices
        the whole maturity by another route), no strike has COS Greeks.

    References
    ----------
    See :func:`heston_greeks`.
    """
    spot, maturity, rate, div_yield = _validated(
        params, spot, rate, div_yield, kind, maturity, method
    )
    strike = as_float_array("strike", strike, ">0")
    if strike.ndim > 1:
        raise InputError(f"strike must be a number or a 1-d array, got shape {strike.shape}")
    return _strip(params, spot, np.atleast_1d(strike), maturity, rate, div_yield, kind, method)


def _strip(params, spot, strike, t, rate, q, kind, method):
    """The Greeks of every strike of one maturity (inputs already checked), by the
    route ``method`` asks for (``"auto"``: the contour for at most ``CONTOUR_STRIKES``)."""
    if method == "cos" or (method == "auto" and strike.size > CONTOUR_STRIKES):
        return _cos_strip(params, spot, strike, t, rate, q, kind)
    return _contour_strip(params, spot, strike, t, rate, q, kind)


def _contour_strip(params, spot, strike, t, rate, q, kind):
    """The contour route's Greeks of every strike; a strike any of whose Greeks it
    cannot certify is handed over to the COS series, with a note saying why."""
    global _CONTOUR_NOTICED
    if not _CONTOUR_NOTICED:
        notice_if_cold(contour_greeks)
        _CONTOUR_NOTICED = True
    strike = np.ascontiguousarray(strike, dtype=np.float64)
    if not strike.flags.writeable:  # one compiled signature: writeable arrays only
        strike = strike.copy()
    tol, grid = _contour_tolerances(spot, GREEK_TOL)
    table = greek_table(params, spot, strike, t, rate, q, kind == "put", tol)
    out, rest = [], []
    for s, good in enumerate(certified(table)):
        if good:
            price, values, errors, price_error = values_of(table, s)
            g = Greeks(
                price=price,
                values=values,
                errors=errors,
                method="fourier",
                estimators=dict(CONTOUR_ESTIMATORS),
                price_error=price_error,
                notes=(route_note(table, s), grid),
            )
        else:
            g = None
            rest.append(s)
        out.append(g)
    if rest:
        by_cos = _cos_strip(params, spot, strike[rest], t, rate, q, kind)
        for s, g in zip(rest, by_cos, strict=True):
            why = f"handed over to COS by the contour route: {handover_reason(table, s)}"
            out[s] = dataclasses.replace(g, notes=(*g.notes, why))
    return tuple(out)


#: True once this process has looked whether the contour Greeks' kernel needs compiling.
_CONTOUR_NOTICED = False


@functools.lru_cache(maxsize=64)
def _contour_tolerances(spot, greek_tol):
    """The contour kernel's tolerances (the price's, then each Greek's; ``greek_tol`` is
    ``GREEK_TOL``, read by the caller so that a changed constant is seen) and the note
    stating them.  Remembered: a column of cells has one spot."""
    # kept writeable, and never written: a read-only array is another compiled signature
    return tolerance_row(spot, _tolerances(spot)), _tolerance_note(greek_tol)


def _tolerance_note(greek_tol) -> str:
    """The tolerances every Fourier Greeks result states, for either route."""
    return (
        f"tolerances: {greek_tol:g} x spot (price-like), {greek_tol:g} (delta), "
        f"{greek_tol:g} / spot (gamma)"
    )


def _cos_strip(params, spot, strike, t, rate, q, kind):
    """The COS series' Greeks of every strike of one maturity (inputs already checked)."""
    notice_if_cold(greek_coefficients, greek_payoff_sums, greek_tails)
    drift = rate - q
    disc, div_disc = math.exp(-rate * t), math.exp(-q * t)
    tol = _tolerances(spot)
    # the certified COS puts of heston_price(..., method="cos"), from the series itself
    c1, sd, _ = law_facts(params, (t,), drift)
    c1, sd = float(c1[0]), float(sd[0])
    u_cut = float(cf_cutoffs(params, np.array([t]), drift, float(strike.max()), spot)[0])
    puts, count, (left, right) = certified_puts(params, spot, strike, t, drift, c1, sd, u_cut)
    if puts is None:
        note = (
            "no Greek certified: the COS range could not be certified at this maturity "
            "(the price is heston_price's other route)"
        )
        price = np.atleast_1d(heston_price(params, spot, strike, t, rate, q, kind))
        return tuple(_uncertified(float(p), note) for p in price)
    spot_df, strike_df = spot * div_disc, strike * disc
    # inside the no-arbitrage bounds, as heston_price states its prices
    put_price = np.clip(disc * puts, np.maximum(strike_df - spot_df, 0.0), strike_df)
    if kind == "call":
        gap = spot_df - strike_df
        price = np.clip(put_price + gap, np.maximum(gap, 0.0), spot_df)
    else:
        price = put_price

    lower, upper = c1 - left * sd, c1 + right * sd
    step = np.pi / (upper - lower)  # the certified range's spacing
    model = (params.v0, params.kappa, params.theta, params.vol_of_vol, params.rho)
    terms, tails, short = _terms_and_tails(
        model, t, drift, spot, float(strike.max()), disc, float(step), count // 2
    )
    model = np.array(model)
    tail_errors = _greek_tails(tails, params, spot, t, rate)
    x = np.log(spot / strike)

    def level(scale):
        """The put's Greeks on ``scale`` times the certified range and on its double:
        the double's values and the error estimates (their change, the bounds on
        the terms left out, the mass bounds for kinks beyond the double), per strike.
        """
        lower = c1 - scale * left * sd * np.array([1.0, 2.0])
        upper = c1 + scale * right * sd * np.array([1.0, 2.0])
        n = scale * terms
        far = (-x < lower[1]) | (-x > upper[1])
        cdf_points = np.array([lower[0], upper[0]]) if far.any() else np.empty(0)
        half = 0.5 * np.pi / (upper[0] - lower[0])
        key = ("greeks", params, t, drift, float(lower[0]), float(lower[1]), float(half), n)
        coef = SERIES.get(key, greek_coefficients, half, 2 * n, t, model, drift, lower)
        sums, cdf = greek_payoff_sums(*coef, lower, upper, x, strike, cdf_points)
        base, wide = (_put_greeks(sums[g], params, spot, strike, t, rate, disc) for g in (0, 1))
        errors = {name: np.abs(wide[name] - base[name]) + tail_errors[name] for name in wide}
        for s in np.flatnonzero(far):
            bounds = (-x[s], lower[0], upper[0], lower[1])
            _add_mass_bounds(errors, s, cdf, *bounds, spot, strike[s], t, disc)
        errors["price"] += np.abs(wide["price"] - put_price)  # the grid against the pricer
        return {
            "values": wide,
            "errors": errors,
            "scale": {name: np.full(strike.size, scale) for name in wide},
        }

    limits = {name: tol[name] for name in GREEK_NAMES}
    best = None
    for scale in RANGE_SCALES:
        if scale > 1 and 2 * scale * terms > MAX_TERMS:
            break
        best = level(scale) if best is None else _better(best, level(scale))
        if all(
            np.all(best["errors"][name] <= limits[name])
            for name in GREEK_NAMES
            if name not in short
        ):
            break

    grid = (
        f"COS range [{lower:.4g}, {upper:.4g}] of ln(S_T/S_0) and its double, "
        f"{2 * terms} terms; {_tolerance_note(GREEK_TOL)}"
    )
    market = (spot, t, rate, q, kind)
    return tuple(
        _result(best, s, float(strike[s]), float(price[s]), market, tol, short, grid)
        for s in range(strike.size)
    )


def _result(best, s, strike, price, market, tol, short, grid):
    """Strike ``s``'s :class:`Greeks`: each Greek whose estimate is within its
    tolerance, NaN with a note otherwise."""
    spot, t, rate, q, kind = market
    values = {name: float(v[s]) for name, v in best["values"].items()}
    errors = {name: float(v[s]) for name, v in best["errors"].items()}
    if kind == "call":
        values = _call_from_put(values, spot, strike, t, rate, q)
    notes, result = [], {}
    for name in GREEK_NAMES:
        err, limit = errors[name], tol[name]
        if name in short:
            notes.append(f"{name} not certified: the series needs more terms than allowed")
        elif not err <= limit:
            notes.append(
                f"{name} not certified: error estimate {err:.1e} exceeds its tolerance {limit:.1e}"
            )
        result[name] = values[name] if name not in short and err <= limit else math.nan
    notes.append(grid)
    wider = [f"{n} ({best['scale'][n][s]}x)" for n in GREEK_NAMES if best["scale"][n][s] > 1]
    if wider:
        notes.append("on a wider range, with as many more terms: " + ", ".join(wider))
    return Greeks(
        price=price,
        values=result,
        errors={name: errors[name] for name in GREEK_NAMES},
        method="fourier",
        estimators=dict(_ESTIMATORS),
        price_error=errors["price"],
        notes=tuple(notes),
    )


def _better(old, new):
    """Per Greek and strike, the level with the smaller error estimate."""
    out = {"values": {}, "errors": {}, "scale": {}}
    for name in old["values"]:
        take = new["errors"][name] < old["errors"][name]
        for part in out:
            out[part][name] = np.where(take, new[part][name], old[part][name])
    return out


def _uncertified(price, note):
    nan = dict.fromkeys(GREEK_NAMES, math.nan)
    return Greeks(
        price=price,
        values=dict(nan),
        errors=dict(nan),
        method="fourier",
        estimators=dict(_ESTIMATORS),
        notes=(note,),
    )


def _put_greeks(sums, params, spot, strike, t, rate, disc):
    """The put's price and Greeks from one range's sums (arrays over the strikes)."""
    s = dict(zip(SUMS, sums, strict=True))
    put = disc * s["put"]
    delta = disc * s["delta"]
    out = {
        "price": put,
        "delta": delta,
        "gamma": disc * strike / (spot * spot) * s["density"],
        "theta": rate * put - disc * s["d_maturity"],
        "rho_rate": -t * put + t * spot * delta,
        "rho_div": -t * spot * delta,
    }
    for name in _PARAMS:
        out[name] = disc * s[name]
    out["vega"] = desk_vega(params.v0, params.theta, out["d_v0"], out["d_theta"])

    return out


def _call_from_put(put, spot, strike, t, rate, q):
    """Put-call parity ``C = P + S e^{-qT} - K e^{-rT}`` applied to the Greeks."""
    spot_df, strike_df = spot * math.exp(-q * t), strike * math.exp(-rate * t)
    call = dict(put)
    call["price"] = put["price"] + spot_df - strike_df
    call["delta"] = put["delta"] + math.exp(-q * t)
    call["theta"] = put["theta"] + q * spot_df - rate * strike_df
    call["rho_rate"] = put["rho_rate"] + t * strike_df
    call["rho_div"] = put["rho_div"] - t * spot_df
    return call


#: Rows of ``greek_envelope``: |phi|, then |phi d ln phi / dp| for these.
_ENVELOPE_ROWS = ("put", *_PARAMS, "d_maturity")


def clear_cache():
    """Forget the remembered term counts and tail bounds (``_terms_and_tails``).

    They are pure functions of the model, maturity, market and the module's
    constants (``GREEK_TOL``, ``TAIL_SHARE``, ``MAX_TERMS``): clear them after
    changing a constant.  The coefficient rows live in
    :data:`rootvar.core.fourier.series.SERIES`, cleared by its own ``clear``.
    """
    _terms_and_tails.cache_clear()


@functools.lru_cache(maxsize=256)
def _terms_and_tails(model, t, drift, spot, max_strike, disc, step, base_terms):
    """Terms on the certified range for the Greeks, the bounds on the terms left out,
    and the Greeks whose bound no allowed term count meets.

    The envelope of each sum (see :func:`heston_greeks`) is integrated past
    each frequency of the pricer's cutoff grid at or above the price's top
    frequency ``(base_terms - 1) step``, each interval at its larger end
    (the grid and the reading of the decay up to 1e7 of
    :func:`rootvar.core.fourier.series.cf_cutoffs`).  A sum of terms ``f(w_k)``,
    ``w_k = k step``, past ``U`` is at most ``1 / step`` times the integral of
    a decreasing ``f`` past ``U``, and ``step (b - a) = pi`` turns the
    envelopes' ``2 / (b - a)`` into ``2 / pi``.  The fewest terms whose
    bounds are all within ``TAIL_SHARE`` of the tolerances are taken.
    """
    top = (base_terms - 1) * step
    u = np.concatenate([[top], CUTOFF_GRID[CUTOFF_GRID > top]])
    tail = greek_tails(u, t, np.array(model), drift, spot, max_strike, disc)
    limit = TAIL_SHARE * GREEK_TOL * _sum_scale(spot)
    terms_at = np.ceil(u / step).astype(np.int64) + 1  # (terms - 1) step >= u
    terms_at[0] = base_terms
    allowed = 2 * terms_at <= MAX_TERMS
    meets = (tail <= limit[:, None]).all(axis=0) & allowed
    if meets.any():
        i = int(meets.argmax())
    else:  # the most terms allowed; the Greeks whose bound it misses are not certified
        i = int(np.flatnonzero(allowed).max(initial=0))
    tails = dict(zip(SUMS, tail[:, i].tolist(), strict=True))
    short = {name for j, name in enumerate(SUMS) if tail[j, i] > limit[j]}
    # a pure function of its arguments, remembered: read-only results
    return int(terms_at[i]), MappingProxyType(tails), frozenset(_short_greeks(short))


def _sum_scale(spot):
    """Each sum's Greek scale: spot for the price-like ones, 1 for delta, 1 / spot for gamma."""
    return np.array([spot] * 7 + [1.0, 1.0 / spot])


def _short_greeks(rows):
    """Greeks that rest on a sum whose dropped terms are not bounded."""
    uses = {
        "delta": {"delta"},
        "gamma": {"density"},
        "theta": {"put", "d_maturity"},
        "vega": {"d_v0", "d_theta"},
        "rho_rate": {"put", "delta"},
        "rho_div": {"delta"},
        **{name: {name} for name in _PARAMS},
    }
    return {greek for greek, needs in uses.items() if needs & rows}


def _greek_tails(tails, params, spot, t, rate):
    """Bounds on each Greek's terms left out, from the bounds on the sums' (which are
    for the strip's largest strike, so hold for every strike of it)."""
    out = {"price": tails["put"], "delta": tails["delta"], "gamma": tails["density"]}
    out["theta"] = abs(rate) * tails["put"] + tails["d_maturity"]
    out["rho_rate"] = t * tails["put"] + t * spot * tails["delta"]
    out["rho_div"] = t * spot * tails["delta"]
    for name in _PARAMS:
        out[name] = tails[name]
    out["vega"] = desk_vega(params.v0, params.theta, tails["d_v0"], tails["d_theta"])

    return out


def _add_mass_bounds(errors, s, cdf, kink, a, b, a_wide, spot, strike, t, disc):
    """Add delta's and gamma's error for strike ``s`` when its kink lies beyond the
    doubled range.

    Neither range sees the kink, so their difference says nothing of it.  With
    the masses of ``R = ln(S_T / S_0)`` below ``a`` and above ``b`` (the certified
    range; read from the doubled range's cdf), the put's
    ``dP_u / dS_0 = -E[e^R 1{R < c}]`` is missed by at most ``e^c`` times the mass
    below for a kink ``c`` left of the range (the series gives 0), and by
    ``e^{a_wide}`` times the mass below plus ``e^c`` times the mass above for a
    kink right of it (the series gives the part inside the doubled range);
    ``e^c = K / S_0``.  The density at the kink is at most the mass beyond the
    range over the kink's distance from it (a density rising towards the body).
    The rhos follow delta (``T S_0`` times it).
    """
    below, above = abs(cdf[0]), abs(1.0 - cdf[1])
    ratio = strike / spot
    if kink < a:
        delta, density = ratio * below, below / (a - kink)
    else:
        delta, density = math.exp(a_wide) * below + ratio * above, above / (kink - b)
    errors["delta"][s] += disc * delta
    errors["gamma"][s] += disc * strike / (spot * spot) * density
    errors["rho_rate"][s] += t * spot * disc * delta
    errors["rho_div"][s] += t * spot * disc * delta
