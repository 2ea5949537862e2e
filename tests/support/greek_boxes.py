"""Seeded Heston cases for the Fourier Greeks' tests (test data, not market data)."""

import math

import numpy as np

from rootvar.core import HestonParams


def greek_box(seed, count, hard):
    """Seeded cases ``(params, spot, strike, maturity, rate, div_yield, kind)``, spot 100.

    The strike sits ``z`` standard deviations of the log-price from the spot.  The
    ordinary box is a desk's range; the hard box reaches tiny variances, a day's
    maturity, ten years, vol_of_vol 2, rho -0.99 and strikes 4 sd away.
    """
    rng = np.random.default_rng(seed)
    for i in range(count):
        if hard:
            p = HestonParams(
                float(np.exp(rng.uniform(np.log(1e-3), np.log(0.3)))),
                rng.uniform(0.05, 6.0),
                rng.uniform(0.005, 0.2),
                rng.uniform(0.05, 2.0),
                rng.uniform(-0.99, 0.9),
            )
            t = float(np.exp(rng.uniform(np.log(1 / 365), np.log(10.0))))
            z = rng.uniform(-4.0, 4.0)
        else:
            p = HestonParams(
                rng.uniform(0.01, 0.16),
                rng.uniform(0.3, 4.0),
                rng.uniform(0.01, 0.16),
                rng.uniform(0.1, 1.2),
                rng.uniform(-0.95, 0.5),
            )
            t = float(np.exp(rng.uniform(np.log(0.05), np.log(5.0))))
            z = rng.uniform(-2.0, 2.0)
        strike = 100.0 * math.exp(z * math.sqrt(p.theta * t))
        rate, q = rng.uniform(-0.01, 0.06), rng.uniform(0.0, 0.04)
        yield p, 100.0, strike, t, rate, q, ("call", "put")[i % 2]
