"""Fourier surface (10 maturities x 101 strikes): COS against one-at-a-time quad."""

from __future__ import annotations

import time

import numpy as np
from scipy import integrate

from rootvar.core import HestonParams, heston_price, heston_price_details, lewis_call_price

from .timing import median_seconds, show

CASES = {
    "Andersen (2008) case I": HestonParams(0.04, 0.5, 0.04, 1.0, -0.9),
    "Fang & Oosterlee (2008)": HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711),
}


def _plain_quad_call(p, spot, strike, t):
    """Straightforward baseline: Heston (1993) P1/P2 integrals, scipy quad, one price."""

    def cf(u):
        xi = p.kappa - p.rho * p.vol_of_vol * 1j * u
        d = np.sqrt(xi * xi + p.vol_of_vol**2 * (u * u + 1j * u))
        g = (xi - d) / (xi + d)
        e = np.exp(-d * t)
        c = p.kappa * p.theta / p.vol_of_vol**2 * ((xi - d) * t - 2 * np.log((1 - g * e) / (1 - g)))
        return np.exp(c + p.v0 * (xi - d) / p.vol_of_vol**2 * (1 - e) / (1 - g * e))

    k = np.log(strike / spot)
    p1 = integrate.quad(
        lambda u: (np.exp(-1j * u * k) * cf(u - 1j) / (1j * u)).real, 0, 500, limit=500
    )[0]
    p2 = integrate.quad(lambda u: (np.exp(-1j * u * k) * cf(u) / (1j * u)).real, 0, 500, limit=500)[
        0
    ]
    return spot * (0.5 + p1 / np.pi) - strike * (0.5 + p2 / np.pi)


def run() -> None:
    maturities = np.geomspace(0.25, 20.0, 10)[:, None]
    strikes = np.linspace(30.0, 300.0, 101)
    for name, p in CASES.items():
        print(f"  -- {name}")
        sample = [(k, t) for t in maturities[::3, 0] for k in strikes[::25]]
        start = time.perf_counter()
        for k, t in sample:
            _plain_quad_call(p, 100.0, k, t)
        per_price = (time.perf_counter() - start) / len(sample)
        base = per_price * strikes.size * maturities.size
        show(f"baseline: quad, one price at a time ({len(sample)} timed, scaled)", base)
        ours = median_seconds(
            lambda p=p: heston_price(p, 100.0, strikes, maturities, method="cos"), repeats=9
        )
        show("heston_price (COS, certified), whole surface", ours, base)
        auto = median_seconds(lambda p=p: heston_price(p, 100.0, strikes, maturities), repeats=9)
        show("heston_price (default route: contour per maturity), whole surface", auto, base)
        print("     (issue targets: 5 ms for the surface, 200x the quad baseline; routes side by")
        print("      side, one price and further strikes: python -m benchmarks contour)")
        details = heston_price_details(p, 100.0, strikes, maturities, method="cos")
        print(
            f"     COS terms per maturity: {sorted(details.terms.values())}, "
            f"fallbacks {details.fallbacks}"
        )
        check = np.vstack([lewis_call_price(p, 100.0, strikes, float(t)) for t in maturities[:, 0]])
        err = np.max(np.abs(details.price - check))
        print(
            f"     max |COS - adaptive check| over the surface: {err:.2e} (x spot {err / 100:.1e})"
        )
