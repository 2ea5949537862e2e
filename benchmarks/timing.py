"""Median wall-clock timing shared by the benchmarks."""

from __future__ import annotations

import platform
import statistics
import time


def median_seconds(func, repeats: int = 7, warmup: int = 1) -> float:
    """Median wall time of ``func()`` over ``repeats`` runs after ``warmup`` runs."""
    for _ in range(warmup):
        func()
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def machine_line() -> str:
    import os

    cpu = platform.processor() or platform.machine()
    return f"{cpu}, {os.cpu_count()} cores, Python {platform.python_version()}"


def show(label: str, seconds: float, baseline: float | None = None) -> None:
    ratio = f"   {baseline / seconds:8.1f}x vs baseline" if baseline else ""
    print(f"  {label:<58s} {seconds * 1e3:10.3f} ms{ratio}")
