"""The exact law of the CIR variance: transition and stationary distributions.

The transition law is returned as a frozen ``scipy.stats`` distribution, so
``ppf``, ``cdf``, ``pdf``, ``sf``, ``mean``, ``var``, ``interval`` and ``rvs``
all come with it.  The only method rootvar rewrites is the quantile function
in the far left tail, where scipy's own returns NaN once the quantile nears
the smallest normal double.
"""

from __future__ import annotations

import numpy as np
from scipy import optimize, special, stats

from rootvar.core.validation import cir_parameters

__all__ = ["TINY_VARIANCE", "cir_stationary", "cir_transition", "cir_transition_shapes"]

#: Quantiles below this level are returned as 0.0 (they underflow a double,
#: or sit so close to it that no digit of them is trustworthy).
TINY_VARIANCE = float(np.finfo(float).tiny)  # 2.2e-308

_LN2 = np.log(2.0)


def _log_lower_gamma_reg(a: float, log_x: float) -> float:
    """log P(a, x) for x = exp(log_x), without underflow for tiny x.

    Uses Kummer's form ``P(a, x) = x^a e^{-x} M(1, a + 1, x) / Gamma(a + 1)``
    (Abramowitz & Stegun 1964, eq. 6.5.12 with 13.1.2) when the direct value
    underflows.
    """
    x = np.exp(log_x)
    direct = special.gammainc(a, x)
    if direct > 1e-280:
        return float(np.log(direct))
    return float(a * log_x - x - special.gammaln(a + 1.0) + np.log(special.hyp1f1(1.0, a + 1.0, x)))


def _ncx2_log_cdf(log_x: float, df: float, nc: float) -> float:
    """log of the noncentral chi-square cdf at ``exp(log_x)``, tiny arguments included.

    Poisson mixture of central chi-squares (Johnson, Kotz & Balakrishnan
    1995, Continuous Univariate Distributions vol. 2, eq. 29.2).
    """
    half = 0.5 * nc
    top = int(half + 20.0 * np.sqrt(half) + 40.0)
    j = np.arange(top + 1)
    log_w = (
        -half + j * np.log(half) - special.gammaln(j + 1.0)
        if half > 0
        else np.where(j == 0, 0.0, -np.inf)
    )
    terms = [
        lw + _log_lower_gamma_reg(0.5 * df + k, log_x - _LN2)
        for k, lw in zip(j, log_w, strict=True)
        if np.isfinite(lw)
    ]
    return float(special.logsumexp(terms))


def _left_tail_log_quantile(q: float, df: float, nc: float) -> float:
    """Solve ``log F(exp(u)) = log q`` for u by Brent's method."""
    log_q = np.log(q)
    # Near zero F(x) ~ exp(-nc/2) (x/2)^(df/2) / Gamma(df/2 + 1): start there.
    guess = (log_q + 0.5 * nc + special.gammaln(0.5 * df + 1.0)) / (0.5 * df) + _LN2
    lo, hi = guess - 10.0, min(guess + 10.0, np.log(df + nc) + 3.0)
    f = lambda u: _ncx2_log_cdf(u, df, nc) - log_q  # noqa: E731
    while f(lo) > 0:
        lo -= 2.0 * abs(lo) + 10.0
    while f(hi) < 0:
        hi += 10.0
    return optimize.brentq(f, lo, hi, xtol=1e-14, rtol=4 * np.finfo(float).eps, maxiter=400)


class _ScaledNcx2Gen(stats.rv_continuous):
    """``c * X`` with ``X`` noncentral chi-square(df, nc); nc = 0 is the central case."""

    def _argcheck(self, df, nc, c):
        return (df > 0) & np.isfinite(df) & (nc >= 0) & np.isfinite(nc) & (c > 0)

    def _shape_info(self):
        return [
            stats._distn_infrastructure._ShapeInfo("df", False, (0, np.inf), (False, False)),
            stats._distn_infrastructure._ShapeInfo("nc", False, (0, np.inf), (True, False)),
            stats._distn_infrastructure._ShapeInfo("c", False, (0, np.inf), (False, False)),
        ]

    def _pdf(self, x, df, nc, c):
        return stats.ncx2.pdf(x / c, df, nc) / c

    def _logpdf(self, x, df, nc, c):
        return stats.ncx2.logpdf(x / c, df, nc) - np.log(c)

    def _cdf(self, x, df, nc, c):
        return stats.ncx2.cdf(x / c, df, nc)

    def _sf(self, x, df, nc, c):
        return stats.ncx2.sf(x / c, df, nc)

    def _isf(self, q, df, nc, c):
        return stats.ncx2.isf(q, df, nc) * c

    def _ppf(self, q, df, nc, c):
        x = np.asarray(stats.ncx2.ppf(q, df, nc), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            mismatch = np.abs(stats.ncx2.cdf(x, df, nc) / q - 1.0)
        # scipy's quantile is trusted where it reproduces q through the cdf;
        # elsewhere (NaN, or garbage next to the underflow limit) rootvar
        # solves for the log-quantile instead.
        redo = (
            ~np.isfinite(x) | ((q < 0.5) & ~(mismatch <= 1e-9)) | ((x <= TINY_VARIANCE) & (q > 0))
        )
        out = x * c
        for i in zip(*np.nonzero(np.atleast_1d(redo)), strict=False):
            qi, dfi, nci, ci = (np.broadcast_to(a, np.shape(redo))[i] for a in (q, df, nc, c))
            log_v = _left_tail_log_quantile(float(qi), float(dfi), float(nci)) + np.log(ci)
            value = np.exp(log_v) if log_v >= np.log(TINY_VARIANCE) else 0.0
            if out.ndim:
                out[i] = value
            else:
                out = np.float64(value)
        return out

    def _rvs(self, df, nc, c, size=None, random_state=None):
        return c * random_state.noncentral_chisquare(df, nc, size)

    def _stats(self, df, nc, c):
        # Moments of the noncentral chi-square (Johnson, Kotz & Balakrishnan
        # 1995, sec. 29.4), scaled by c.
        mean = c * (df + nc)
        var = c * c * 2.0 * (df + 2.0 * nc)
        skew = 2.0**1.5 * (df + 3.0 * nc) / (df + 2.0 * nc) ** 1.5
        kurt = 12.0 * (df + 4.0 * nc) / (df + 2.0 * nc) ** 2
        return mean, var, skew, kurt


_scaled_ncx2 = _ScaledNcx2Gen(a=0.0, name="cir_transition", shapes="df, nc, c")


def cir_transition_shapes(v0, kappa, theta, vol_of_vol, t):
    """Degrees of freedom, noncentrality and scale of the CIR transition law.

    Returns ``(df, nc, c)`` with ``v_t = c X``, ``X ~ chi'^2(df, nc)``:
    ``c = vol_of_vol^2 (1 - e^{-kappa t}) / (4 kappa)``,
    ``df = 4 kappa theta / vol_of_vol^2`` and ``nc = v0 e^{-kappa t} / c``.
    """
    kappa, theta, vol_of_vol, v0, t = cir_parameters(
        kappa, theta, vol_of_vol, v0=(v0, ">=0"), t=(t, ">0")
    )
    decay = np.exp(-kappa * t)
    c = vol_of_vol**2 * -np.expm1(-kappa * t) / (4.0 * kappa)
    df = 4.0 * kappa * theta / vol_of_vol**2
    nc = v0 * decay / c
    return df, nc, c


def cir_transition(v0, kappa, theta, vol_of_vol, t):
    """Exact law of the CIR variance ``v_t`` given ``v_0``, as a frozen scipy distribution.

    Parameters
    ----------
    v0 : array_like
        Variance today (annualised), >= 0.  ``v0 = 0`` gives the central
        chi-square case.
    kappa : array_like
        Mean-reversion speed, per year, > 0.
    theta : array_like
        Long-run variance (annualised), > 0.
    vol_of_vol : array_like
        Volatility of variance, per sqrt(year), > 0.
    t : array_like
        Horizon in years, > 0.

    Returns
    -------
    scipy.stats frozen distribution
        Support ``[0, inf)``.  ``ppf`` returns 0.0, never NaN, for quantiles
        below :data:`TINY_VARIANCE` (they exist when the Feller ratio is tiny)
        and keeps full relative precision for every quantile above it.

    Notes
    -----
    ``v_t = c X`` with ``X`` noncentral chi-square with ``df = 4 kappa theta /
    vol_of_vol^2`` degrees of freedom and noncentrality ``nc = v0 e^{-kappa
    t} / c``, ``c = vol_of_vol^2 (1 - e^{-kappa t}) / (4 kappa)``.

    References
    ----------
    Cox, J. C., Ingersoll, J. E. & Ross, S. A. (1985). A theory of the term
    structure of interest rates. Econometrica 53(2), 385-407.
    Glasserman, P. (2003). Monte Carlo Methods in Financial Engineering.
    Springer, section 3.4.

    Examples
    --------
    >>> law = cir_transition(0.04, 1.5, 0.04, 0.6, 1.0)
    >>> round(float(law.mean()), 6)
    0.04
    """
    df, nc, c = cir_transition_shapes(v0, kappa, theta, vol_of_vol, t)
    return _scaled_ncx2(df, nc, c)


def cir_stationary(kappa, theta, vol_of_vol):
    """Stationary law of the CIR variance: Gamma(2 kappa theta / sigma^2, sigma^2 / (2 kappa)).

    Parameters
    ----------
    kappa, theta, vol_of_vol : array_like
        CIR parameters (per year, annualised variance, per sqrt(year)), > 0.

    Returns
    -------
    scipy.stats frozen distribution
        ``scipy.stats.gamma`` with shape ``2 kappa theta / vol_of_vol**2``
        (the Feller ratio) and scale ``vol_of_vol**2 / (2 kappa)``; mean theta.

    References
    ----------
    Cox, J. C., Ingersoll, J. E. & Ross, S. A. (1985). Econometrica 53(2),
    385-407.
    """
    kappa, theta, vol_of_vol = cir_parameters(kappa, theta, vol_of_vol)
    return stats.gamma(2.0 * kappa * theta / vol_of_vol**2, scale=vol_of_vol**2 / (2.0 * kappa))
