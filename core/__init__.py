"""rootvar.core: numpy/scipy numerics (numba kernels for the hot loops) for Heston checks.

This package never imports the spreadsheet layer (``rootvar.addin``),
xlwings or openpyxl.

Names are loaded on first use (PEP 562): ``from rootvar.core import
heston_price`` imports the Fourier pricer and what it needs, not the
calibration, the PDE solver or pandas.  A spreadsheet cell's first call
then does not pay for the whole library.  The modules live in subpackages
named after the method (``variance``, ``fourier``, ``montecarlo``, ``pde``,
``calibration``, ``checks``); no public name is also a module's name.
"""

from __future__ import annotations

import importlib
from importlib.metadata import PackageNotFoundError, version

#: Public names by the module that defines them.
_MODULES = {
    "black_scholes": ("bs_greeks", "bs_price", "implied_vol", "implied_vol_reason"),
    "calibration.fit": ("Calibration", "calibrate", "calibration_tradeoff"),
    "variance.cir_law": (
        "TINY_VARIANCE",
        "cir_stationary",
        "cir_transition",
        "cir_transition_shapes",
    ),
    "runtime": ("CompileNotice",),
    "warmup": ("compile_kernels", "kernels_cached"),
    "checks.exotic": ("ExoticComparison", "compare_exotic"),
    "checks.greeks": ("GreeksComparison", "compare_greeks", "default_greek_tolerances"),
    "fourier.cos": ("FourierDetails", "heston_implied_vol", "heston_price", "heston_price_details"),
    "fourier.check": ("FourierCheckError", "lewis_call_price"),
    "fourier.contour": ("ContourDetails", "contour_prices"),
    "fourier.exotics": ("FourierConvergenceError", "forward_start_price", "geometric_asian_price"),
    "fourier.gradient": ("heston_price_gradient",),
    "fourier.greeks": ("fourier_greek_tolerances", "heston_greeks", "heston_greeks_strip"),
    "montecarlo.exotic": ("ExoticMCResult", "mc_exotic"),
    "montecarlo.greeks": ("DEFAULT_GREEKS_SCHEME", "mc_greeks"),
    "montecarlo.schemes": ("SCHEMES",),
    "montecarlo.european": (
        "BLOCK",
        "DEFAULT_SEED",
        "MCResult",
        "expected_negative_step_fraction",
        "mc_price",
    ),
    "greeks": ("GREEK_NAMES", "GREEK_UNITS", "Greeks", "desk_vega"),
    "params": ("HestonParams",),
    "pde.greeks": ("pde_greeks",),
    "pde.solver": ("PDEResult", "pde_price"),
    "products": (
        "AsianOption",
        "BarrierOption",
        "DigitalOption",
        "EuropeanOption",
        "ForwardStartOption",
    ),
    "calibration.quotes": ("QuoteSet", "StaticArbitrageWarning", "read_quotes"),
    "variance.report": ("DEFAULT_QUANTILES", "variance_report"),
    "validation": ("InputError",),
    "variance.euler": (
        "EulerWorstCase",
        "euler_max_step",
        "euler_negative_probability",
        "euler_worst_case",
        "feller_ratio",
        "regime_label",
    ),
    "checks.vanilla": (
        "BIASED",
        "CONSISTENT",
        "DEFAULT_PATHS",
        "DEFAULT_TOLERANCE_BP",
        "DEFAULT_Z",
        "MAX_Z",
        "PLANNING_SHARE",
        "UNDECIDED",
        "Comparison",
        "compare_mc_fourier",
        "planning_paths",
        "step_study",
    ),
}
_WHERE = {name: module for module, names in _MODULES.items() for name in names}

try:
    __version__ = version("rootvar")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"

__all__ = sorted([*_WHERE, "__version__"])


def __getattr__(name: str):
    """Import the module that defines ``name`` on first use, then keep the name here."""
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
