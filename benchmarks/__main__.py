"""Run the benchmarks: ``python -m benchmarks [variance ...]``.

``python -m benchmarks verdict [SEEDS]`` runs the statistical sweep of the verdict
(not part of the default set: it takes some minutes).
"""

from __future__ import annotations

import importlib
import sys

from .timing import machine_line

ALL = [
    "variance",
    "fourier",
    "contour",
    "greeks",
    "mc_greeks",
    "monte_carlo",
    "kernels",
    "refresh",
    "pde",
    "calibration",
    "exotics",
]


def main(argv: list[str]) -> int:
    names = [a for a in argv if not a.isdigit()] or ALL  # a number is an option of one bench
    print(f"rootvar benchmarks on {machine_line()}")
    for name in names:
        module = importlib.import_module(f"benchmarks.bench_{name}")
        print(f"\n[{name}] {module.__doc__.strip().splitlines()[0]}")
        module.run()
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
