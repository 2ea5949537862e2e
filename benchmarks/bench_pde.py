"""Finite-difference Heston: down-and-out call and European against Fourier, time and error."""

from __future__ import annotations

from rootvar.core import BarrierOption, EuropeanOption, HestonParams, heston_price, pde_price

from .timing import median_seconds, show

CASES = {
    "Fang & Oosterlee (2008)": HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711),
    "Andersen (2008) case I": HestonParams(0.04, 0.5, 0.04, 1.0, -0.9),
}
SPOT = 100.0
TOL = 1e-3 * SPOT
QUICK = (64, 32, 32)  # one solve, no refinement
REFERENCE = (256, 128, 128)  # finest run, refined, the yardstick for the others


def run() -> None:
    down_out = BarrierOption("call", 100.0, 1.0, 90.0, "down", "out")
    european = EuropeanOption("call", 100.0, 1.0)
    for name, p in CASES.items():
        print(f"  -- {name}, down-and-out call, strike 100, barrier 90, 1 year")
        fourier = median_seconds(lambda p=p: heston_price(p, SPOT, 100.0, 1.0), repeats=9)
        show("baseline: certified Fourier European (heston_price)", fourier)
        best = pde_price(p, SPOT, down_out, grid=REFERENCE)
        print(
            f"     finest run {best.grid} x {best.time_steps} steps: {best.price:.6f} "
            f"+- {best.error_estimate:.1e} ({best.status}, {best.seconds:.2f} s)"
        )
        for label, kwargs, target in (
            (f"one solve {QUICK}, no refinement", dict(grid=QUICK, refine=False), 0.3),
            ("refined, default grid (3 levels)", {}, 1.5),
        ):
            seconds = median_seconds(lambda p=p, k=kwargs: pde_price(p, SPOT, down_out, **k), 5)
            r = pde_price(p, SPOT, down_out, **kwargs)
            show(f"pde_price {label}", seconds)
            est = "" if kwargs.get("refine") is False else f", estimate {r.error_estimate:.1e}"
            print(
                f"     grid {r.grid} x {r.time_steps} steps, price {r.price:.6f}, "
                f"|price - finest| {abs(r.price - best.price):.1e}{est} "
                f"(target 1e-3 x spot = {TOL:g} within {target} s); "
                f"time {seconds / fourier:.1f}x the Fourier European's"
            )
        ref = heston_price(p, SPOT, 100.0, 1.0)
        for label, kwargs in (
            (f"one solve {QUICK}", dict(grid=QUICK, refine=False)),
            ("refined, default grid", {}),
        ):
            seconds = median_seconds(lambda p=p, k=kwargs: pde_price(p, SPOT, european, **k), 5)
            r = pde_price(p, SPOT, european, **kwargs)
            show(f"European on the same grid, {label}", seconds)
            print(
                f"     |pde - Fourier| {abs(r.price - ref):.1e}"
                + ("" if kwargs else f", estimate {r.error_estimate:.1e}")
                + f"; time {seconds / fourier:.1f}x the Fourier price's ({fourier * 1e3:.2f} ms)"
            )
