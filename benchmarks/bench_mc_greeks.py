"""Monte Carlo Greeks: the time of every Greek against the time of the price on the same paths.

Each case times the price call whose paths :func:`rootvar.core.mc_greeks` reuses
(``mc_price(..., conditional=True)`` for the European, ``mc_exotic(...,
control="none")`` for the barrier and the digital) and the Greeks call, in
alternating rounds in one run (the shared machine's speed drifts), and prints
the medians and their ratio, with the machine's load average before and after
(the ratios are only comparable between runs at a like load).  Target (issue
22): Greeks at most 1.5x the price; aim at 1.45x or less, so that a run on a
busy machine stays under it.  The barrier's Greeks draw no paths beyond the
price's (their combination weights are cross-fitted between the run's halves).
"""

from __future__ import annotations

import os
import statistics
import time

from rootvar.core import (
    BarrierOption,
    DigitalOption,
    EuropeanOption,
    HestonParams,
    mc_exotic,
    mc_greeks,
    mc_price,
)

from .timing import show

# Fang & Oosterlee (2008) Heston set (Feller broken) and a Feller-holding set
FO = HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711)
PATHS = 100_000
ROUNDS = 7


def _cases():
    vanilla = EuropeanOption("call", 100.0, 1.0)
    barrier = BarrierOption("call", 100.0, 1.0, 90.0, "down", "out")
    digital = DigitalOption("call", 100.0, 1.0)
    out = []
    for scheme in ("euler_full", "qe"):
        out.append(
            (
                f"European call, {scheme}, 64 steps",
                lambda s=scheme: mc_price(
                    FO,
                    100.0,
                    100.0,
                    1.0,
                    scheme=s,
                    steps=64,
                    paths=PATHS,
                    antithetic=True,
                    conditional=True,
                ),
                lambda s=scheme: mc_greeks(FO, 100.0, vanilla, scheme=s, steps=64, paths=PATHS),
            )
        )
        out.append(
            (
                f"down-and-out call, {scheme}, 256 steps",
                lambda s=scheme: mc_exotic(
                    FO, 100.0, barrier, scheme=s, paths=PATHS, control="none"
                ),
                lambda s=scheme: mc_greeks(FO, 100.0, barrier, scheme=s, paths=PATHS),
            )
        )
        out.append(
            (
                f"digital call, {scheme}, 64 steps",
                lambda s=scheme: mc_exotic(
                    FO, 100.0, digital, scheme=s, paths=PATHS, control="none"
                ),
                lambda s=scheme: mc_greeks(FO, 100.0, digital, scheme=s, paths=PATHS),
            )
        )
    return out


def _load() -> str:
    return "load average " + ", ".join(f"{x:.2f}" for x in os.getloadavg())


def run() -> None:
    print(f"  {_load()} (1, 5, 15 min) before")
    print(
        f"  {PATHS:,} antithetic paths, S=K=100, T=1, FO parameters; median of {ROUNDS} "
        "alternating rounds (whole calls); ratio = Greeks / price, in wall time and in the "
        "process's CPU time (all threads; steadier on a shared machine)"
    )
    for label, price, greeks in _cases():
        price(), greeks()  # compile or load the kernels
        wall = {"price": [], "greeks": []}
        cpu = {"price": [], "greeks": []}
        for _ in range(ROUNDS):
            for key, call in (("price", price), ("greeks", greeks)):
                start, start_cpu = time.perf_counter(), time.process_time()
                call()
                wall[key].append(time.perf_counter() - start)
                cpu[key].append(time.process_time() - start_cpu)
        p, g = statistics.median(wall["price"]), statistics.median(wall["greeks"])
        ratio_cpu = statistics.median(cpu["greeks"]) / statistics.median(cpu["price"])
        print(f"  {label}")
        show("  price on the paths", p)
        show(f"  price + every Greek   ratio {g / p:.2f}x (CPU {ratio_cpu:.2f}x)", g)
    print(f"  {_load()} after")


if __name__ == "__main__":
    run()
