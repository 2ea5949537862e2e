"""Grids and finite-difference operators for the Heston PDE in (log-spot, variance).

The solver of :mod:`rootvar.core.pde.solver` works backwards in time to expiry
``tau = T - t``, in ``x = ln s``, on

.. math:: u_\\tau = \\tfrac12 v u_{xx} + \\rho\\sigma v u_{xv}
          + \\tfrac12\\sigma^2 v u_{vv} + (r - q - \\tfrac12 v) u_x
          + \\kappa(\\theta - v) u_v - r u,

split as ``A = A0 + A1 + A2``: ``A0`` the mixed term, ``A1`` every
``x``-term with half of ``-r u``, ``A2`` every ``v``-term with the other half
(in 't Hout & Foulon 2010, sec. 2).  Grids are given in the spot; the
differences are taken in ``x``.

Why log-spot: the mixed term's coefficient is ``rho sigma v``, with no spot
factor, so the seven-point mixed stencil below has non-negative weights where
``|rho| sigma dx <= dv <= sigma dx / |rho|`` -- a condition on the grid
aspect alone.  In the spot itself the same condition reads
``|rho| sigma ds / s <= dv``, which fails on every spot line near ``s = 0``
(``ds / s = 1`` on the first), and the nine-point stencil used there before
undershot the no-arbitrage bounds by up to 0.048 (Andersen case I).

Boundary treatment, edge by edge (none needs data that change in time):

* ``s = s_min`` and ``s = s_max`` (no barrier there): ``u_ss = 0`` (the value
  is linear in the spot far out: a call's is nearly 0 at ``s_min`` and
  ``s e^{-q tau} - K e^{-r tau}`` at ``s_max``, a put's the reverse).  In
  ``x`` this is ``u_xx = u_x``, so the line keeps ``(r - q) u_x - r u`` with a
  one-sided second-order ``u_x``, and no mixed term.
* continuous barrier (``s = B``, the first or last grid line): Dirichlet,
  ``u = rebate`` (the rebate is paid at the hit); the line has no equation.
* ``v = 0``: the PDE itself, which degenerates there to
  ``u_tau = (r - q) u_x + kappa theta u_v - r u``, with a one-sided
  (forward, second-order) ``u_v``; no boundary condition is invented, whether
  or not the Feller condition holds.
* ``v = v_max``: homogeneous Neumann ``u_v = 0`` (the value stops depending
  on the variance far out); the mixed term is dropped on that line.

Interior derivatives are the three-point central formulas on the
non-uniform grid, except ``u_v`` where ``v > 1``: there the drift
``kappa (theta - v)`` dominates and the backward (upwind) three-point formula
is used, as in in 't Hout & Foulon (2010), sec. 3.  The mixed derivative is
the seven-point stencil whose diagonal pair lies along the correlation
(``(i+1, j-1), (i-1, j+1)`` for ``rho < 0``); it is second order on smooth
grids, like the nine-point one.

References
----------
in 't Hout, K. J. & Foulon, S. (2010). ADI finite difference schemes for
option pricing in the Heston model with correlation. Int. J. Numer. Anal.
Model. 7(2), 303-320.
Bonnans, J. F. & Zidani, H. (2003). Consistency of generalized finite
difference schemes for the stochastic HJB equation. SIAM J. Numer. Anal.
41(3), 1008-1021 (when a compact stencil for a mixed derivative can have
non-negative weights).
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
    """Spot grid on ``[low, high]`` (``low > 0``), uniform-like in ``ln s``, dense at ``centres``.

    In ``x = ln s`` the density is ``sum_k 1 / sqrt(1 + ((x - ln c_k) / width)^2)``
    (``width`` a share of the spot, e.g. 0.05 for 5%); its integral ``F`` (a
    sum of ``asinh``) is split at ``low``, ``nodes`` and ``high``, and each
    piece receives a number of equal steps in ``F`` proportional to its length,
    rounded up to a multiple of ``multiple``.  So every point of ``nodes``
    (strike, barrier) is a grid point, and taking every ``multiple``-th point
    of the grid gives the same kind of grid, coarser.

    Returns
    -------
    ndarray
        Increasing spot grid points, ``low``, ``high`` and ``nodes`` exactly included.
    """
    exact = np.concatenate([[low, high], nodes])
    centres = np.log(np.asarray(centres, dtype=float))
    low, high, nodes = np.log(low), np.log(high), np.log(np.asarray(nodes, dtype=float))

    def big_f(x):
        return np.sum(width * np.arcsinh((np.asarray(x)[..., None] - centres) / width), axis=-1)

    cuts = np.unique(np.clip(np.concatenate([[low, high], nodes]), low, high))
    lengths = np.diff(big_f(cuts))
    # the guard keeps equal pieces (symmetric in ln s) from rounding up on a last-bit excess
    share = count * lengths / lengths.sum() / multiple
    steps = np.maximum(multiple, multiple * np.ceil(share - 1e-9))
    # a fine table of F inverts the monotone map by interpolation
    table_x = np.linspace(low, high, 20001)
    table_f = big_f(table_x)
    pieces = []
    for a, b, n in zip(cuts[:-1], cuts[1:], steps.astype(int), strict=True):
        f = np.linspace(big_f(a), big_f(b), n + 1)
        x = np.interp(f, table_f, table_x)
        x[0], x[-1] = a, b
        pieces.append(x[:-1])
    s = np.exp(np.concatenate([*pieces, [high]]))
    # the edges, strike and barrier exactly on grid points, not one rounding away
    for level in exact:
        s[np.argmin(np.abs(s - level))] = level
    return s


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


def _mixed_weights(x, v, rho):
    """Seven-point weights of ``u_xv`` at the interior points.

    The mean of two one-sided cross differences ``D^x_a D^v_b`` whose corners
    ``(a, b)`` lie along the correlation: ``(+1, -1)`` and ``(-1, +1)`` when
    ``rho < 0``, ``(+1, +1)`` and ``(-1, -1)`` otherwise.  So the two diagonal
    weights of ``rho sigma v u_xv`` are non-negative, and the four axis
    weights are negative; the axis weights of ``A1`` and ``A2`` outweigh them
    where ``|rho| sigma dx <= dv <= sigma dx / |rho|``.

    Returns
    -------
    dict
        ``{(a, b): w}`` with ``w[j - 1, i - 1]`` the weight of ``u[j + b, i + a]``
        at interior point ``(j, i)``.
    """
    hxm, hxp = np.diff(x)[:-1][None, :], np.diff(x)[1:][None, :]
    hvm, hvp = np.diff(v)[:-1][:, None], np.diff(v)[1:][:, None]
    sign = -1 if rho < 0 else 1
    weights = {}
    for a, hx in ((1, hxp), (-1, hxm)):
        b = sign * a
        hv = hvp if b > 0 else hvm
        # D^x_a D^v_b u = a b (u[a, b] - u[a, 0] - u[0, b] + u[0, 0]) / (hx hv)
        g = 0.5 * a * b / (hx * hv)
        for key, s in (((a, b), 1.0), ((a, 0), -1.0), ((0, b), -1.0), ((0, 0), 1.0)):
            weights[key] = weights.get(key, 0.0) + s * g
    shape = (v.size - 2, x.size - 2)
    return {k: np.broadcast_to(w, shape) for k, w in weights.items()}


def build_operators(s, v, params, rate, div_yield, fixed_low, fixed_high):
    """Assemble ``A0``, ``A1``, ``A2`` on the grid ``s`` x ``v`` (differences in ``x = ln s``).

    Parameters
    ----------
    s, v : ndarray
        Spot (``s[0] > 0``) and variance grids (``v[0] = 0``).
    params : HestonParams
    rate, div_yield : float
    fixed_low, fixed_high : bool
        Whether the first / last spot line is a Dirichlet barrier line.
        Otherwise that line carries ``u_ss = 0``.
    """
    ns, nv = s.size, v.size
    x = np.log(s)
    kappa, theta, sig, rho = params.kappa, params.theta, params.vol_of_vol, params.rho
    drift = rate - div_yield
    fixed = np.zeros((nv, ns), dtype=bool)
    if fixed_low:
        fixed[:, 0] = True
    if fixed_high:
        fixed[:, -1] = True

    # ---- A1: log-spot direction, spot-fastest ordering, offsets -2..2
    c1 = {k: np.zeros((nv, ns)) for k in (-2, -1, 0, 1, 2)}
    first, second = _central(x)
    conv = drift - 0.5 * v[:, None]
    for k in (-1, 0, 1):
        c1[k][:, 1:-1] = 0.5 * v[:, None] * second[:, k + 1] + conv * first[:, k + 1]
    c1[0] += -0.5 * rate
    # u_ss = 0 on an open edge: 0.5 v (u_xx - u_x) vanishes, the drift (r - q) u_x stays,
    # one-sided second-order u_x
    if not fixed_high:
        for k, w in zip((-2, -1, 0), _backward(x, ns - 1), strict=True):
            c1[k][:, -1] += drift * w
    if not fixed_low:
        for k, w in zip((0, 1, 2), _forward(x, 0), strict=True):
            c1[k][:, 0] += drift * w
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

    # ---- A0: mixed term rho sigma v u_xv, interior points only, spot-fastest ordering
    rows, cols, vals = [], [], []
    grid_j, grid_i = np.meshgrid(np.arange(1, nv - 1), np.arange(1, ns - 1), indexing="ij")
    coef = rho * sig * v[grid_j]
    live = ~fixed[grid_j, grid_i]
    for (a, b), w in _mixed_weights(x, v, rho).items():
        rows.append((grid_j * ns + grid_i)[live])
        cols.append(((grid_j + b) * ns + grid_i + a)[live])
        vals.append((coef * w)[live])
    n = ns * nv
    a0 = sp.csr_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n)
    )
    flat1 = {k: c.ravel() for k, c in c1.items()}
    flat2 = {k: c.ravel() for k, c in c2.items()}
    return Operators(s, v, a0, flat1, flat2, _diag_matrix(flat1, n), _diag_matrix(flat2, n), fixed)
