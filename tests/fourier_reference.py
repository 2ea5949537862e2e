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
