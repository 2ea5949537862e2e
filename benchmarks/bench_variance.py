"""Exact-law table (10 horizons x 99 quantiles) and the Euler probability on a 1000 x 1000 grid."""

from __future__ import annotations

import numpy as np
from scipy import stats

from rootvar.core import HestonParams, cir_transition, euler_negative_probability, variance_report

from .timing import median_seconds, show


def run() -> None:
    p = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
    horizons = np.array([0.1, 0.25, 0.5, 1, 2, 3, 5, 7, 10, 20.0])
    levels = np.linspace(0.01, 0.99, 99)

    law = cir_transition(p.v0, p.kappa, p.theta, p.vol_of_vol, horizons[:, None])
    df, nc, c = law.args

    base = median_seconds(lambda: stats.ncx2.ppf(levels, df, nc) * c)
    show("baseline: scipy.stats.ncx2.ppf, 10 x 99", base)
    ours = median_seconds(lambda: law.ppf(levels))
    show("cir_transition(...).ppf, 10 x 99 (with tail checks)", ours, base)
    rep = median_seconds(lambda: variance_report(p, horizons, quantiles=levels))
    show("variance_report, 10 horizons x 99 quantiles", rep, base)

    v = np.linspace(1e-4, 0.5, 1000)[:, None]
    dt = np.logspace(-4, 0, 1000)[None, :]

    def plain():
        drift = v + p.kappa * (p.theta - v) * dt
        return stats.norm.cdf(-drift / (p.vol_of_vol * np.sqrt(v * dt)))

    base = median_seconds(plain)
    show("baseline: scipy.stats.norm.cdf formula, 1000 x 1000", base)
    ours = median_seconds(lambda: euler_negative_probability(v, p.kappa, p.theta, p.vol_of_vol, dt))
    show("euler_negative_probability, 1000 x 1000", ours, base)
