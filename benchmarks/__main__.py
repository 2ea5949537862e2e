"""Run the benchmarks: ``python -m benchmarks [variance ...]``."""

from __future__ import annotations

import importlib
import sys

from .timing import machine_line

ALL = ["variance", "fourier", "monte_carlo", "kernels", "refresh", "pde", "calibration"]


def main(argv: list[str]) -> int:
    names = argv or ALL
    print(f"rootvar benchmarks on {machine_line()}")
    for name in names:
        module = importlib.import_module(f"benchmarks.bench_{name}")
        print(f"\n[{name}] {module.__doc__.strip().splitlines()[0]}")
        module.run()
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
