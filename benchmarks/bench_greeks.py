"""Fourier Greeks of one option against its price: all eleven Greeks in one call."""

from __future__ import annotations

from rootvar.core import HestonParams, heston_greeks, heston_price
from rootvar.core.fourier import contour, series
from rootvar.core.fourier import greeks as fourier_greeks

from .timing import median_seconds

CASES = {
    "Fang & Oosterlee (2008)": HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711),
    "Andersen (2008) case I": HestonParams(0.04, 0.5, 0.04, 1.0, -0.9),
}
MATURITIES = (1 / 12, 1.0, 5.0)
SPOT, STRIKE, RATE, DIV = 100.0, 105.0, 0.02, 0.01
REPEATS = 15


def _forget() -> None:
    """Empty every cache a price or the Greeks keep between calls: a fresh maturity."""
    series.SERIES.clear()
    series.law_facts_kept.cache_clear()
    contour.clear_cache()
    fourier_greeks.clear_cache()


def _medians(p, t, fresh):
    def timed(call):
        if fresh:
            return median_seconds(lambda: (_forget(), call()), repeats=REPEATS)
        return median_seconds(call, repeats=REPEATS)

    price = timed(lambda: heston_price(p, SPOT, STRIKE, t, RATE, DIV))
    cos = timed(lambda: heston_price(p, SPOT, STRIKE, t, RATE, DIV, method="cos"))
    greeks = timed(lambda: heston_greeks(p, SPOT, STRIKE, t, RATE, DIV))
    return price, cos, greeks


def run() -> None:
    print(
        "  one call, strike 105, rate 2%, dividend 1%; medians of "
        f"{REPEATS} runs in ms; 'repeat' = the same call again (caches warm),"
        " 'fresh' = every cache emptied first; 'price' is heston_price's default route"
        " (the contour for one option), 'COS price' its COS route, which the Greeks"
        " are read from"
    )
    print(
        f"  {'case':<26s} {'T':>6s} {'':>7s} {'price':>8s} {'COS price':>10s} "
        f"{'Greeks':>8s} {'/price':>7s} {'/COS':>6s}"
    )
    for name, p in CASES.items():
        for t in MATURITIES:
            heston_greeks(p, SPOT, STRIKE, t, RATE, DIV)  # compile / load the kernels
            for fresh in (False, True):
                price, cos, greeks = _medians(p, t, fresh)
                print(
                    f"  {name:<26s} {t:6.3f} {'fresh' if fresh else 'repeat':>7s} "
                    f"{price * 1e3:8.3f} {cos * 1e3:10.3f} {greeks * 1e3:8.3f} "
                    f"{greeks / price:6.1f}x {greeks / cos:5.1f}x"
                )
    print("     (issue target: all Greeks of one option at most 3x its price)")
    print("     (the Greeks are sums of the COS series: their floor is the COS price)")
