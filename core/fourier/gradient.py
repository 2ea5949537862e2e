"""Heston option prices and their gradient in the five parameters, on one COS grid.

The gradient of the COS price is the COS sum with the characteristic function
replaced by its derivative, ``d phi / d p = phi * d ln(phi) / d p``; the
payoff coefficients do not depend on the model parameters.  Differentiating
on a fixed grid (truncation range and term count) makes the gradient the
exact derivative of the price computed on that grid, which is what a
least-squares optimiser needs.  The grid is taken from the certified pricer
(:func:`rootvar.core.heston_price_details`) and checked against its prices.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rootvar.core.brief_repr import BriefRepr
from rootvar.core.fourier.characteristic import log_return_cumulants
from rootvar.core.fourier.cos import heston_price_details
from rootvar.core.fourier.gradient_kernels import (
    log_cf_gradient_array,
    put_coefficients,
    surface_sums,
)
from rootvar.core.params import HestonParams, as_params
from rootvar.core.runtime import notice_if_cold
from rootvar.core.validation import InputError, as_float_array, broadcast, check_choice

__all__ = ["PARAM_NAMES", "CosGrid", "cos_grid", "heston_price_gradient"]

#: Order of the gradient's last axis.
PARAM_NAMES = ("v0", "kappa", "theta", "vol_of_vol", "rho")

#: Largest disagreement (x spot) allowed between a grid's prices and the
#: certified prices it was taken from; the certified prices are good to 1e-10.
GRID_TOL = 1e-10


def log_cf_gradient(u, params: HestonParams, maturity, drift=0.0):
    """``ln phi`` and its derivatives in (v0, kappa, theta, vol_of_vol, rho).

    Parameters
    ----------
    u : array_like of float
        Real Fourier arguments.
    params : HestonParams
    maturity : array_like
        Years, > 0, broadcast against ``u``.
    drift : float
        ``rate - div_yield``.

    Returns
    -------
    log_cf : ndarray of complex
        ``ln E[exp(i u ln(S_T / S_0))]``, the form of
        :func:`rootvar.core.fourier.characteristic.heston_log_cf`.
    grad : ndarray of complex, shape ``(5,) + log_cf.shape``
        ``d ln phi / d p`` in the order of :data:`PARAM_NAMES`.

    Notes
    -----
    With ``xi = kappa - rho sigma i u``, ``d = sqrt(xi^2 + sigma^2 (u^2 + i u))``,
    ``A = xi - d``, ``g = A / (xi + d)``, ``e = exp(-d T)`` and
    ``L = ln((1 - g e) / (1 - g))``,

    .. math:: \\ln\\varphi = i u \\mu T + \\frac{\\kappa\\theta}{\\sigma^2}(A T - 2L)
              + \\frac{v_0}{\\sigma^2} A \\frac{1 - e}{1 - g e}.

    The chain rule through ``xi``, ``d``, ``g``, ``e`` and ``L`` gives the five
    derivatives (``d d / d p = (xi dxi/dp + sigma (u^2 + i u) dsigma/dp) / d``).
    Cui, del Baño Rollin & Germano (2017) derive the same gradient for a
    rearranged, equivalent form of the characteristic function; this is its
    counterpart for the Albrecher et al. (2007) form the pricer uses, in which
    the logarithm never crosses its branch cut, so its derivative ``L'`` is
    a plain ratio.  Evaluated by the compiled kernel
    :func:`rootvar.core.fourier.gradient_kernels.log_cf_gradient_array`, which the
    calibration's surface sums share.

    References
    ----------
    Cui, Y., del Baño Rollin, S. & Germano, G. (2017). Full and fast
    calibration of the Heston stochastic volatility model. European Journal
    of Operational Research 263(2), 625-638.
    Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
    Heston trap. Wilmott Magazine, January 2007, 83-92.
    """
    p = params
    # Copies: a broadcast view is read-only, and numba warns on being handed one.
    u, t = (
        np.array(a) for a in np.broadcast_arrays(np.asarray(u, float), np.asarray(maturity, float))
    )
    model = np.array([p.v0, p.kappa, p.theta, p.vol_of_vol, p.rho])
    notice_if_cold(log_cf_gradient_array)
    out = log_cf_gradient_array(
        np.ascontiguousarray(u.ravel()), np.ascontiguousarray(t.ravel()), model, float(drift)
    )
    return out[0].reshape(u.shape), out[1:].reshape((5,) + u.shape)


@dataclass(frozen=True, repr=False)
class CosGrid(BriefRepr):
    """COS truncation ranges and term counts, one per maturity.

    Attributes
    ----------
    maturities : ndarray
        Distinct maturities, years, increasing.
    lower, upper : ndarray
        Range ``[a, b]`` of ``ln(S_T / S_0)`` per maturity.
    terms : ndarray of int
        Number of cosine terms per maturity.
    """

    maturities: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    terms: np.ndarray


def cos_grid(params, spot, strike, maturity, rate=0.0, div_yield=0.0) -> CosGrid:
    """The certified COS grid of :func:`rootvar.core.heston_price` for these options.

    Taken from :func:`rootvar.core.heston_price_details` at ``params``: each
    maturity's certified range ``[c1 - l sd, c1 + r sd]`` (the range whose
    doubling moved no price by more than 1e-10 x spot) and the terms that
    reach the same highest frequency as the certified prices.  The pricer
    itself prices on the doubled range with twice the terms; the certified
    range needs half the work for the same accuracy.

    Raises
    ------
    InputError
        When the certified pricer had to fall back to its check method for
        some maturity: there is then no certified COS grid to differentiate on.
    """
    details = heston_price_details(params, spot, strike, maturity, rate, div_yield, "put", "cos")
    return grid_from_details(details, params, rate - div_yield)


def grid_from_details(details, params, drift) -> CosGrid:
    """:class:`CosGrid` read from :class:`rootvar.core.FourierDetails` of a put strip."""
    if details.fallbacks:
        raise InputError(
            "params give no certified COS grid for every maturity "
            f"({details.fallbacks} options fell back to the check method), got {params}"
        )
    times = np.array(sorted(details.terms))
    c1, c2 = log_return_cumulants(params, times, drift)
    sd = np.sqrt(c2)
    left = np.array([details.half_width[float(t)][0] for t in times])
    right = np.array([details.half_width[float(t)][1] for t in times])
    terms = np.array([details.terms[float(t)] for t in times], dtype=int)
    # the doubled range's 2n terms reach the same top frequency as n on this one
    return CosGrid(times, c1 - left * sd, c1 + right * sd, (terms + 1) // 2)


class SurfacePricer:
    """Out-of-the-money prices and their gradient for fixed quotes on a fixed grid.

    The payoff coefficients and phase factors depend only on the grid and the
    quotes, so they are computed once; each evaluation is then one pass of
    the compiled kernel :func:`rootvar.core.fourier.gradient_kernels.surface_sums`
    over every maturity's frequencies, which evaluates the characteristic
    function with its five derivatives (:func:`log_cf_gradient`) and adds
    the six COS sums of every strike of that maturity.

    Parameters
    ----------
    grid : CosGrid
    spot, rate, div_yield : float
    strike, maturity : ndarray
        One entry per quote; every maturity must be in ``grid.maturities``.
    """

    def __init__(self, grid: CosGrid, spot, strike, maturity, rate=0.0, div_yield=0.0):
        self.grid = grid
        self.spot, self.rate, self.div_yield = float(spot), float(rate), float(div_yield)
        strike = np.asarray(strike, dtype=float)
        maturity = np.asarray(maturity, dtype=float)
        times = grid.maturities
        where = np.searchsorted(times, maturity)
        if np.any(where >= times.size) or np.any(
            times[np.minimum(where, times.size - 1)] != maturity
        ):
            raise InputError("maturity must be one of the grid's maturities, got another")
        self.strike = strike
        self.n_quotes = strike.size
        # every maturity's frequencies laid end to end: no padding to the longest
        ends = np.concatenate([[0], np.cumsum(grid.terms)]).astype(np.int64)
        self.term_ends = ends
        k = np.concatenate([np.arange(n) for n in grid.terms])
        owner = np.repeat(np.arange(times.size), grid.terms)
        self.omega = k * (np.pi / (grid.upper - grid.lower))[owner]
        self.times = times[owner]
        # e^{-i omega a}, with each maturity's first term halved (the primed sum)
        self.phase = np.exp(-1j * self.omega * grid.lower[owner])
        self.phase[ends[:-1]] *= 0.5
        self.groups = [np.flatnonzero(where == i) for i in range(times.size)]
        self.quotes = np.concatenate(self.groups).astype(np.int64)
        self.quote_ends = np.concatenate(
            [[0], np.cumsum([idx.size for idx in self.groups])]
        ).astype(np.int64)
        forward = self.spot * np.exp((self.rate - self.div_yield) * maturity)
        self.call_side = strike >= forward
        self.parity = self.spot * np.exp(-self.div_yield * maturity) - strike * np.exp(
            -self.rate * maturity
        )
        blocks = []
        notice_if_cold(put_coefficients, surface_sums)
        for i, idx in enumerate(self.groups):
            span = slice(int(ends[i]), int(ends[i + 1]))
            coef = put_coefficients(
                self.omega[span],
                float(grid.lower[i]),
                float(grid.upper[i]),
                np.log(self.spot / strike[idx]),
                strike[idx],
            )
            blocks.append((coef * np.exp(-self.rate * times[i])).ravel())
        self.payoff_starts = np.concatenate([[0], np.cumsum([blk.size for blk in blocks])]).astype(
            np.int64
        )
        self.payoff = np.concatenate(blocks)

    def evaluate(self, params):
        """Out-of-the-money option prices and their gradient.

        Parameters
        ----------
        params : HestonParams or array_like
            The model, or its five values in the order of
            :data:`PARAM_NAMES` (taken as already checked).

        Returns
        -------
        price : ndarray, shape (n_quotes,)
            Put below the forward, call at or above it (put-call parity,
            which leaves the gradient unchanged).
        grad : ndarray, shape (n_quotes, 5)
            Derivatives in the order of :data:`PARAM_NAMES`.
        """
        if isinstance(params, HestonParams):
            p = params
            params = (p.v0, p.kappa, p.theta, p.vol_of_vol, p.rho)
        model = np.append(np.asarray(params, dtype=float), self.rate - self.div_yield)
        out = surface_sums(
            self.omega,
            self.times,
            self.phase,
            self.term_ends,
            self.payoff,
            self.payoff_starts,
            self.quotes,
            self.quote_ends,
            model,
        )
        price = out[0] + np.where(self.call_side, self.parity, 0.0)
        return price, out[1:].T


def heston_price_gradient(
    params, spot, strike, maturity, rate=0.0, div_yield=0.0, kind="call"
) -> tuple[np.ndarray, np.ndarray]:
    """European prices under Heston and their gradient in the five parameters.

    Parameters
    ----------
    params : HestonParams
    spot : float
        Spot price, > 0.
    strike, maturity : array_like
        Strikes (> 0) and years (> 0), broadcast together.
    rate, div_yield : float
        Continuous rate and dividend yield (decimals).
    kind : {"call", "put"}

    Returns
    -------
    price : ndarray
        Prices, shape of the broadcast inputs, equal to
        :func:`rootvar.core.heston_price` within ``GRID_TOL x spot``.
    gradient : ndarray
        Shape ``price.shape + (5,)``: derivatives in v0, kappa, theta,
        vol_of_vol, rho (the order of :data:`PARAM_NAMES`), in currency per
        unit of each parameter.

    Raises
    ------
    InputError
        On bad input, or when the certified pricer has no COS grid here.

    Notes
    -----
    ``dP/dp = e^{-rT} sum'_k Re[phi(w_k) (d ln phi/dp)(w_k) e^{-i w_k a}] V_k``
    on the certified pricer's grid (range ``[a, b]``, terms ``N``) held fixed;
    see :func:`log_cf_gradient`.  Calls and puts share the gradient (parity).

    References
    ----------
    Cui, Y., del Baño Rollin, S. & Germano, G. (2017). Full and fast
    calibration of the Heston stochastic volatility model. European Journal
    of Operational Research 263(2), 625-638.
    Fang, F. & Oosterlee, C. W. (2008). A novel pricing method for European
    options based on Fourier-cosine series expansions. SIAM J. Sci. Comput.
    31(2), 826-848.
    """
    as_params(params)
    check_choice("kind", kind, ("call", "put"))
    spot = float(as_float_array("spot", spot, ">0"))
    strike, maturity = broadcast(
        strike=as_float_array("strike", strike, ">0"),
        maturity=as_float_array("maturity", maturity, ">0"),
    )
    shape = strike.shape
    k, t = strike.ravel(), maturity.ravel()
    details = heston_price_details(params, spot, k, t, rate, div_yield, "put", "cos")
    pricer = SurfacePricer(
        grid_from_details(details, params, rate - div_yield), spot, k, t, rate, div_yield
    )
    price, grad = pricer.evaluate(params)
    check_grid(pricer, params, details)
    forward = spot * np.exp((rate - div_yield) * t)
    parity = spot * np.exp(-div_yield * t) - k * np.exp(-rate * t)
    put = price - np.where(k >= forward, parity, 0.0)
    out = put + parity if kind == "call" else put
    return out.reshape(shape), grad.reshape(shape + (5,))


def check_grid(pricer: SurfacePricer, params, details) -> float:
    """Largest gap (x spot) between the grid's prices and certified puts; raise past ``GRID_TOL``.

    Guards the reading of :class:`rootvar.core.FourierDetails` (range and
    terms) against any change in how the certified pricer reports them.
    """
    price, _ = pricer.evaluate(params)
    put = price - np.where(pricer.call_side, pricer.parity, 0.0)
    gap = float(np.max(np.abs(put - np.ravel(details.price)))) / pricer.spot
    if gap > GRID_TOL:
        raise InputError(f"COS grid prices must match the certified prices, got a gap {gap:.1e}")
    return gap
