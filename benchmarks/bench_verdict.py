"""Verdict rates at the defaults: false alarms, power, and the planning figure (statistics).

Not a timing benchmark: ``python -m benchmarks verdict`` (or ``... verdict 200`` for a
smaller run) prints, over many seeds, how often the Monte Carlo check at its defaults
(10 bp, z = 3, 200,000 conditional antithetic paths) calls a scheme without bias
"consistent", "undecided" or "biased" (false alarm), how often it calls a scheme
biased by twice the tolerance "biased" (power), and how a rerun at the planning
figure of an undecided small run comes out.  One process, numpy engine; the full
run takes some minutes.

The scheme "without bias" is QE (Andersen 2008) at 32 steps a year, conditional;
its own bias on each option is measured first with 4,000,000 paths and printed, so
a reader can see it is small against the tolerance.  The scheme "biased by twice
the tolerance" is the same run with its price moved by twice the tolerance in price
(up on even seeds, down on odd ones): the verdict sees exactly such a bias.
"""

from __future__ import annotations

import dataclasses
import sys

import numpy as np

from rootvar.addin.workbooks.demo_desk import demo_models
from rootvar.core import (
    BIASED,
    CONSISTENT,
    DEFAULT_PATHS,
    DEFAULT_TOLERANCE_BP,
    DEFAULT_Z,
    UNDECIDED,
    HestonParams,
    compare_mc_fourier,
    mc_price,
)

#: Fang & Oosterlee (2008), SIAM J. Sci. Comput. 31(2), Heston test case: S = K = 100, T = 1.
FO = HestonParams(v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)


def cases():
    """(name, params, spot, strikes, maturity, rate, div): FO at the money, demo 90/100/110%."""
    out = [("FO 2008", FO, 100.0, np.array([100.0]), 1.0, 0.0, 0.0)]
    for m in demo_models():
        strikes = m.spot * np.array([0.9, 1.0, 1.1])
        out.append((m.model_id, m.params, m.spot, strikes, 1.0, m.rate, m.div_yield))
    return out


def _run(case, paths, seed, shift_sign=0.0, both=False):
    """The check of one run; with ``both``, also that of the run moved by 2 tolerances."""
    _, p, s, ks, t, r, q = case
    run = mc_price(p, s, ks, t, r, q, "call", "qe", 32, paths, seed, True, True)
    c = compare_mc_fourier(p, s, ks, t, r, q, mc_result=run)
    if shift_sign:
        moved = dataclasses.replace(run, price=run.price + shift_sign * 2.0 * c.tolerance_price)
        shifted = compare_mc_fourier(p, s, ks, t, r, q, mc_result=moved)
        return (c, shifted) if both else shifted
    return c


def rates(seeds: int, small_paths: int = 10_000) -> dict:
    """Run the sweep; returns the counts (also printed)."""
    tally = {"unbiased": {CONSISTENT: 0, UNDECIDED: 0, BIASED: 0}, "biased": {BIASED: 0, "n": 0}}
    plan = {"undecided": 0, "rerun_consistent": 0, "figures": []}
    for case in cases():
        big = _run(case, 4_000_000, 999)
        se_bp = np.atleast_1d(big.mc.std_error / big.tolerance_price) * DEFAULT_TOLERANCE_BP
        bias_bp = np.atleast_1d(big.diff_vol_bp)
        print(f"  {case[0]}: QE bias with 4M paths {np.round(bias_bp, 2)} vol bp, "
              f"std error {np.round(se_bp, 2)} bp")  # fmt: skip
        n = seeds if case[0] == "FO 2008" else max(seeds // 5, 1)
        figures = {}
        for seed in range(1, n + 1):
            sign = 1.0 if seed % 2 else -1.0
            plain, moved = _run(case, DEFAULT_PATHS, seed, sign, both=True)
            for v in np.atleast_1d(plain.verdict):
                tally["unbiased"][str(v)] += 1
            for v in np.atleast_1d(moved.verdict):
                tally["biased"]["n"] += 1
                tally["biased"][BIASED] += str(v) == BIASED
            small = _run(case, small_paths, 10_000 + seed)
            for i, v in enumerate(np.atleast_1d(small.verdict)):
                if str(v) != UNDECIDED:
                    continue
                need = int(np.atleast_1d(small.paths_to_settle)[i])
                figures.setdefault(i, []).append(need)
                plan["undecided"] += 1
                ks = np.atleast_1d(case[3])[i : i + 1]
                rerun = _run((*case[:3], ks, *case[4:]), need, 20_000 + seed)
                plan["rerun_consistent"] += str(np.atleast_1d(rerun.verdict)[0]) == CONSISTENT
        for i, found in sorted(figures.items()):
            f = np.array(found)
            plan["figures"].append(f.max() / f.min())
            print(f"    strike {np.atleast_1d(case[3])[i]:g}: planning figure over {f.size} seeds "
                  f"median {np.median(f):,.0f}, min {f.min():,} max {f.max():,} paths "
                  f"(max/min {f.max() / f.min():.2f})")  # fmt: skip
    u, b = tally["unbiased"], tally["biased"]
    total = sum(u.values())
    print(f"  defaults: {DEFAULT_TOLERANCE_BP:g} bp, z {DEFAULT_Z:g}, {DEFAULT_PATHS:,} "
          "conditional antithetic paths, QE 32 steps a year")  # fmt: skip
    print(
        f"  scheme without bias, {total} checks: consistent {u[CONSISTENT] / total:.1%}, "
        f"undecided {u[UNDECIDED] / total:.1%}, biased (false alarm) {u[BIASED] / total:.2%}"
    )
    print(
        f"  scheme biased by twice the tolerance, {b['n']} checks: biased (power) "
        f"{b[BIASED] / b['n']:.1%}"
    )
    if plan["undecided"]:
        share = plan["rerun_consistent"] / plan["undecided"]
        print(f"  planning figure: {plan['undecided']} undecided runs of {small_paths:,} paths; "
              f"rerun at the figure consistent in {share:.1%}; largest max/min over seeds of "
              f"one option {max(plan['figures']):.2f}")  # fmt: skip
    return {"tally": tally, "plan": plan}


def run(argv=None) -> None:
    argv = sys.argv[2:] if argv is None else argv
    rates(int(argv[0]) if argv else 1000)
