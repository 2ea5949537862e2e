"""Monte Carlo schemes for the Heston variance: data plus one pure step each.

Every scheme advances the variance of a batch of paths by one step of
length ``dt`` and keeps, for the log-price, the integrated variance
``I ~ int v dt`` and the variance martingale part ``M ~ int sqrt(v) dW_v``.
The engine (:mod:`rootvar.core.montecarlo.european`) then forms the log-price in one
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

A scheme is data: a kind, the Euler maps, and the constants its step needs
(:func:`kernel_constants`); the step itself is compiled, one per kind, in
:mod:`rootvar.core.montecarlo.kernels`, following the formulas given here.  Adding
a scheme touches this module, the :data:`SCHEMES` registry and, for a new
kind, the kernel.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rootvar.core.montecarlo.kernels import ABS, EULER, EXACT, POS, QE, QE_MARTINGALE, SAME

__all__ = ["EULER_SCHEMES", "SCHEMES", "SchemeInfo", "kernel_constants"]

#: Andersen's (2008) switching level of psi between the two QE branches.
PSI_C = 1.5


@dataclass(frozen=True)
class SchemeInfo:
    """A registered scheme."""

    label: str  # published name
    reference: str
    kind: int  # kernel: EULER, QE, QE_MARTINGALE or EXACT
    fmap: tuple = (SAME, SAME, SAME)  # Euler f1, f2, f3 (Lord et al. 2010, Table 1)
    euler: bool = False


def kernel_constants(info: SchemeInfo, p, dt: float) -> np.ndarray:
    """The numbers one step of ``info``'s kernel needs, at step ``dt`` (years).

    Entries 0-3 are ``dt, kappa, theta, vol_of_vol``; the rest by kind:

    * Euler, in the unified form of Lord, Koekkoek & van Dijk (2010), eq. (7),
      ``v' = f1(v) + kappa dt (theta - f2(v)) + sigma sqrt(f3(v) dt) Z`` with
      ``f3(v)`` the variance seen by the log-price: ``kappa dt, sqrt(dt),
      sigma sqrt(dt)``.
    * QE (Andersen 2008, eqs. 17-29, written with ``r = 2 / psi``): with ``m``
      and ``s^2`` the exact conditional mean and variance of ``v(t + dt)``,
      quadratic branch (``psi <= psi_c``) ``v' = m (b + Z)^2 / (1 + b^2)``,
      ``b^2 = r - 1 + sqrt(r (r - 1))``; exponential branch
      ``v' = m q max(0, -ln(q (1 - U)))`` with ``q = 1 / r + 1/2``.  One normal
      and one uniform are drawn per path and step, used or not (Andersen uses
      one uniform for both; the branch is fixed by ``v`` before the draw, so
      the law is the same).  Constants: ``e^{-kappa dt}``, ``theta (1 - e)``,
      ``s^2 / 2 = half_c1 v + half_c2``, ``r_c = 2 / psi_c``; with the
      martingale correction (eqs. 33, 36-37, ``gamma1 = gamma2 = 1/2``) also
      ``K0``, ``A = K2 + K4 / 2`` and ``K1 + K3 / 2``.
    * exact variance sampling (Broadie & Kaya 2006): ``v' = c chi'^2_d(v e / c)``
      with ``c = sigma^2 (1 - e) / (4 kappa)``, ``d = 4 kappa theta / sigma^2``:
      ``e, c, d, e / c``.
    """
    head = [dt, p.kappa, p.theta, p.vol_of_vol]
    e = np.exp(-p.kappa * dt)
    if info.kind == EULER:
        sq_dt = np.sqrt(dt)
        return np.array([*head, p.kappa * dt, sq_dt, p.vol_of_vol * sq_dt])
    if info.kind == EXACT:
        c = p.vol_of_vol**2 * (1.0 - e) / (4.0 * p.kappa)
        return np.array([*head, e, c, 4.0 * p.kappa * p.theta / p.vol_of_vol**2, e / c])
    s2 = p.vol_of_vol**2
    half_c1 = 0.5 * s2 * e * (1.0 - e) / p.kappa
    half_c2 = 0.25 * p.theta * s2 * (1.0 - e) ** 2 / p.kappa
    rho, sig = p.rho, p.vol_of_vol
    k0 = -rho * p.kappa * p.theta * dt / sig
    k1 = 0.5 * dt * (p.kappa * rho / sig - 0.5) - rho / sig
    k2 = 0.5 * dt * (p.kappa * rho / sig - 0.5) + rho / sig
    k3 = k4 = 0.5 * dt * (1.0 - rho * rho)
    qe = [e, p.theta * (1.0 - e), half_c1, half_c2, 2.0 / PSI_C]
    return np.array([*head, *qe, k0, k2 + 0.5 * k4, k1 + 0.5 * k3])


_LKVD = "Lord, Koekkoek & van Dijk (2010), Quantitative Finance 10(2)"
_ANDERSEN = "Andersen (2008), J. Computational Finance 11(3)"
_BK = "Broadie & Kaya (2006), Operations Research 54(2)"

SCHEMES: dict[str, SchemeInfo] = {
    "euler_absorb": SchemeInfo("Euler, absorption", _LKVD, EULER, (POS, POS, POS), euler=True),
    "euler_reflect": SchemeInfo("Euler, reflection", _LKVD, EULER, (ABS, ABS, ABS), euler=True),
    "euler_partial": SchemeInfo(
        "Euler, partial truncation", _LKVD, EULER, (SAME, SAME, POS), euler=True
    ),
    "euler_full": SchemeInfo("Euler, full truncation", _LKVD, EULER, (SAME, POS, POS), euler=True),
    "qe": SchemeInfo("quadratic-exponential", _ANDERSEN, QE),
    "qe_martingale": SchemeInfo(
        "quadratic-exponential, martingale-corrected", _ANDERSEN, QE_MARTINGALE
    ),
    "exact_variance": SchemeInfo(
        "exact variance sampling, trapezoid integrated variance", _BK, EXACT
    ),
}

EULER_SCHEMES = tuple(k for k, s in SCHEMES.items() if s.euler)
