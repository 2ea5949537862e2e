"""The two certified Fourier routes side by side: one price, a further strike, surfaces, control.

Every figure is a median of calls alternated between the routes in the same run
(the shared machine drifts within minutes), and every ratio is against COS
(``method="cos"``, the route ``heston_price`` took before the contour route
came).  "fresh maturity": each call prices at a maturity no call has seen
(``T (1 + 1e-7 i)``), so neither route's per-maturity cache helps; "further
strike": one more strike, drawn in 80-130, at a maturity whose 10-strike strip
was priced just before.  The characteristic-function evaluations are those
of the first price at a fresh maturity: the contour's own count (its alpha
search, its nodes); COS's terms (a lower bound: its range checks and the decay
grid add more).  "evaluations x cost of one" is the floor for that many
values at the cost of one compiled evaluation, measured here.

``python -m benchmarks contour``; ``ROOTVAR_BENCH_MODELS`` sets the control's
book (50 models by default, the issue's figure; 0 skips it).
"""

from __future__ import annotations

import os
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

import rootvar.core.fourier.cos as cos_route
from rootvar.core import HestonParams, contour_prices, heston_price, heston_price_details
from rootvar.core.fourier.cos_kernels import cf_array

CASES = {
    "Fang & Oosterlee (2008)": HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711),
    "Andersen (2008) case I": HestonParams(0.04, 0.5, 0.04, 1.0, -0.9),
}
SPOT = 100.0
#: The Fourier benchmark's surface (benchmarks/bench_fourier.py).
SURFACE_T = np.geomspace(0.25, 20.0, 10)
SURFACE_K = np.linspace(30.0, 300.0, 101)
#: Issue 21's targets (this machine, 2 cores).
TARGETS = {"one": 35e-6, "further": 20e-6, "case I surface": 4e-3, "FO surface": 3.6e-3}


def _paired(funcs, repeats, block=None):
    """Median seconds of each ``func(i)``, the functions taking turns in blocks.

    A block of ``block`` calls of one function, then of the next, and so on
    until each has ``repeats`` calls: each block runs as a column of cells
    would (one route's memory in the caches), and both see the same drift of
    the machine.
    """
    block = block or max(1, repeats // 10)
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


def _cf_cost():
    """Seconds per compiled characteristic-function value (a 20,000-point array)."""
    p = CASES["Andersen (2008) case I"]
    model = np.array([p.kappa, p.theta, p.vol_of_vol, p.rho, p.v0])
    omega = np.linspace(0.0, 200.0, 20_000)
    (seconds,) = _paired([lambda i: cf_array(omega, 1.0 + 1e-9 * i, model, 0.0)], 51)
    return seconds / omega.size


def _target(value, key):
    return "met" if value <= TARGETS[key] else "not met"


def _one_price(cost):
    print("  one price, K = 100, fresh maturity each call (contour: method='auto'):")
    print(
        f"    {'set':<24s}{'T':>4s} {'contour':>9s} {'COS':>9s} {'ratio':>6s}  "
        f"{'evals':>5s} {'x cost':>8s} {'COS terms':>9s}  {'|gap| x spot':>12s}  "
        f"{'+K contour':>10s} {'+K COS':>8s} {'ratio':>6s}"
    )
    worst_one = worst_further = 0.0
    draws = 80.0 + 50.0 * np.random.default_rng(7).uniform(size=1000)
    for name, p in CASES.items():
        for t in (1.0, 10.0):
            contour, cos = _paired(
                [
                    lambda i, p=p, t=t: heston_price(p, SPOT, 100.0, t * (1 + 1e-7 * i)),
                    lambda i, p=p, t=t: heston_price(
                        p, SPOT, 100.0, t * (1.5 + 1e-7 * i), method="cos"
                    ),
                ],
                401,
            )
            fresh = t * 1.01
            _, first = contour_prices(p, SPOT, 100.0, fresh)
            d_cos = heston_price_details(p, SPOT, 100.0, fresh, method="cos")
            d_auto = heston_price_details(p, SPOT, 100.0, fresh)
            gap = abs(float(d_auto.price) - float(d_cos.price)) / SPOT
            assert d_auto.route == "contour", d_auto
            # a further strike at a cached maturity: its strip priced once, then one strike
            strip = np.linspace(80.0, 125.0, 10)
            heston_price(p, SPOT, strip, t)
            heston_price(p, SPOT, strip, t, method="cos")
            further, further_cos = _paired(
                [
                    lambda i, p=p, t=t: heston_price(p, SPOT, draws[i], t),
                    lambda i, p=p, t=t: heston_price(p, SPOT, draws[i], t, method="cos"),
                ],
                401,
            )
            worst_one, worst_further = max(worst_one, contour), max(worst_further, further)
            evals = first.cf_evaluations
            print(
                f"    {name:<24s}{t:>4.0f} {contour * 1e6:>7.1f}us {cos * 1e6:>7.0f}us "
                f"{cos / contour:>5.0f}x  {evals:>5d} {evals * cost * 1e6:>6.1f}us "
                f"{int(d_cos.nodes):>9d}  {gap:>12.1e}  {further * 1e6:>8.1f}us "
                f"{further_cos * 1e6:>6.0f}us {further_cos / further:>5.0f}x"
            )
    print(
        f"    targets: one price <= 35 us ({_target(worst_one, 'one')}, worst "
        f"{worst_one * 1e6:.1f} us); further strike <= 20 us ({_target(worst_further, 'further')}, "
        f"worst {worst_further * 1e6:.1f} us)"
    )


def _surface(cost):
    print("  10 x 101 surface (0.25-20 y, strikes 30-300), one call:")
    print(
        f"    {'set':<24s} {'auto':>8s} {'COS':>8s} {'ratio':>6s}  {'cached':>8s} {'COS':>8s} "
        f"{'ratio':>6s}  {'evals/price':>11s} {'x cost':>8s} {'COS terms':>9s}  route"
    )
    for name, p in CASES.items():
        fresh, fresh_cos = _paired(
            [
                lambda i, p=p: heston_price(
                    p, SPOT, SURFACE_K, SURFACE_T[:, None] * (1 + 1e-7 * i)
                ),
                lambda i, p=p: heston_price(
                    p, SPOT, SURFACE_K, SURFACE_T[:, None] * (1.5 + 1e-7 * i), method="cos"
                ),
            ],
            21,
            block=3,
        )
        cached, cached_cos = _paired(
            [
                lambda i, p=p: heston_price(p, SPOT, SURFACE_K, SURFACE_T[:, None]),
                lambda i, p=p: heston_price(p, SPOT, SURFACE_K, SURFACE_T[:, None], method="cos"),
            ],
            21,
            block=3,
        )
        evals = sum(
            contour_prices(p, SPOT, SURFACE_K, float(t) * 1.01)[1].cf_evaluations for t in SURFACE_T
        )
        per_price = evals / SURFACE_K.size / SURFACE_T.size
        d_cos = heston_price_details(p, SPOT, SURFACE_K, SURFACE_T[:, None] * 1.01, method="cos")
        auto = heston_price_details(p, SPOT, SURFACE_K, SURFACE_T[:, None])
        routes = sorted(set(auto.route.ravel().tolist()))
        key = "case I surface" if "case I" in name else "FO surface"
        print(
            f"    {name:<24s} {fresh * 1e3:>6.2f}ms {fresh_cos * 1e3:>6.2f}ms "
            f"{fresh_cos / fresh:>5.1f}x  {cached * 1e3:>6.2f}ms {cached_cos * 1e3:>6.2f}ms "
            f"{cached_cos / cached:>5.1f}x  {per_price:>11.1f} {evals * cost * 1e3:>6.2f}ms "
            f"{sum(d_cos.terms.values()):>9d}  {'/'.join(routes)}; target "
            f"{TARGETS[key] * 1e3:.1f} ms fresh: {_target(fresh, key)}"
        )


def _control(models):
    """The control refresh with the default routes, then with every option on COS."""
    from rootvar.addin.control import refresh

    from .bench_refresh import _book

    with tempfile.TemporaryDirectory() as tmp:
        book = _book(Path(tmp), models)
        refresh(book, "2026-12-01", workers=2)  # warm: kernels loaded, the book read once
        times = {"auto": [], "COS": []}
        kept = cos_route.CONTOUR_STRIKES
        try:
            for _ in range(2):
                for label, limit in (("auto", kept), ("COS", 0)):
                    # 0: every maturity to COS (the forked workers inherit it)
                    cos_route.CONTOUR_STRIKES = limit
                    start = time.perf_counter()
                    refresh(book, "2026-12-01", workers=2)
                    times[label].append(time.perf_counter() - start)
        finally:
            cos_route.CONTOUR_STRIKES = kept
    auto, cos = min(times["auto"]), min(times["COS"])
    print(
        f"  {models}-model control, 2 workers (best of 2, alternated): auto {auto:.1f} s, "
        f"all COS {cos:.1f} s ({cos / auto:.2f}x); target 15 s for 50 models: "
        f"{'met' if auto * 50 / models <= 15.0 else 'not met'}"
    )


def run() -> None:
    print(f"  load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    cost = _cf_cost()
    print(f"  one compiled characteristic-function value: {cost * 1e9:.0f} ns")
    _one_price(cost)
    _surface(cost)
    models = int(os.environ.get("ROOTVAR_BENCH_MODELS", 50))
    if models:
        _control(models)


if __name__ == "__main__":
    run()
