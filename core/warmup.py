"""The compiled kernels as a whole: the list of them, and compiling them ahead of time.

numba compiles each kernel on its first call and keeps the machine code on
disk (``cache=True``; where, see :mod:`rootvar.core.runtime`), so only the
very first use on a machine pays the compile, about half a minute to a
minute.  ``rootvar compile`` (run by ``make demo`` and the installation
steps) pays it ahead of time.  Imported by the command line and the lazy
public map only: it imports every engine.
"""

from __future__ import annotations

import time

from rootvar.core import runtime
from rootvar.core.fourier import (
    contour_greeks_kernels,
    contour_kernels,
    cos_kernels,
    gradient_kernels,
)
from rootvar.core.fourier import greeks_kernels as cos_greeks_kernels
from rootvar.core.montecarlo import exotic_kernels as mc_exotic_kernels
from rootvar.core.montecarlo import greeks_kernels as mc_greeks_kernels
from rootvar.core.montecarlo import kernels as mc_kernels

__all__ = ["KERNELS", "compile_kernels", "kernels_cached"]

#: Every kernel called from Python, with the signatures the library uses.
KERNELS = (
    mc_kernels.block_paths,
    mc_kernels.price_block,
    cos_kernels.cf_array,
    cos_kernels.log_cf_array,
    mc_exotic_kernels.exotic_block,
    mc_greeks_kernels.european_greeks_block,
    mc_greeks_kernels.exotic_greeks_block,
    gradient_kernels.log_cf_gradient_array,
    gradient_kernels.put_coefficients,
    gradient_kernels.surface_sums,
    cos_kernels.cos_coefficients,
    cos_kernels.flat_sums,
    cos_kernels.cos_puts,
    contour_kernels.contour_cells,
    contour_kernels.contour_strip,
    contour_greeks_kernels.contour_greeks,
    cos_greeks_kernels.greek_coefficients,
    cos_greeks_kernels.greek_payoff_sums,
    cos_greeks_kernels.greek_tails,
)


def kernels_cached() -> bool:
    """True when every kernel is compiled in this process or has machine code on disk."""
    return runtime.kernels_cached(KERNELS)


def compile_kernels() -> float:
    """Compile (or load from the disk cache) every kernel; returns the seconds taken.

    Small calls of the public functions, so that exactly the signatures the
    library uses are compiled: every Monte Carlo scheme kind with both
    payoffs, one Fourier price by each certified route, and one price
    gradient (the calibration).
    """
    from rootvar.core.fourier.cos import heston_price
    from rootvar.core.fourier.gradient import heston_price_gradient, log_cf_gradient
    from rootvar.core.fourier.greeks import heston_greeks
    from rootvar.core.montecarlo.european import mc_price
    from rootvar.core.params import HestonParams

    runtime.quiet_notice()  # the caller says what is happening
    start = time.perf_counter()
    p = HestonParams(0.04, 1.5, 0.04, 0.5, -0.7)
    for scheme in ("euler_full", "qe", "qe_martingale", "exact_variance"):
        for conditional in (False, True):
            mc_price(
                p, 100.0, 100.0, 1.0, scheme=scheme, steps=2, paths=64, conditional=conditional
            )
    heston_price(p, 100.0, [90.0, 110.0], 1.0, method="cos")
    heston_price(p, 100.0, [90.0, 110.0], 1.0)  # the contour route (one price, short strips)
    _compile_contour_strike_mode(p)
    _compile_exotics(p)
    _compile_greeks(p)
    heston_greeks(p, 100.0, 100.0, 1.0)  # the contour route's Greeks
    heston_greeks(p, 100.0, 100.0, 1.0, method="cos")  # the COS Greeks (the hand-over route)
    heston_price_gradient(p, 100.0, [90.0, 110.0], 1.0)  # the calibration's kernels
    log_cf_gradient([1.0], p, 1.0)
    return time.perf_counter() - start


def _compile_contour_strike_mode(p) -> None:
    """The contour route's per-strike kernel (a check's second contour)."""
    from rootvar.core.fourier.contour import contour_prices

    contour_prices(p, 100.0, [90.0, 110.0], 1.0, mode="strike")


def _compile_exotics(p) -> None:
    """The exotic path kernel for every scheme kind (one signature: the product is data)."""
    from rootvar.core.montecarlo.exotic import mc_exotic
    from rootvar.core.products import EuropeanOption

    for scheme in ("euler_full", "qe", "qe_martingale", "exact_variance"):
        mc_exotic(p, 100.0, EuropeanOption("call", 100.0, 1.0), scheme=scheme, steps=2, paths=128)


def _compile_greeks(p) -> None:
    """The Monte Carlo Greeks' two kernels for every scheme kind (European, barrier, digital)."""
    from rootvar.core.montecarlo.greeks import mc_greeks
    from rootvar.core.products import BarrierOption, DigitalOption, EuropeanOption

    products = (
        EuropeanOption("call", 100.0, 1.0),
        BarrierOption("call", 100.0, 1.0, 90.0, "down", "out"),
        DigitalOption("call", 100.0, 1.0),
    )
    for scheme in ("euler_full", "qe", "qe_martingale", "exact_variance"):
        for product in products:
            mc_greeks(p, 100.0, product, scheme=scheme, steps=2, paths=128)
