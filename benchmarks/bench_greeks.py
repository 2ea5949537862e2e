"""Fourier Greeks of one option against its price: all eleven Greeks in one call, both routes.

Every figure is a median of calls taking turns in blocks in the same run (the
shared machine drifts within minutes), at a fresh maturity: call ``i`` prices
at ``T (1 + 1e-7 i)``, which no call has seen, so no per-maturity cache (the
contour's node tables, the COS series and its range) helps.  "Greeks" is
``heston_greeks``'s default route (the contour for one option), "price"
``heston_price``'s (the contour too), "COS Greeks" ``method="cos"``.

``python -m benchmarks greeks``.
"""

from __future__ import annotations

import os
import statistics
import time

from rootvar.core import HestonParams, heston_greeks, heston_price

CASES = {
    "Fang & Oosterlee (2008)": HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711),
    "Andersen (2008) case I": HestonParams(0.04, 0.5, 0.04, 1.0, -0.9),
}
MATURITIES = (1.0, 10.0)
SPOT, STRIKE, RATE, DIV = 100.0, 105.0, 0.02, 0.01
REPEATS = 200
#: The issue's target: all Greeks of one option at most this many times its price.
TARGET = 3.0


def _paired(funcs, repeats, block=10):
    """Median seconds of each ``func(i)``, the functions taking turns in blocks of ``block``."""
    for f in funcs:
        f(0)
    times = [[] for _ in funcs]
    i = 0
    while len(times[0]) < repeats:
        for f, kept in zip(funcs, times, strict=True):
            for j in range(i + 1, i + 1 + block):
                start = time.perf_counter()
                f(j)
                kept.append(time.perf_counter() - start)
        i += block
    return [statistics.median(kept) for kept in times]


def _route(g):
    return "contour" if "contour" in g.estimators["delta"] else "COS"


def run() -> None:
    print(
        f"  one option, strike {STRIKE:g}, rate {RATE:.0%}, dividend {DIV:.0%}, fresh maturity;"
        f" medians of {REPEATS} calls in us, alternated in blocks of 10;"
        f" load average {os.getloadavg()[0]:.2f} at the start"
    )
    print(
        f"  {'case':<26s} {'T':>5s} {'route':>8s} {'Greeks':>8s} {'price':>8s}"
        f" {'/price':>7s} {'COS Greeks':>11s} {'/price':>7s} {'target':>8s}"
    )
    for name, p in CASES.items():
        for t in MATURITIES:

            def greeks(i, p=p, t=t):
                return heston_greeks(p, SPOT, STRIKE, t * (1 + 1e-7 * i), RATE, DIV)

            def price(i, p=p, t=t):
                return heston_price(p, SPOT, STRIKE, t * (1 + 1e-7 * i), RATE, DIV)

            def cos_greeks(i, p=p, t=t):
                when = t * (1 + 1e-7 * i)
                return heston_greeks(p, SPOT, STRIKE, when, RATE, DIV, method="cos")

            route = _route(greeks(0))
            g, pr, cos = _paired([greeks, price, cos_greeks], REPEATS)
            verdict = "met" if g / pr <= TARGET else "not met"
            print(
                f"  {name:<26s} {t:5.1f} {route:>8s} {g * 1e6:8.1f} {pr * 1e6:8.1f}"
                f" {g / pr:6.2f}x {cos * 1e6:11.1f} {cos / pr:6.1f}x {verdict:>8s}"
            )
    print(f"  load average {os.getloadavg()[0]:.2f} at the end")
    print(f"     (issue target: all Greeks of one option at most {TARGET:g}x its price)")
