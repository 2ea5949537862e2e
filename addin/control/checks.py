"""Running the models' checks: in this process, on a process pool, or on Dask.

Each model's rows depend only on the model and the settings (its seed comes
from the base seed and the model id), so every way of running gives the same
rows.  Progress reports models done, the rate and the time left.
"""

from __future__ import annotations

import os
import signal
import sys
import time
from concurrent.futures import ProcessPoolExecutor, as_completed

from rootvar.core.checks.daily import ControlSettings, ModelSpec, check_model

from .book import ControlError

__all__ = ["Progress", "run_checks"]


def check_one(spec: ModelSpec, settings: ControlSettings):
    """Rows for one model, or the error that stopped it (never raises)."""
    try:
        return check_model(spec, settings), ""
    except Exception as exc:  # one model's failure must not stop the book
        return [], f"the check stopped: {exc}" if str(exc) else "the check stopped"


class Progress:
    """Prints ``[done/total] pct  rate  time left`` lines, at most every ``every`` seconds."""

    def __init__(self, total: int, stream=None, quiet: bool = True, every: float = 2.0):
        self.total, self.done, self.quiet, self.every = total, 0, quiet, every
        self.stream = stream or sys.stderr
        self.started = time.perf_counter()
        self._last = -1e9

    def line(self) -> str:
        elapsed = time.perf_counter() - self.started
        rate = self.done / elapsed if elapsed > 0 else 0.0
        left = (self.total - self.done) / rate if rate > 0 else float("nan")
        pct = 100.0 * self.done / self.total if self.total else 100.0
        left_text = "--" if left != left else _duration(left)
        return (
            f"[{self.done}/{self.total}] {pct:5.1f}%  {rate:.2f} models/s  "
            f"elapsed {_duration(elapsed)}  left {left_text}"
        )

    def step(self, spec: ModelSpec, err: str) -> None:
        self.done += 1
        if self.quiet:
            return
        now = time.perf_counter()
        if err:
            self._print(f"{spec.model_id}: {err}")
        if now - self._last >= self.every or self.done == self.total:
            self._last = now
            self._print(self.line())

    def _print(self, text: str) -> None:
        try:
            print(text, file=self.stream, flush=True)
        except (BrokenPipeError, OSError):
            self.quiet = True  # a closed terminal must not stop the refresh


def _duration(seconds: float) -> str:
    seconds = max(0, round(seconds))
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h}h{m:02d}m{s:02d}s" if h else f"{m}m{s:02d}s"


def _worker_start(threads: int) -> None:
    """Set up a pool worker: its share of the cores, Ctrl-C is the parent's, it dies with it."""
    # The kernels run Monte Carlo blocks on as many threads as numba allows; N worker
    # processes with all cores' threads each would fight over the cores.
    from rootvar.core.runtime import numba

    numba.set_num_threads(max(1, min(threads, numba.config.NUMBA_NUM_THREADS)))
    # Ctrl-C reaches the whole process group; only the parent decides what stops
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if sys.platform.startswith("linux"):
        # A killed parent would otherwise leave its workers waiting forever on the pool's
        # queue; PR_SET_PDEATHSIG (1) has the kernel end them with the parent.
        import ctypes

        try:
            ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGTERM)
        except (OSError, AttributeError):
            pass
        if os.getppid() == 1:  # the parent died before the request took effect
            os._exit(1)


def run_checks(specs, settings, workers: int, scheduler: str | None, progress: Progress):
    """``(rows, error)`` per spec, in the order of ``specs``."""
    if scheduler:
        return _on_dask(specs, settings, scheduler, progress)
    if workers <= 1 or len(specs) <= 1:
        results = []
        for spec in specs:
            results.append(check_one(spec, settings))
            progress.step(spec, results[-1][1])
        return results
    results: list = [None] * len(specs)
    share = max(1, (os.cpu_count() or 1) // workers)
    pool = ProcessPoolExecutor(max_workers=workers, initializer=_worker_start, initargs=(share,))
    try:
        futures = {pool.submit(check_one, spec, settings): i for i, spec in enumerate(specs)}
        for fut in as_completed(futures):
            i = futures[fut]
            results[i] = fut.result()
            progress.step(specs[i], results[i][1])
    except BaseException:
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    pool.shutdown(wait=True)
    return results


def _on_dask(specs, settings, scheduler, progress):
    try:
        from dask.distributed import Client
        from dask.distributed import as_completed as dask_completed
    except ImportError as exc:
        raise ControlError(
            "--scheduler needs the optional extra: pip install 'rootvar[cluster]'"
        ) from exc
    try:
        client = Client(scheduler, timeout="20s")
    except OSError as exc:
        raise ControlError(f"cannot reach the Dask scheduler at {scheduler}: {exc}") from exc
    with client:
        futures = client.map(check_one, specs, settings=settings, pure=False)
        index = {f.key: i for i, f in enumerate(futures)}
        results: list = [None] * len(specs)
        for fut in dask_completed(futures):
            i = index[fut.key]
            results[i] = fut.result()
            progress.step(specs[i], results[i][1])
    return results
