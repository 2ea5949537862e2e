"""The compiled kernels as a whole: compile them ahead of time, and say when that is needed.

numba compiles each kernel on its first call and keeps the machine code on
disk (``cache=True``; where, see :mod:`rootvar.core.numba_setup`), so only
the very first use on a machine pays the compile, about half a minute to a
minute.  ``rootvar compile`` (run by ``make demo`` and the installation
steps) pays it ahead of time.
"""

from __future__ import annotations

import os
import threading
import time
import warnings
from concurrent.futures import ThreadPoolExecutor

from . import cos_kernels, gradient_kernels, mc_exotic_kernels, mc_kernels
from .numba_setup import CACHING, numba

__all__ = [
    "CompileNotice",
    "compile_kernels",
    "kernels_cached",
    "notice_if_cold",
    "thread_pool",
]

#: Every kernel called from Python, with the signatures the library uses.
KERNELS = (
    mc_kernels.block_paths,
    mc_kernels.price_block,
    cos_kernels.cf_array,
    cos_kernels.log_cf_array,
    mc_exotic_kernels.exotic_block,
    gradient_kernels.log_cf_gradient_array,
    gradient_kernels.put_coefficients,
    gradient_kernels.surface_sums,
    cos_kernels.cos_coefficients,
    cos_kernels.flat_sums,
    cos_kernels.cos_puts,
)


class CompileNotice(UserWarning):
    """The kernels are being compiled because the on-disk cache is empty."""


def kernels_cached(kernels=None) -> bool:
    """True when each of ``kernels`` (default: all) is compiled in this process or on disk."""
    for kernel in KERNELS if kernels is None else kernels:
        if kernel.signatures:
            continue
        try:
            index = kernel._cache._cache_file._index_path  # numba's own index file
        except AttributeError:  # uncached, or a numba without this layout: cannot tell
            continue
        if not os.path.exists(index):
            return False
    return True


_noticed = False


def notice_if_cold(*kernels) -> None:
    """Warn once per process, before a first compile of ``kernels``, that it takes a while.

    Callers name the kernels they are about to call, so a process that never
    needs a kernel is not told it compiles (a kernel is written to the disk
    cache only when it is compiled, that is when it is first called).
    """
    global _noticed
    if _noticed or kernels_cached(kernels or None):
        return
    _noticed = True
    warnings.warn(
        "rootvar: compiling the numerical kernels once for this machine (up to about a "
        "minute); `rootvar compile` does it ahead of time"
        if CACHING
        else "rootvar: compiling the numerical kernels for this process (up to about a minute); "
        "no folder here can keep them",
        CompileNotice,
        stacklevel=3,
    )


def compile_kernels() -> float:
    """Compile (or load from the disk cache) every kernel; returns the seconds taken.

    Small calls of the public functions, so that exactly the signatures the
    library uses are compiled: every Monte Carlo scheme kind with both
    payoffs, one Fourier price, and one price gradient (the calibration).
    """
    from .fourier import heston_price
    from .heston_gradient import heston_price_gradient, log_cf_gradient
    from .monte_carlo import mc_price
    from .params import HestonParams

    global _noticed
    _noticed = True  # the caller says what is happening
    start = time.perf_counter()
    p = HestonParams(0.04, 1.5, 0.04, 0.5, -0.7)
    for scheme in ("euler_full", "qe", "qe_martingale", "exact_variance"):
        for conditional in (False, True):
            mc_price(
                p, 100.0, 100.0, 1.0, scheme=scheme, steps=2, paths=64, conditional=conditional
            )
    heston_price(p, 100.0, [90.0, 110.0], 1.0)
    _compile_exotics(p)
    heston_price_gradient(p, 100.0, [90.0, 110.0], 1.0)  # the calibration's kernels
    log_cf_gradient([1.0], p, 1.0)
    return time.perf_counter() - start


def _compile_exotics(p) -> None:
    """The exotic path kernel for every scheme kind (one signature: the product is data)."""
    from .mc_exotic import mc_exotic
    from .products import EuropeanOption

    for scheme in ("euler_full", "qe", "qe_martingale", "exact_variance"):
        mc_exotic(p, 100.0, EuropeanOption("call", 100.0, 1.0), scheme=scheme, steps=2, paths=128)


_POOLS: dict = {}
_POOLS_LOCK = threading.Lock()


def thread_pool():
    """A pool of ``numba.get_num_threads()`` threads for this process, or None for one thread.

    The kernels release the GIL, so independent pieces of work (Monte Carlo
    blocks, slices of frequencies or strikes) run side by side on it.  Kept
    between calls; keyed by process id too, because a pool inherited through
    ``fork`` has no threads behind it, so a forked worker makes its own.
    """
    threads = numba.get_num_threads()
    if threads < 2:
        return None
    key = (os.getpid(), threads)
    with _POOLS_LOCK:
        if key not in _POOLS:
            _POOLS[key] = ThreadPoolExecutor(threads, thread_name_prefix="rootvar")
        return _POOLS[key]
