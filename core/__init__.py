"""rootvar.core: numpy/scipy numerics (numba kernels for the hot loops) for Heston checks.

This package never imports the spreadsheet layer (``rootvar.addin``),
xlwings or openpyxl.
"""

from importlib.metadata import PackageNotFoundError, version

from .black_scholes import bs_price, implied_vol, implied_vol_reason
from .calibration import Calibration, calibrate, calibration_tradeoff
from .cir_law import TINY_VARIANCE, cir_stationary, cir_transition, cir_transition_shapes
from .compiled import CompileNotice, compile_kernels, kernels_cached
from .exotic_check import ExoticComparison, compare_exotic
from .fourier import FourierDetails, heston_implied_vol, heston_price, heston_price_details
from .fourier_check import FourierCheckError, lewis_call_price
from .fourier_exotics import FourierConvergenceError, forward_start_price, geometric_asian_price
from .heston_gradient import heston_price_gradient
from .mc_exotic import ExoticMCResult, mc_exotic
from .mc_schemes import SCHEMES
from .monte_carlo import BLOCK, DEFAULT_SEED, MCResult, expected_negative_step_fraction, mc_price
from .params import HestonParams
from .pde import PDEResult, pde_price
from .products import (
    AsianOption,
    BarrierOption,
    DigitalOption,
    EuropeanOption,
    ForwardStartOption,
)
from .quotes import QuoteSet, StaticArbitrageWarning, read_quotes
from .report import DEFAULT_QUANTILES, variance_report
from .validation import InputError
from .variance import (
    EulerWorstCase,
    euler_max_step,
    euler_negative_probability,
    euler_worst_case,
    feller_ratio,
    regime_label,
)
from .verdict import (
    BIASED,
    CONSISTENT,
    DEFAULT_PATHS,
    DEFAULT_TOLERANCE_BP,
    DEFAULT_Z,
    PLANNING_SHARE,
    UNDECIDED,
    Comparison,
    compare_mc_fourier,
    planning_paths,
    step_study,
)

try:
    __version__ = version("rootvar")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"

__all__ = [
    "BIASED",
    "BLOCK",
    "CONSISTENT",
    "DEFAULT_PATHS",
    "DEFAULT_QUANTILES",
    "DEFAULT_SEED",
    "DEFAULT_TOLERANCE_BP",
    "DEFAULT_Z",
    "PLANNING_SHARE",
    "SCHEMES",
    "TINY_VARIANCE",
    "UNDECIDED",
    "AsianOption",
    "BarrierOption",
    "Calibration",
    "Comparison",
    "CompileNotice",
    "DigitalOption",
    "EulerWorstCase",
    "EuropeanOption",
    "ExoticComparison",
    "ExoticMCResult",
    "ForwardStartOption",
    "FourierCheckError",
    "FourierConvergenceError",
    "FourierDetails",
    "HestonParams",
    "InputError",
    "MCResult",
    "PDEResult",
    "QuoteSet",
    "StaticArbitrageWarning",
    "__version__",
    "bs_price",
    "calibrate",
    "calibration_tradeoff",
    "cir_stationary",
    "cir_transition",
    "cir_transition_shapes",
    "compare_exotic",
    "compare_mc_fourier",
    "compile_kernels",
    "euler_max_step",
    "euler_negative_probability",
    "euler_worst_case",
    "expected_negative_step_fraction",
    "feller_ratio",
    "forward_start_price",
    "geometric_asian_price",
    "heston_implied_vol",
    "heston_price",
    "heston_price_details",
    "heston_price_gradient",
    "implied_vol",
    "implied_vol_reason",
    "kernels_cached",
    "lewis_call_price",
    "mc_exotic",
    "mc_price",
    "pde_price",
    "planning_paths",
    "read_quotes",
    "regime_label",
    "step_study",
    "variance_report",
]
