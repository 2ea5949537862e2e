"""Grids and finite-difference operators for the Heston PDE in (spot, variance).

The solver of :mod:`rootvar.core.pde` works backwards in time to expiry
``tau = T - t`` on

.. math:: u_\\tau = \\tfrac12 s^2 v u_{ss} + \\rho\\sigma s v u_{sv}
          + \\tfrac12\\sigma^2 v u_{vv} + (r - q) s u_s
          + \\kappa(\\theta - v) u_v - r u,

split as ``A = A0 + A1 + A2``: ``A0`` the mixed term, ``A1`` every
``s``-term with half of ``-r u``, ``A2`` every ``v``-term with the other half
(in 't Hout & Foulon 2010, sec. 2).

Boundary treatment, edge by edge (none needs data that change in time):

* ``s = 0`` (calls, puts, up barriers): no condition is imposed; every
  ``s``-term vanishes there, so the PDE itself is solved on that line.
* ``s = s_max`` (no barrier there): ``u_ss = 0`` (the value is linear in
  the spot far out), the PDE kept with a one-sided second-order ``u_s`` and
  without the mixed term.
* continuous barrier (``s = B``, the first or last grid line): Dirichlet,
  ``u = rebate`` (the rebate is paid at the hit); the line has no equation.
* ``v = 0``: the PDE itself, which degenerates there to
  ``u_tau = (r - q) s u_s + kappa theta u_v - r u``, with a one-sided
  (forward, second-order) ``u_v``; no boundary condition is invented, whether
  or not the Feller condition holds.
* ``v = v_max``: homogeneous Neumann ``u_v = 0`` (the value stops depending
  on the variance far out); the mixed term is dropped on that line.

Interior derivatives are the three-point central formulas on the
non-uniform grid, except ``u_v`` where ``v > 1``: there the drift
``kappa (theta - v)`` dominates and the backward (upwind) three-point formula
is used, as in in 't Hout & Foulon (2010), sec. 3.

References
----------
in 't Hout, K. J. & Foulon, S. (2010). ADI finite difference schemes for
option pricing in the Heston model with correlation. Int. J. Numer. Anal.
Model. 7(2), 303-320.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

__all__ = ["Operators", "build_operators", "spot_grid", "variance_grid"]

#: Ratio of the variance grid's top to its clustering width at v = 0.
VARIANCE_CLUSTER = 500.0
#: Above this variance, ``u_v`` is taken upwind (in 't Hout & Foulon 2010).
UPWIND_FROM = 1.0


def spot_grid(low, high, nodes, centres, width, count, multiple):
    """Non-uniform spot grid on ``[low, high]``, dense around ``centres``.

    The density is ``sum_k 1 / sqrt(1 + ((s - c_k) / width)^2)``; its integral
    ``F`` (a sum of ``asinh``) is split at ``low``, ``nodes`` and ``high``, and
    each piece receives a number of equal steps in ``F`` proportional to its
    length, rounded up to a multiple of ``multiple``.  So every point of
    ``nodes`` (strike, barrier) is a grid point, and taking every
    ``multiple``-th point of the grid gives the same kind of grid, coarser.

    Returns
    -------
    ndarray
        Increasing grid points, ``low`` and ``high`` included.
    """
    centres = np.asarray(centres, dtype=float)

    def big_f(s):
        return np.sum(width * np.arcsinh((np.asarray(s)[..., None] - centres) / width), axis=-1)

    cuts = np.unique(np.clip(np.concatenate([[low, high], nodes]), low, high))
    lengths = np.diff(big_f(cuts))
    steps = np.maximum(multiple, multiple * np.ceil(count * lengths / lengths.sum() / multiple))
    # a fine table of F inverts the monotone map by interpolation
    table_s = np.linspace(low, high, 20001)
    table_f = big_f(table_s)
    pieces = []
    for a, b, n in zip(cuts[:-1], cuts[1:], steps.astype(int), strict=True):
        f = np.linspace(big_f(a), big_f(b), n + 1)
        s = np.interp(f, table_f, table_s)
        s[0], s[-1] = a, b
        pieces.append(s[:-1])
    return np.concatenate([*pieces, [high]])


def variance_grid(v_max, count, multiple):
    """Variance grid ``v_j = d sinh(j dx)`` on ``[0, v_max]``, dense at ``v = 0``.

    ``d = v_max / 500`` (in 't Hout & Foulon 2010, sec. 3); ``count`` is
    rounded up to a multiple of ``multiple`` so coarser grids are sub-grids.
    """
    n = int(multiple * np.ceil(count / multiple))
    d = v_max / VARIANCE_CLUSTER
    eta = np.linspace(0.0, np.arcsinh(v_max / d), n + 1)
    v = d * np.sinh(eta)
    v[-1] = v_max
    return v


def _central(x):
    """Three-point central weights for first and second derivatives at interior points."""
    h0 = np.diff(x)[:-1]  # x_i - x_{i-1}
    h1 = np.diff(x)[1:]  # x_{i+1} - x_i
    first = np.stack([-h1 / (h0 * (h0 + h1)), (h1 - h0) / (h0 * h1), h0 / (h1 * (h0 + h1))], axis=1)
    second = np.stack([2 / (h0 * (h0 + h1)), -2 / (h0 * h1), 2 / (h1 * (h0 + h1))], axis=1)
    return first, second


def _forward(x, i):
    """Second-order one-sided weights on ``x_i, x_{i+1}, x_{i+2}`` for the first derivative."""
    a, b = x[i + 1] - x[i], x[i + 2] - x[i + 1]
    return np.array([-(2 * a + b) / (a * (a + b)), (a + b) / (a * b), -a / (b * (a + b))])


def _backward(x, i):
    """Second-order one-sided weights on ``x_{i-2}, x_{i-1}, x_i`` for the first derivative."""
    a, b = x[i] - x[i - 1], x[i - 1] - x[i - 2]
    return np.array([a / (b * (a + b)), -(a + b) / (a * b), (2 * a + b) / (a * (a + b))])


@dataclass(frozen=True)
class Operators:
    """The split operator on one grid, state stored as ``u[j, i]`` (variance j, spot i).

    ``a1`` and ``a2`` are held as diagonals ``{offset: coefficients}`` in the
    orderings where they are banded (spot fastest for ``a1``, variance fastest
    for ``a2``); ``a0`` is a sparse matrix in the spot-fastest ordering.
    """

    s: np.ndarray
    v: np.ndarray
    a0: sp.csr_matrix
    a1: dict
    a2: dict
    m1: sp.csr_matrix
    m2: sp.csr_matrix
    fixed: np.ndarray  # boolean mask (nv, ns): Dirichlet points, no equation


def _diag_matrix(diags: dict, n: int) -> sp.csr_matrix:
    offsets = sorted(diags)
    values = [diags[k][: n - k] if k >= 0 else diags[k][-k:] for k in offsets]
    return sp.diags(values, offsets, shape=(n, n), format="csr")


def build_operators(s, v, params, rate, div_yield, fixed_low, fixed_high):
    """Assemble ``A0``, ``A1``, ``A2`` on the grid ``s`` x ``v``.

    Parameters
    ----------
    s, v : ndarray
        Spot and variance grids (``v[0] = 0``).
    params : HestonParams
    rate, div_yield : float
    fixed_low, fixed_high : bool
        Whether the first / last spot line is a Dirichlet barrier line.
        When ``fixed_high`` is False the last line carries ``u_ss = 0``.
    """
    ns, nv = s.size, v.size
    kappa, theta, sig, rho = params.kappa, params.theta, params.vol_of_vol, params.rho
    drift = rate - div_yield
    fixed = np.zeros((nv, ns), dtype=bool)
    if fixed_low:
        fixed[:, 0] = True
    if fixed_high:
        fixed[:, -1] = True

    # ---- A1: spot direction, spot-fastest ordering, offsets -2..1
    c1 = {k: np.zeros((nv, ns)) for k in (-2, -1, 0, 1)}
    first, second = _central(s)
    si = s[1:-1]
    conv = drift * si
    for k in (-1, 0, 1):
        c1[k][:, 1:-1] = 0.5 * si**2 * v[:, None] * second[:, k + 1] + conv * first[:, k + 1]
    c1[0] += -0.5 * rate
    if not fixed_high:
        # u_ss = 0 at s_max: convection only, one-sided backward u_s
        back = _backward(s, ns - 1)
        for k, w in zip((-2, -1, 0), back, strict=True):
            c1[k][:, -1] = drift * s[-1] * w
        c1[0][:, -1] += -0.5 * rate
    # s = 0 (first line, not fixed): only the reaction half, already set
    for k in c1:
        c1[k][fixed] = 0.0

    # ---- A2: variance direction, variance-fastest ordering (c2[k][i, j]), offsets -2..2
    c2 = {k: np.zeros((ns, nv)) for k in (-2, -1, 0, 1, 2)}
    vf, vs = _central(v)
    vi = v[1:-1]
    mean_pull = kappa * (theta - vi)
    central = vi <= UPWIND_FROM
    for k in (-1, 0, 1):
        c2[k][:, 1:-1] = 0.5 * sig**2 * vi * vs[:, k + 1] + np.where(
            central, mean_pull * vf[:, k + 1], 0.0
        )
    for j in np.flatnonzero(~central) + 1:
        for k, w in zip((-2, -1, 0), _backward(v, j), strict=True):
            c2[k][:, j] += kappa * (theta - v[j]) * w
    # v = 0: the PDE itself, kappa theta u_v with forward one-sided weights
    for k, w in zip((0, 1, 2), _forward(v, 0), strict=True):
        c2[k][:, 0] = kappa * theta * w
    # v = v_max: Neumann u_v = 0 through a mirrored ghost point
    h = v[-1] - v[-2]
    c2[-1][:, -1] = sig**2 * v[-1] / h**2
    c2[0][:, -1] = -(sig**2) * v[-1] / h**2
    c2[0] += -0.5 * rate
    for k in c2:
        c2[k][fixed.T] = 0.0

    # ---- A0: mixed term, interior points only, spot-fastest ordering
    rows, cols, vals = [], [], []
    grid_j, grid_i = np.meshgrid(np.arange(1, nv - 1), np.arange(1, ns - 1), indexing="ij")
    coef = rho * sig * s[grid_i] * v[grid_j]
    live = ~fixed[grid_j, grid_i]
    for a in (-1, 0, 1):
        for b in (-1, 0, 1):
            w = coef * first[grid_i - 1, a + 1] * vf[grid_j - 1, b + 1]
            rows.append((grid_j * ns + grid_i)[live])
            cols.append(((grid_j + b) * ns + grid_i + a)[live])
            vals.append(w[live])
    n = ns * nv
    a0 = sp.csr_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n)
    )
    flat1 = {k: c.ravel() for k, c in c1.items()}
    flat2 = {k: c.ravel() for k, c in c2.items()}
    return Operators(s, v, a0, flat1, flat2, _diag_matrix(flat1, n), _diag_matrix(flat2, n), fixed)
