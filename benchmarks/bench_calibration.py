"""Calibration of a 77-quote surface: analytic COS Jacobian against finite differences.

Baseline: the same least squares (same residuals, coordinates, solver and
final tolerance) with a 2-point finite-difference Jacobian.  It is run for real on
the certified COS prices, which gives its evaluation count; the quad check
method prices one surface in seconds, so its time is that count times one
timed quad surface (scaled, as in the Fourier benchmark).
"""

from __future__ import annotations

import time
import warnings

import numpy as np
from scipy.optimize import least_squares

from rootvar.core import (
    HestonParams,
    calibrate,
    calibration_tradeoff,
    heston_implied_vol,
    heston_price,
)
from rootvar.core.calibration.fit import (
    TIGHT_TOL,
    Coordinates,
    bs_otm_price,
    bs_vega,
    reasonable_start,
)
from rootvar.core.calibration.quotes import read_quotes
from rootvar.core.fourier.check import lewis_call_price

from .timing import median_seconds, show

SPOT, RATE, DIV = 4125.0, 0.031, 0.018
SHAPE = HestonParams(v0=0.026, kappa=1.8, theta=0.048, vol_of_vol=0.78, rho=-0.72)
MATURITIES = (1 / 12, 0.25, 0.5, 0.75, 1.0, 1.5, 2.0)


def surface() -> list[dict]:
    """7 maturities x 11 strikes, +-3 sd of a 20% vol: Heston with a steeper put wing."""
    rows = []
    z = np.linspace(-3.0, 3.0, 11)
    for t in MATURITIES:
        forward = SPOT * np.exp((RATE - DIV) * t)
        strikes = np.round(forward * np.exp(z * 0.2 * np.sqrt(t)))
        vols = heston_implied_vol(SHAPE, SPOT, strikes, t, RATE, DIV)
        vols = vols + 0.0025 * np.maximum(-z, 0) ** 2 / (1 + 3 * t)
        vols = vols - 0.001 * np.maximum(z, 0) / (1 + t)
        rows += [
            {"maturity": t, "strike": float(k), "implied_vol": round(float(v), 4)}
            for k, v in zip(strikes, vols, strict=True)
        ]
    return rows


def _baseline(quotes, start: HestonParams):
    """The same vega-scaled least squares with a 2-point Jacobian on certified COS prices.

    Returns seconds, surface pricings (residual evaluations including the
    difference steps), RMSE (bp, its own residuals), parameters and status.
    """
    q = read_quotes(quotes, SPOT, RATE, DIV)
    market = bs_otm_price(SPOT, q.strike, q.maturity, q.implied_vol, RATE, DIV)
    scale = 1.0 / bs_vega(SPOT, q.strike, q.maturity, q.implied_vol, RATE, DIV)
    forward = SPOT * np.exp((RATE - DIV) * q.maturity)
    coords = Coordinates()
    # rho bounded at +-1 as when the baseline was first measured: its difference
    # Jacobian of certified prices (each priced on its own grid, noisy at 1e-10 x
    # spot) makes its path fragile; with calibrate's +-0.999 it wanders to some
    # 160 pricings and stops at a point 0.004 bp worse
    coords.bounds[0][4], coords.bounds[1][4] = -1.0, 1.0
    count = [0]

    def residuals(x):
        count[0] += 1
        p = coords.params(x)
        puts = heston_price(p, SPOT, q.strike, q.maturity, RATE, DIV, "put")
        parity = SPOT * np.exp(-DIV * q.maturity) - q.strike * np.exp(-RATE * q.maturity)
        otm = np.where(q.strike >= forward, puts + parity, puts)
        return (otm - market) * scale

    began = time.perf_counter()
    out = least_squares(
        residuals,
        coords.start(start),
        jac="2-point",
        bounds=coords.bounds,
        method="trf",
        x_scale="jac",
        xtol=TIGHT_TOL,
        ftol=TIGHT_TOL,
        gtol=TIGHT_TOL,
        max_nfev=200,
    )
    seconds = time.perf_counter() - began
    rmse = float(np.sqrt(np.mean(out.fun**2)) * 1e4)
    return seconds, count[0], rmse, coords.params(out.x), out.status


def _quad_surface_seconds(quotes, params) -> float:
    """Wall time of one surface priced by the quad check method, one option at a time."""
    began = time.perf_counter()
    for row in quotes:
        lewis_call_price(params, SPOT, np.array([row["strike"]]), row["maturity"], RATE, DIV)
    return time.perf_counter() - began


def run() -> None:
    quotes = surface()
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the benchmark surface is free of static arbitrage
        q = read_quotes(quotes, SPOT, RATE, DIV)
    start = reasonable_start(q, SPOT, RATE, DIV)
    print(f"  {len(quotes)} quotes, {len(MATURITIES)} maturities; spot {SPOT:g}")
    print("  (shared 2-core machine: figures drift by up to 1.5x between runs)")
    print(f"  load average at the start: {_load()}")

    fd_s, fd_n, fd_rmse, fd_p, fd_status = _baseline(quotes, start)
    quad_one = min(_quad_surface_seconds(quotes, start) for _ in range(2))
    base_s = fd_n * quad_one
    show(f"baseline: quad check method, 2-point Jacobian ({fd_n} pricings, scaled)", base_s)
    show(f"  same 2-point least squares on certified COS prices ({fd_n} pricings)", fd_s, base_s)

    one = calibrate(quotes, SPOT, RATE, DIV, starts=0)
    t_one = median_seconds(lambda: calibrate(quotes, SPOT, RATE, DIV, starts=0), repeats=5)
    show(f"calibrate, one start ({one.evaluations} evaluations with gradient)", t_one, base_s)
    print(
        f"     RMSE {one.rmse_bp:.3f} bp (2-point baseline {fd_rmse:.3f} bp on its own "
        f"residuals, status {fd_status}); largest parameter gap to it "
        f"{_gap(one.params, fd_p):.1e} relative; one quad surface {quad_one:.2f} s, "
        f"counted {fd_n} times"
    )
    print(
        f"     against the same 2-point least squares on certified COS prices in this run: "
        f"{fd_s / t_one:.1f}x faster, {one.evaluations} evaluations with gradient against "
        f"{fd_n} pricings"
    )
    multi = calibrate(quotes, SPOT, RATE, DIV, workers=2)
    t_multi = median_seconds(lambda: calibrate(quotes, SPOT, RATE, DIV, workers=2), repeats=3)
    show(
        f"calibrate, {multi.starts} starts, 2 threads ({multi.evaluations} evaluations)",
        t_multi,
        base_s,
    )
    print(f"     {multi.starts_at_best} of {multi.starts} starts reached the best optimum")
    table = calibration_tradeoff(quotes, SPOT, RATE, DIV)
    t_trade = median_seconds(lambda: calibration_tradeoff(quotes, SPOT, RATE, DIV), repeats=3)
    show("calibration_tradeoff, free and enforced, multi-start", t_trade, base_s)
    print(
        f"     cost of Feller: RMSE {table.loc['RMSE (bp)', 'cost']:.1f} bp, "
        f"largest error {table.loc['largest error (bp)', 'cost']:.1f} bp"
    )
    print(
        "     (issue targets: one start <= 0.1 s, multi-start <= 1 s on 2 cores, "
        "trade-off <= 2 s; a C++ Levenberg-Marquardt takes about 0.15-0.25 s here)"
    )
    print(f"  load average at the end: {_load()}")


def _load() -> str:
    """The 1, 5 and 15 minute load averages where the system reports them."""
    try:
        with open("/proc/loadavg") as f:
            return " ".join(f.read().split()[:3])
    except OSError:
        return "not available"


def _gap(a: HestonParams, b: HestonParams) -> float:
    names = ("v0", "kappa", "theta", "vol_of_vol", "rho")
    return max(abs(getattr(a, n) / getattr(b, n) - 1.0) for n in names)
