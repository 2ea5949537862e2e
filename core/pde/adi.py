"""ADI time stepping for the split Heston operator of :mod:`rootvar.core.pde.grid`.

Schemes (in 't Hout & Foulon 2010, sec. 4), with ``A = A0 + A1 + A2`` and
``Y_j = Y_{j-1} + theta dt A_j (Y_j - U)`` solved line by line:

* ``"hv"``, Hundsdorfer-Verwer, ``theta = 1/2 + sqrt(3)/6``;
* ``"mcs"``, modified Craig-Sneyd, ``theta = 1/3``.

Damped start: after the payoff (and after every discrete knock, which puts a
new jump into the solution) the first ``damping`` steps are each replaced by
two half steps of the Douglas scheme with ``theta = 1``, an ADI form of
backward Euler, in the manner of Rannacher (1984).  Without it, the
non-smooth payoff excites the weakly damped high frequencies of the
second-order schemes.

The implicit systems ``(I - c A1)`` and ``(I - c A2)`` are banded in the
spot-fastest and variance-fastest orderings; each is LU-factored once per
step size by LAPACK ``dgbtrf`` (through scipy) and reused.

References
----------
in 't Hout, K. J. & Foulon, S. (2010). ADI finite difference schemes for
option pricing in the Heston model with correlation. Int. J. Numer. Anal.
Model. 7(2), 303-320.
Hundsdorfer, W. & Verwer, J. G. (2003). Numerical Solution of
Time-Dependent Advection-Diffusion-Reaction Equations. Springer.
Rannacher, R. (1984). Finite element solution of diffusion problems with
irregular data. Numer. Math. 43, 309-327.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import lapack

__all__ = ["SCHEMES", "march"]

SCHEMES = {"hv": 0.5 + np.sqrt(3.0) / 6.0, "mcs": 1.0 / 3.0}


class _BandedSolver:
    """``(I - c M) x = b`` for a banded ``M`` given as ``{offset: coefficients}``."""

    def __init__(self, diags: dict, c: float):
        n = next(iter(diags.values())).size
        kl = -min(diags)
        ku = max(diags)
        ab = np.zeros((2 * kl + ku + 1, n))  # LAPACK layout with room for the pivots
        for k, coef in diags.items():
            row = kl + ku - k
            values = -c * coef
            if k == 0:
                values = 1.0 + values
            if k >= 0:
                ab[row, k:] = values[: n - k]
            else:
                ab[row, : n + k] = values[-k:]
        self.lu, self.piv, info = lapack.dgbtrf(ab, kl, ku)
        if info != 0:  # a zero pivot: the step is not solvable as posed
            raise ArithmeticError(f"banded LU failed (info {info})")
        self.kl, self.ku = kl, ku

    def __call__(self, rhs: np.ndarray) -> np.ndarray:
        x, _ = lapack.dgbtrs(self.lu, self.kl, self.ku, rhs, self.piv)
        return x


class _Stepper:
    def __init__(self, ops):
        self.ops = ops
        self.nv, self.ns = ops.v.size, ops.s.size
        self._solvers = {}

    def _vfast(self, u):
        return u.reshape(self.nv, self.ns).T.ravel()

    def _sfast(self, w):
        return w.reshape(self.ns, self.nv).T.ravel()

    def parts(self, u):
        a0 = self.ops.a0 @ u
        a1 = self.ops.m1 @ u
        a2 = self._sfast(self.ops.m2 @ self._vfast(u))
        return a0, a1, a2

    def solvers(self, c):
        if c not in self._solvers:
            self._solvers[c] = (_BandedSolver(self.ops.a1, c), _BandedSolver(self.ops.a2, c))
        return self._solvers[c]

    def _lines(self, y0, c, a1, a2):
        """The two implicit line sweeps shared by every scheme."""
        solve1, solve2 = self.solvers(c)
        y1 = solve1(y0 - c * a1)
        return self._sfast(solve2(self._vfast(y1) - c * self._vfast(a2)))

    def douglas(self, u, dt, theta=1.0):
        p0, p1, p2 = self.parts(u)
        return self._lines(u + dt * (p0 + p1 + p2), theta * dt, p1, p2)

    def _douglas_stage(self, u, dt, theta):
        """Explicit predictor and line sweeps shared by both schemes; the parts at both ends."""
        p0, p1, p2 = self.parts(u)
        f0 = p0 + p1 + p2
        y0 = u + dt * f0
        q = self.parts(self._lines(y0, theta * dt, p1, p2))
        return (p0, p1, p2), f0, y0, q

    def hv(self, u, dt):
        theta = SCHEMES["hv"]
        _, f0, y0, (q0, q1, q2) = self._douglas_stage(u, dt, theta)
        z0 = y0 + 0.5 * dt * (q0 + q1 + q2 - f0)
        return self._lines(z0, theta * dt, q1, q2)

    def mcs(self, u, dt):
        theta = SCHEMES["mcs"]
        (p0, p1, p2), f0, y0, (q0, q1, q2) = self._douglas_stage(u, dt, theta)
        z0 = y0 + theta * dt * (q0 - p0) + (0.5 - theta) * dt * (q0 + q1 + q2 - f0)
        return self._lines(z0, theta * dt, p1, p2)


def march(ops, u, pieces, scheme, damping, knock=None):
    """Step ``u`` (spot-fastest, shape ``(nv * ns,)``) backwards through ``pieces``.

    Parameters
    ----------
    ops : Operators
    u : ndarray
        Values at ``tau = 0`` (expiry), knocked already if a monitoring date
        falls on expiry.
    pieces : list of (float, int)
        Consecutive time intervals (years) and their number of equal steps; a
        discrete knock is applied at the end of every piece but the last.
    scheme : {"hv", "mcs"}
    damping : int
        Damped steps at the start of every piece.
    knock : callable or None
        ``knock(u)`` returns the values after a monitoring date.

    Returns
    -------
    ndarray
        Values at ``tau = T`` (today).
    """
    stepper = _Stepper(ops)
    step = getattr(stepper, scheme)
    u = np.array(u, dtype=float)
    for index, (length, steps) in enumerate(pieces):
        dt = length / steps
        for n in range(steps):
            if n < damping:
                u = stepper.douglas(stepper.douglas(u, 0.5 * dt), 0.5 * dt)
            else:
                u = step(u, dt)
        if knock is not None and index < len(pieces) - 1:
            u = knock(u)
    return u
