"""Spreadsheet functions: thin wrappers over ``rootvar.core``, one per idea.

Each function converts its arguments through :mod:`rootvar.addin.cells` and
returns a number, a text, a column, or a table with a header row (which
spills in the spreadsheet).  It never raises into the host: any problem
comes back as one short text starting with ``[rootvar]``.

Under Windows with the xlwings add-in these are user-defined functions; the
same Python functions are what the headless engine (:mod:`rootvar.addin.engine`)
calls, so a workbook computes the same numbers with or without Excel.

Monte Carlo functions are deterministic (``seed`` defaults to
:data:`rootvar.core.DEFAULT_SEED`), keep their default work near a second
(:data:`MC_PATHS` paths and :data:`MC_STEPS` steps for a price, the step study
:data:`STUDY_PATHS` paths per cell of its grid), refuse more than
:data:`MAX_PATH_STEPS` path-steps in one call, and serve repeated identical
calls from an in-process cache.

The package is split by the job a cell serves, one module per job:
:mod:`.version` (ROOTVAR_VERSION), :mod:`.variance` (Feller, one Euler
step, the exact law), :mod:`.fourier` (Fourier prices and implied
volatilities), :mod:`.monte_carlo` (Monte Carlo price and check, the step
study, the Euler worst case), :mod:`.pde` (finite differences),
:mod:`.calibration` (the fit to quotes), :mod:`.exotics` (exotic prices
and checks) and :mod:`.greeks` (Greeks by one method, and priced twice).
They stand on :mod:`.registry` (the decorator, the registry, the caches),
:mod:`.arguments` (the checks and ranges several cells share, the per-cell
work cap) and :mod:`.results` (the shape of a cell's answer).
This module imports the job modules in the registry's order and re-exports
every cell and public name, so the add-in's module setting stays
``rootvar.addin.functions``.
"""

# The job modules are imported in the order their cells have always stood in REGISTRY (the order
# of the function wizard and of the docs' reference), so the imports are kept out of sorting.
# isort: off
from rootvar.addin.functions.registry import (
    REGISTRY,
    SheetFunction,
    call,
    clear_cache,
    sheet_function,
)
from rootvar.addin.functions.arguments import (
    KINDS,
    MAX_PATH_STEPS,
    MAX_SEED,
    MAX_YEARS,
    MIN_MATURITY,
    PARAMS_DOC,
    SCHEME_NAMES,
    work_cap,
)
from rootvar.addin.functions.results import step_words, trading_days
from rootvar.addin.functions.version import ROOTVAR_VERSION
from rootvar.addin.functions.variance import (
    MAX_NONCENTRALITY,
    ROOTVAR_FELLER,
    ROOTVAR_EULER_NEG_PROB,
    ROOTVAR_EULER_SAFE_STEP,
    ROOTVAR_VARIANCE_QUANTILE,
    ROOTVAR_VARIANCE_CDF,
    ROOTVAR_VARIANCE_TABLE,
)
from rootvar.addin.functions.fourier import (
    ROOTVAR_FOURIER_PRICE,
    ROOTVAR_FOURIER_VOL,
    ROOTVAR_IMPLIED_VOL,
)
from rootvar.addin.functions.monte_carlo import (
    MC_PATHS,
    MC_STEPS,
    STUDY_PATHS,
    ROOTVAR_MC_PRICE,
    ROOTVAR_MC_CHECK,
    ROOTVAR_STEP_STUDY,
    ROOTVAR_EULER_WORST_CASE,
    ROOTVAR_EULER_WORST_LEVEL,
)
from rootvar.addin.functions.pde import MAX_PDE_WORK, ROOTVAR_PDE_PRICE
from rootvar.addin.functions.calibration import (
    ROOTVAR_CALIBRATE,
    ROOTVAR_CALIBRATION_RESIDUALS,
    ROOTVAR_FELLER_TRADEOFF,
)
from rootvar.addin.functions.exotics import (
    ASIAN_FIXINGS_PER_YEAR,
    EXOTIC_CONTROLS,
    EXOTIC_PRODUCTS,
    ROOTVAR_EXOTIC_PRICE,
    ROOTVAR_EXOTIC_CHECK,
)
from rootvar.addin.functions.greeks import (
    CHECK_COLUMNS,
    GREEK_LABELS,
    GREEK_METHODS,
    GREEK_PRODUCTS,
    GREEKS_PATHS,
    GREEKS_SCHEME,
    NOT_CERTIFIED,
    ROOTVAR_GREEKS,
    ROOTVAR_GREEKS_CHECK,
)
# isort: on

__all__ = [
    "ASIAN_FIXINGS_PER_YEAR",
    "CHECK_COLUMNS",
    "EXOTIC_CONTROLS",
    "EXOTIC_PRODUCTS",
    "GREEKS_PATHS",
    "GREEKS_SCHEME",
    "GREEK_LABELS",
    "GREEK_METHODS",
    "GREEK_PRODUCTS",
    "KINDS",
    "MAX_NONCENTRALITY",
    "MAX_PATH_STEPS",
    "MAX_PDE_WORK",
    "MAX_SEED",
    "MAX_YEARS",
    "MC_PATHS",
    "MC_STEPS",
    "MIN_MATURITY",
    "NOT_CERTIFIED",
    "PARAMS_DOC",
    "REGISTRY",
    "ROOTVAR_CALIBRATE",
    "ROOTVAR_CALIBRATION_RESIDUALS",
    "ROOTVAR_EULER_NEG_PROB",
    "ROOTVAR_EULER_SAFE_STEP",
    "ROOTVAR_EULER_WORST_CASE",
    "ROOTVAR_EULER_WORST_LEVEL",
    "ROOTVAR_EXOTIC_CHECK",
    "ROOTVAR_EXOTIC_PRICE",
    "ROOTVAR_FELLER",
    "ROOTVAR_FELLER_TRADEOFF",
    "ROOTVAR_FOURIER_PRICE",
    "ROOTVAR_FOURIER_VOL",
    "ROOTVAR_GREEKS",
    "ROOTVAR_GREEKS_CHECK",
    "ROOTVAR_IMPLIED_VOL",
    "ROOTVAR_MC_CHECK",
    "ROOTVAR_MC_PRICE",
    "ROOTVAR_PDE_PRICE",
    "ROOTVAR_STEP_STUDY",
    "ROOTVAR_VARIANCE_CDF",
    "ROOTVAR_VARIANCE_QUANTILE",
    "ROOTVAR_VARIANCE_TABLE",
    "ROOTVAR_VERSION",
    "SCHEME_NAMES",
    "STUDY_PATHS",
    "SheetFunction",
    "call",
    "clear_cache",
    "sheet_function",
    "step_words",
    "trading_days",
    "work_cap",
]
