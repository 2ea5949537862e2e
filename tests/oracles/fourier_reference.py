"""Plain numpy reference of the Fourier hot paths, the oracle for the compiled kernels.

The characteristic function on whole arrays (numpy's own complex sqrt and
log, principal branches) and the blocked COS sums through matrix products:
what the pricer ran before its kernels were compiled.  Used by
tests/test_cos_kernels.py and as the baseline of ``python -m benchmarks kernels``.
"""

import numpy as np


def reference_cf_values(omega, p, t, drift):
    """``E[exp(i omega ln(S_T / S_0))]``, Albrecher, Mayer, Schoutens & Tistaert (2007)."""
    u = np.asarray(omega, dtype=complex)
    sig2 = p.vol_of_vol**2
    xi = p.kappa - p.rho * p.vol_of_vol * 1j * u
    d = np.sqrt(xi * xi + sig2 * (u * u + 1j * u))
    g = (xi - d) / (xi + d)
    e = np.exp(-d * t)
    c = p.kappa * p.theta / sig2 * ((xi - d) * t - 2.0 * np.log((1.0 - g * e) / (1.0 - g)))
    return np.exp(1j * u * drift * t + c + p.v0 * (xi - d) / sig2 * (1.0 - e) / (1.0 - g * e))


def _powers(base, count):
    out = np.empty((base.size, count), dtype=complex)
    out[:, 0] = 1.0
    out[:, 1:] = base[:, None]
    np.cumprod(out[:, 1:], axis=1, out=out[:, 1:])
    return out


def reference_fourier_sums(angle, coef):
    """``sum_k coef[k, p] exp(i k angle[m])``, split ``k = l J + j`` into matrix products."""
    n, cols = coef.shape
    near_n = max(1, int(np.ceil(np.sqrt(n))))
    far_n = -(-n // near_n)
    padded = np.zeros((far_n * near_n, cols), dtype=complex)
    padded[:n] = coef
    near = _powers(np.exp(1j * angle), near_n)
    far = _powers(np.exp(1j * near_n * angle), far_n)
    partial = (far @ padded.reshape(far_n, near_n * cols)).reshape(angle.size, near_n, cols)
    return (near[:, None, :] @ partial)[:, 0, :]


def reference_cos_coefficients(cf, step, a, b):
    """The COS density coefficients and payoff columns in numpy, each phase
    ``e^{-i omega_k a}`` taken by its own exponential (Fang & Oosterlee 2008, eq. 9).

    Returns ``omega``, ``coef`` (first term halved), the payoff columns
    ``coef / omega`` and ``coef (1 - i omega) / (1 + omega^2)`` as an
    ``N x 2`` complex array, and the real sum of the second column.
    """
    cf = np.asarray(cf)[::step]
    omega = np.arange(cf.size) * (np.pi / (b - a))
    coef = (cf * np.exp(-1j * omega * a)).real
    coef[0] *= 0.5
    with np.errstate(divide="ignore", invalid="ignore"):
        y = np.where(omega > 0, coef / omega, 0.0)
    z = coef * (1.0 - 1j * omega) / (1.0 + omega * omega)
    return omega, coef, np.stack([y + 0j, z], axis=1), float(z.real.sum())


def reference_cos_puts(a, b, coef0, payoff, chi_edge, log_moneyness, strike):
    """Undiscounted COS puts in numpy (Fang & Oosterlee 2008, eqs. 22-23)."""
    cut = np.clip(-log_moneyness, a, b)
    sums = reference_fourier_sums(np.pi * (cut - a) / (b - a), payoff)
    psi_sum = coef0 * (cut - a) + sums[:, 0].imag
    chi_sum = np.exp(cut) * sums[:, 1].real - np.exp(a) * chi_edge
    return 2.0 / (b - a) * strike * (psi_sum - np.exp(log_moneyness) * chi_sum)
