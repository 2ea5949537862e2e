"""Monte Carlo schemes for the Heston variance: data plus one pure step each.

Every scheme advances the variance of a batch of paths by one step of
length ``dt`` and keeps, for the log-price, the integrated variance
``I ~ int v dt`` and the variance martingale part ``M ~ int sqrt(v) dW_v``.
The engine (:mod:`rootvar.core.monte_carlo`) then forms the log-price in one
way for all schemes,

    ``ln S_T = ln S_0 + (r - q) T + A - I / 2 + rho M + sqrt((1 - rho^2) I) Z``,

with ``Z`` independent of the variance path (or, with conditioning, prices by
Black-Scholes given ``I`` and ``M``).  How ``I`` and ``M`` are formed from
the simulated variance is what differs:

* Euler schemes: ``I = sum f3(v_j) dt`` and ``M = sum sqrt(f3(v_j) dt) Z_j``,
  the very increments that drove the variance (the discrete Itô sum);
* quadratic-exponential and exact variance sampling: the trapezoid rule
  ``I = dt (v_0 / 2 + v_1 + ... + v_{n-1} + v_n / 2)`` and the Broadie-Kaya
  identity ``M = (v_n - v_0 - kappa theta T + kappa I) / sigma``, exact for
  the continuous process and applied here to the simulated grid.  Per step
  this is Andersen's (2008) log-price step with ``gamma1 = gamma2 = 1/2``.
* ``A`` is zero except for the martingale-corrected QE scheme.

A scheme is a factory ``make(params, dt)`` returning ``step(v, draws, acc)``
that returns the new variance and updates the accumulator ``acc`` in place,
plus a ``finish`` rule for ``I`` and ``M``.  Adding a scheme touches this
module and the :data:`SCHEMES` registry only.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

__all__ = ["EULER_SCHEMES", "SCHEMES", "Accumulator", "SchemeInfo"]


class Accumulator:
    """Per-path running sums of one chunk of paths."""

    def __init__(self, n: int, v0: float):
        self.v0 = v0
        self.sum_v = np.zeros(n)  # trapezoid schemes: sum of v_1 .. v_n
        self.int_var = np.zeros(n)  # Euler schemes: running I
        self.mart = np.zeros(n)  # Euler schemes: running M
        self.adj = np.zeros(n)  # martingale correction A
        self.touched = np.zeros(n, dtype=bool)  # variance at or below zero at some step
        self.negative_updates = 0  # Euler: updates negative before the fix
        self.adj_failed = 0  # QE-M: path-steps where the correction does not exist


@dataclass(frozen=True)
class SchemeInfo:
    """A registered scheme."""

    label: str  # published name
    reference: str
    make: Callable  # (params, dt) -> step(v, draws, acc) -> new v
    finish: Callable  # (params, dt, steps, acc, v_final) -> (I, M)
    euler: bool = False


def _finish_euler(p, dt, steps, acc, v_final):
    return acc.int_var, acc.mart


def _finish_trapezoid(p, dt, steps, acc, v_final):
    int_var = dt * (acc.sum_v + 0.5 * (p.v0 - v_final))
    mart = (v_final - p.v0 - p.kappa * p.theta * dt * steps + p.kappa * int_var) / p.vol_of_vol
    return int_var, mart


def _euler(f1, f2, f3):
    """Euler step in the unified form of Lord, Koekkoek & van Dijk (2010), eq. (7):
    ``v~' = f1(v~) + kappa dt (theta - f2(v~)) + sigma sqrt(f3(v~) dt) Z``, and the
    variance seen by the log-price is ``f3(v~)``."""

    def make(p, dt):
        kdt, sq_dt = p.kappa * dt, np.sqrt(dt)
        sq = p.vol_of_vol * sq_dt

        def step(v, draws, acc):
            z = draws.normal()
            out = f3(v)
            root = np.sqrt(out)
            root_z = root * z
            new = f1(v) + kdt * (p.theta - f2(v)) + sq * root_z
            below = new <= 0
            acc.negative_updates += int(np.count_nonzero(new < 0))
            acc.touched |= below
            acc.int_var += out * dt
            acc.mart += sq_dt * root_z
            return new

        return step

    return make


def _pos(x):
    return np.maximum(x, 0.0)


def _same(x):
    return x


def _make_qe(p, dt, martingale=False, psi_c=1.5):
    """Andersen's (2008) quadratic-exponential step, optionally martingale-corrected.

    With ``m`` and ``s^2`` the exact conditional mean and variance of
    ``v(t + dt)`` and ``psi = s^2 / m^2``, the step works with ``r = 2 / psi``
    (Andersen, eqs. 17-29, rewritten to save divisions):

    * quadratic branch (``psi <= psi_c``): ``v' = a (b + Z)^2`` with
      ``b^2 = r - 1 + sqrt(r (r - 1))`` and ``a = m / (1 + b^2)``;
    * exponential branch (``psi > psi_c``): ``v' = 0`` with probability
      ``p = (psi - 1) / (psi + 1)``, else ``ln((1 - p) / (1 - U)) / beta`` with
      ``beta = (1 - p) / m``; with ``q = (1 + psi) / 2 = 1 / r + 1/2`` this
      is ``v' = m q max(0, -ln(q (1 - U)))``.
    """
    e = np.exp(-p.kappa * dt)
    s2 = p.vol_of_vol**2
    half_c1 = 0.5 * s2 * e * (1.0 - e) / p.kappa  # s^2 / 2 = half_c1 v + half_c2
    half_c2 = 0.25 * p.theta * s2 * (1.0 - e) ** 2 / p.kappa
    m_const = p.theta * (1.0 - e)
    r_c = 2.0 / psi_c
    rho, sig = p.rho, p.vol_of_vol
    # Andersen (2008), eq. (33) with gamma1 = gamma2 = 1/2
    k0 = -rho * p.kappa * p.theta * dt / sig
    k1 = 0.5 * dt * (p.kappa * rho / sig - 0.5) - rho / sig
    k2 = 0.5 * dt * (p.kappa * rho / sig - 0.5) + rho / sig
    k3 = k4 = 0.5 * dt * (1.0 - rho * rho)
    big_a = k2 + 0.5 * k4

    work: dict[int, list[np.ndarray]] = {}

    def step(v, draws, acc):
        # One normal for the quadratic branch and one uniform for the
        # exponential branch per path and step (Andersen uses one uniform for
        # both; the branch is fixed by v before the draw, so the law is the
        # same, and a fresh uniform is cheaper here than Phi(Z)).  Both are
        # drawn on every step, used or not: whether a block consumes draws
        # must not depend on the other blocks vectorised with it.
        z = draws.normal()
        u = draws.uniform()
        # Both branches are evaluated on every path with in-place operations
        # on reused buffers, then the exponential one is copied where
        # psi > psi_c: this loop is the hot path of every QE run; whole-array
        # passes cost about what gathering the exponential paths does and
        # keep the step free of branches (measured in an interleaved A/B run).
        if v.size not in work:
            work[v.size] = [np.empty(v.size) for _ in range(7)] + [np.empty(v.size, bool)]
        m, r, b2, q, expo, out0, out1, hot = work[v.size]
        new = out1 if v is out0 else out0  # never overwrite the input variance
        np.multiply(v, e, out=m)
        m += m_const
        np.multiply(v, half_c1, out=q)
        q += half_c2
        np.multiply(m, m, out=r)
        r /= q  # r = 2 / psi
        np.less(r, r_c, out=hot)
        # quadratic branch, psi clipped at psi_c so that it is defined
        np.maximum(r, r_c, out=b2)
        np.subtract(b2, 1.0, out=q)
        b2 *= q
        np.sqrt(b2, out=b2)
        b2 += q  # b^2
        np.sqrt(b2, out=new)
        new += z
        new *= new
        new *= m
        b2 += 1.0  # now 1 + b^2
        new /= b2
        # exponential branch
        np.divide(1.0, r, out=q)
        q += 0.5
        np.subtract(1.0, u, out=expo)
        expo *= q  # 1 - U is in (0, 1], also for mirrored draws
        np.log(expo, out=expo)
        np.negative(expo, out=expo)
        np.maximum(expo, 0.0, out=expo)
        expo *= q
        expo *= m
        np.copyto(new, expo, where=hot)
        acc.touched |= new <= 0.0
        if martingale:
            # Andersen (2008), eqs. (36)-(37): K0* replaces K0 so that
            # E[exp(dx)] = exp((r - q) dt) exactly under the QE law.
            a = m / b2
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                one = 1.0 - 2.0 * big_a * a
                k0_star = -big_a * (b2 - 1.0) * a / one + 0.5 * np.log(one)
                ok = one > 0
                idx = np.flatnonzero(hot)
                if idx.size:
                    qh = q[idx]
                    pz, beta = 1.0 - 1.0 / qh, 1.0 / (qh * m[idx])
                    k0_star[idx] = -np.log(pz + beta * (1.0 - pz) / (beta - big_a))
                    ok[idx] = beta > big_a
            k0_star -= (k1 + 0.5 * k3) * v
            ok &= np.isfinite(k0_star)
            # where the correction does not exist the step stays uncorrected
            acc.adj += np.where(ok, k0_star - k0, 0.0)
            acc.adj_failed += int(np.count_nonzero(~ok))
        acc.sum_v += new
        return new

    return step


def _make_qe_martingale(p, dt):
    return _make_qe(p, dt, martingale=True)


def _make_exact(p, dt):
    """Exact noncentral chi-square draw of v(t + dt) given v(t) (Broadie & Kaya 2006)."""
    e = np.exp(-p.kappa * dt)
    c = p.vol_of_vol**2 * (1.0 - e) / (4.0 * p.kappa)
    df = 4.0 * p.kappa * p.theta / p.vol_of_vol**2

    def step(v, draws, acc):
        new = c * draws.noncentral_chisquare(df, v * (e / c))
        acc.touched |= new <= 0
        acc.sum_v += new
        return new

    return step


_LKVD = "Lord, Koekkoek & van Dijk (2010), Quantitative Finance 10(2)"
_ANDERSEN = "Andersen (2008), J. Computational Finance 11(3)"
_BK = "Broadie & Kaya (2006), Operations Research 54(2)"

SCHEMES: dict[str, SchemeInfo] = {
    "euler_absorb": SchemeInfo(
        "Euler, absorption", _LKVD, _euler(_pos, _pos, _pos), _finish_euler, euler=True
    ),
    "euler_reflect": SchemeInfo(
        "Euler, reflection", _LKVD, _euler(np.abs, np.abs, np.abs), _finish_euler, euler=True
    ),
    "euler_partial": SchemeInfo(
        "Euler, partial truncation", _LKVD, _euler(_same, _same, _pos), _finish_euler, euler=True
    ),
    "euler_full": SchemeInfo(
        "Euler, full truncation", _LKVD, _euler(_same, _pos, _pos), _finish_euler, euler=True
    ),
    "qe": SchemeInfo("quadratic-exponential", _ANDERSEN, _make_qe, _finish_trapezoid),
    "qe_martingale": SchemeInfo(
        "quadratic-exponential, martingale-corrected",
        _ANDERSEN,
        _make_qe_martingale,
        _finish_trapezoid,
    ),
    "exact_variance": SchemeInfo(
        "exact variance sampling, trapezoid integrated variance",
        _BK,
        _make_exact,
        _finish_trapezoid,
    ),
}

EULER_SCHEMES = tuple(k for k, s in SCHEMES.items() if s.euler)
