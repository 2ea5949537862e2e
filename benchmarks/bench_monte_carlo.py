"""Monte Carlo: path-steps per second, time to a 0.005 standard error, peak memory."""

from __future__ import annotations

import subprocess
import sys
import textwrap
import time

import numpy as np

from rootvar.core import SCHEMES, HestonParams, mc_price

from .timing import show

FO = HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711)
TARGET_SE = 0.005
STEPS = 32


def _baseline_euler_full(paths, steps, seed=1):
    """Plain vectorised Euler full truncation: all paths at once, no chunks."""
    p, dt = FO, 1.0 / steps
    rng = np.random.default_rng(seed)
    v = np.full(paths, p.v0)
    x = np.zeros(paths)
    for _ in range(steps):
        z1 = rng.standard_normal(paths)
        z2 = p.rho * z1 + np.sqrt(1 - p.rho**2) * rng.standard_normal(paths)
        vp = np.maximum(v, 0.0)
        x += -0.5 * vp * dt + np.sqrt(vp * dt) * z2
        v += p.kappa * (p.theta - vp) * dt + p.vol_of_vol * np.sqrt(vp * dt) * z1
    pay = np.maximum(100.0 * np.exp(x) - 100.0, 0.0)
    return pay.mean(), pay.std(ddof=1) / np.sqrt(paths)


def _time_to_target(run, pilot=20_000):
    """Paths from a pilot run, then the timed run at that many paths."""
    se = run(pilot)[1]
    paths = int(np.ceil(pilot * (se / TARGET_SE) ** 2 / 8192) * 8192)
    start = time.perf_counter()
    _, achieved = run(paths)
    return time.perf_counter() - start, paths, achieved


def run() -> None:
    print("  path-steps per second, one process, FO parameters, 200,000 paths x 100 steps:")
    for name in SCHEMES:
        start = time.perf_counter()
        mc_price(FO, 100, 100.0, 1.0, scheme=name, steps=100, paths=200_000, conditional=True)
        rate = 200_000 * 100 / (time.perf_counter() - start)
        print(f"    {name:<16s} {rate / 1e6:7.1f} million/s")
    print("    (issue target: 40 million/s for qe)")

    print(f"  time to std_error <= {TARGET_SE} (S=K=100, T=1, FO parameters, {STEPS} steps):")
    base_t, base_n, base_se = _time_to_target(lambda n: _baseline_euler_full(n, STEPS))
    show(f"baseline: plain Euler full truncation, {base_n:,} paths (se {base_se:.4f})", base_t)
    for label, kw in [
        ("QE", {}),
        ("QE, conditional", {"conditional": True}),
        ("QE, conditional + antithetic", {"conditional": True, "antithetic": True}),
        ("exact variance, conditional", {"conditional": True, "scheme": "exact_variance"}),
    ]:

        def one(n, kw=kw):
            r = mc_price(FO, 100, 100.0, 1.0, steps=STEPS, paths=n, **{"scheme": "qe", **kw})
            return r.price, r.std_error

        t, n, se = _time_to_target(one)
        show(f"{label}, {n:,} paths (se {se:.4f})", t, base_t)
    print("    (issue target: conditioning at least 20x faster than the baseline)")

    code = textwrap.dedent(
        """
        import resource, time
        from rootvar.core import HestonParams, mc_price
        p = HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711)
        t = time.perf_counter()
        r = mc_price(p, 100, [80.0, 100.0, 120.0], 1.0, scheme="qe", steps=500,
                     paths=1_000_000, conditional=True)
        print(f"{time.perf_counter() - t:.1f} s, peak RSS "
              f"{resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")
        """
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    print(f"  1,000,000 paths x 500 steps (QE, conditional, 3 strikes): {out.stdout.strip()}")
    print("    (issue target: peak below 1.5 GB)")
