"""Plain numpy versions of the calibration kernels, kept as their oracle.

These are the numpy implementations that ``rootvar.core.fourier.gradient_kernels``
replaced, unchanged: tests hold the kernels to them (to rounding: the sums run
in another order and ``exp``/``log`` come from another library).
"""

import numpy as np


def log_cf_gradient(u, params, maturity, drift=0.0):
    """``ln phi`` and its derivatives in (v0, kappa, theta, vol_of_vol, rho), numpy version
    of :func:`rootvar.core.fourier.gradient.log_cf_gradient`."""
    p = params
    u = np.asarray(u, dtype=float)
    t = np.asarray(maturity, dtype=float)
    sig, rho, kappa = p.vol_of_vol, p.rho, p.kappa
    sig2 = sig * sig
    iu = 1j * u
    xi = kappa - rho * sig * iu
    quad = u * u + iu
    d = _sqrt(xi * xi + sig2 * quad)
    inv_d = 1.0 / d
    a = xi - d
    bsum = xi + d
    inv_b = 1.0 / bsum
    g = a * inv_b
    e = _exp(np.maximum(-(d.real * t), -700.0), -(d.imag * t))
    one_ge = 1.0 - g * e
    inv_one_ge = 1.0 / one_ge
    inv_one_g = 1.0 / (1.0 - g)
    ratio = one_ge * inv_one_g
    big_l = 0.5 * np.log(ratio.real**2 + ratio.imag**2) + 1j * np.arctan2(ratio.imag, ratio.real)
    one_e = 1.0 - e
    frac = one_e * inv_one_ge
    c_core = a * t - 2.0 * big_l
    kt = kappa * p.theta / sig2
    v_s2 = p.v0 / sig2
    log_cf = iu * drift * t + kt * c_core + v_s2 * a * frac

    def pieces(dxi, dd):
        da = dxi - dd
        dg = (da - g * (dxi + dd)) * inv_b
        de = -t * e * dd
        dge = dg * e + g * de
        dl = -dge * inv_one_ge + dg * inv_one_g
        dfrac = (-de + frac * dge) * inv_one_ge
        return da * t - 2.0 * dl, da * frac + a * dfrac

    dc_k, dq_k = pieces(1.0, xi * inv_d)
    dxi_s = -rho * iu
    dc_s, dq_s = pieces(dxi_s, (xi * dxi_s + sig * quad) * inv_d)
    dxi_r = -sig * iu
    dc_r, dq_r = pieces(dxi_r, xi * dxi_r * inv_d)
    a_frac = a * frac
    grad = np.stack(
        [
            a_frac / sig2,
            p.theta / sig2 * c_core + kt * dc_k + v_s2 * dq_k,
            kappa / sig2 * c_core,
            -2.0 / sig * (kt * c_core + v_s2 * a_frac) + kt * dc_s + v_s2 * dq_s,
            kt * dc_r + v_s2 * dq_r,
        ]
    )
    return log_cf, grad


def _sqrt(z):
    re, im = z.real, z.imag
    r = np.sqrt(0.5 * (np.abs(re) + np.hypot(re, im)))
    half = np.divide(0.5 * im, r, out=np.zeros_like(r), where=r > 0)
    right = re >= 0
    out = np.empty(z.shape, dtype=complex)
    out.real = np.where(right, r, np.abs(half))
    out.imag = np.where(right, half, np.copysign(r, im))
    return out


def _exp(re, im):
    m = np.exp(re)
    out = np.empty(np.broadcast(re, im).shape, dtype=complex)
    out.real = m * np.cos(im)
    out.imag = m * np.sin(im)
    return out


def put_coefficients(omega, a, b, log_moneyness, strike):
    """Cosine coefficients (times ``2 / (b - a)``) of the put payoff, numpy version."""
    cut = np.clip(-log_moneyness, a, b)[None, :]
    w = omega[:, None]
    arg = w * (cut - a)
    with np.errstate(divide="ignore", invalid="ignore"):
        psi = np.where(w > 0, np.sin(arg) / w, cut - a)
    chi = (np.cos(arg) * np.exp(cut) - np.exp(a) + w * np.sin(arg) * np.exp(cut)) / (1.0 + w * w)
    return 2.0 / (b - a) * strike[None, :] * (psi - np.exp(log_moneyness)[None, :] * chi)


def surface_evaluate(pricer, params):
    """Out-of-the-money prices and gradient of a ``SurfacePricer``, the numpy way."""
    grid = pricer.grid
    log_cf, dlog = log_cf_gradient(
        pricer.omega, params, pricer.times, pricer.rate - pricer.div_yield
    )
    cf = _exp(log_cf.real, log_cf.imag) * pricer.phase
    coef = np.concatenate([cf.real[None], (dlog * cf[None]).real], axis=0)
    ends = np.concatenate([[0], np.cumsum(grid.terms)])
    out = np.empty((6, pricer.n_quotes))
    for i, t in enumerate(grid.maturities):
        idx = pricer.groups[i]
        if idx.size:
            span = slice(int(ends[i]), int(ends[i + 1]))
            payoff = put_coefficients(
                pricer.omega[span],
                grid.lower[i],
                grid.upper[i],
                np.log(pricer.spot / pricer.strike[idx]),
                pricer.strike[idx],
            ) * np.exp(-pricer.rate * t)
            out[:, idx] = coef[:, span] @ payoff
    price = out[0] + np.where(pricer.call_side, pricer.parity, 0.0)
    return price, out[1:].T


def surface_prices_extended(pricer, values):
    """Put prices of a ``SurfacePricer``'s quotes on its fixed grid, in extended precision.

    The same COS sum as the pricer (Albrecher et al. 2007 form of the
    characteristic function, the pricer's frequencies, phases and payoff
    coefficients), evaluated in ``numpy.longdouble`` (80-bit on x86-64: 64-bit
    mantissa): its rounding is some 2,000 times smaller than the double
    sum's, so finite differences of it are limited by their truncation error,
    not by the rounding of the prices.  ``values`` holds (v0, kappa, theta,
    vol_of_vol, rho) as ``longdouble``.
    """
    ld = np.longdouble
    v0, kappa, theta, sig, rho = (ld(v) for v in values)
    u = pricer.omega.astype(ld)
    t = pricer.times.astype(ld)
    drift = ld(pricer.rate) - ld(pricer.div_yield)
    iu = np.clongdouble(1j) * u
    xi = kappa - rho * sig * iu
    d = np.sqrt(xi * xi + sig * sig * (u * u + iu))  # principal root, Re d >= 0
    g = (xi - d) / (xi + d)
    e = np.exp(-d * t)
    log_cf = (
        iu * drift * t
        + kappa * theta / (sig * sig) * ((xi - d) * t - 2 * np.log((1 - g * e) / (1 - g)))
        + v0 / (sig * sig) * (xi - d) * (1 - e) / (1 - g * e)
    )
    coef = (np.exp(log_cf) * pricer.phase.astype(np.clongdouble)).real
    out = np.empty(pricer.n_quotes, dtype=ld)
    ends = pricer.term_ends
    for i in range(ends.size - 1):
        idx = pricer.quotes[pricer.quote_ends[i] : pricer.quote_ends[i + 1]]
        if idx.size:
            start = pricer.payoff_starts[i]
            block = pricer.payoff[start : start + (ends[i + 1] - ends[i]) * idx.size]
            payoff = block.reshape(-1, idx.size).astype(ld)
            out[idx] = coef[ends[i] : ends[i + 1]] @ payoff
    return out
