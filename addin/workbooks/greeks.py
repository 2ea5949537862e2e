"""The structurer's Greeks sheet: the hedge of two contracts, priced twice.

The vanilla of the *Price twice* sheet (the Corvid Shipping call, strike 40, one
year) gets its certified Fourier Greeks (``ROOTVAR_GREEKS``) and its Monte Carlo
Greeks held against them; the down-and-out call of the *Exotics* sheet its Monte
Carlo Greeks held against the PDE's (``ROOTVAR_GREEKS_CHECK``), each Greek with
its unit, both methods' error figures, the band, the tolerance and the verdict.
The model, the market and both contracts are read from those sheets, so a
change there moves every table here.  Every number is a formula the headless
engine computes; the contracts are invented.
"""

from __future__ import annotations

from openpyxl.formatting.rule import FormulaRule
from openpyxl.styles import Alignment
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.pagebreak import Break

from rootvar.addin.functions.greeks import CHECK_COLUMNS, GREEKS_PATHS, GREEKS_SCHEME
from rootvar.addin.workbooks.demo_desk import DESK_NAME, demo_models
from rootvar.addin.workbooks.exotics import CONTRACT_ROWS, CONTRACT_TOP
from rootvar.addin.workbooks.exotics import SHEET as EXOTICS
from rootvar.addin.workbooks.style import (
    BOLD,
    BREACH,
    FORMATS,
    INPUT,
    LINE_HEIGHT,
    NOTE,
    array_formula,
    column_widths,
    heading,
    print_setup,
    table_header,
)
from rootvar.core.greeks import GREEK_NAMES

__all__ = [
    "CHECK_HEADERS",
    "ESTIMATOR_LINES",
    "GREEKS_HEADERS",
    "PATHS",
    "ROWS",
    "SHEET",
    "TABLES",
    "add_greeks_sheet",
]

SHEET = "Greeks twice"
_MODEL = "CRV-SHP"
#: Paths of each Monte Carlo check on the sheet (the cells' default): the headless compute
#: of both checks stays near two seconds.
PATHS = GREEKS_PATHS
#: The rows of every table below its header: the price, then each Greek.
ROWS = ("price", *GREEK_NAMES)
#: Headers the functions spill (the Greeks table's by Fourier; known here for the width rule).
GREEKS_HEADERS = ("Greek", "unit", "value", "error estimate", "estimator")
CHECK_HEADERS = CHECK_COLUMNS
#: Title, header row and kind of each table: the call's Fourier Greeks, its check against
#: them, the barrier's check against the PDE.
TABLES = (
    ("Call, strike 40, one year: Fourier Greeks (certified)", 12, "greeks"),
    ("Call, strike 40, one year: Monte Carlo Greeks against Fourier", 27, "check"),
    ("Down-and-out call, barrier 34: Monte Carlo Greeks against the PDE", 43, "check"),
)
#: Lines the last column's text takes in a check table's rows, where more than one (the
#: Monte Carlo estimator of each Greek; the notes on the overall row), by
#: :func:`~rootvar.addin.workbooks.style.text_lines`.  The texts come from the core; a test
#: holds each computed one to its row.
ESTIMATOR_LINES = (
    {"overall": 5},
    {"delta": 3, "gamma": 3, "theta": 2, "rho_rate": 2, "rho_div": 2, "d_v0": 2, "d_kappa": 2,
     "d_theta": 2, "d_vol_of_vol": 2, "overall": 5},
)  # fmt: skip
_FIRST_COL = 4  # column D
# paths to settle (10): room for a count in the tens of billions with its separators
_WIDTHS = {0: 20, 1: 27, 2: 11, 3: 10, 4: 11, 5: 11, 6: 11, 7: 11, 8: 11, 9: 13, 10: 16, 11: 66}
_TEXT_COLUMNS = ("Greek", "unit", "verdict", "estimator", "Monte Carlo estimator")
#: The contract rows of the exotics sheet the barrier's Greeks read, and their formats.
_BARRIER_ARGS = ("kind", "strike", "maturity", "barrier", "direction", "knock")
_CONTRACT_FORMATS = {"strike": "price", "maturity": "years", "barrier": "price"}
_NOTES = (
    "Shaded blue-grey: inputs. Shaded rose: a verdict of biased (the band lies wholly outside "
    "the tolerance).",
    "Steps per year blank: 256 for the barrier, 64 for the call. Only the Euler schemes give "
    "theta, vega",
    "and the variance Greeks. Tolerances, each per unit of its input: price 0.1% of the spot, "
    "delta 0.005,",
    "gamma 0.05 / spot, theta 0.2% of the spot a year, vega 0.5% of the spot, every other "
    "Greek 1% of the spot.",
    "Vega moves sqrt(v0) and sqrt(theta) together, per 1.00 of volatility; theta is dV/dt "
    "per year.",
    "Paths to settle: a rerun at that count decides an undecided Greek in 90% of cases; "
    "no count: the",
    "reference's own error fills the tolerance, so more paths cannot decide.",
)


def _model():
    return next(m for m in demo_models() if m.model_id == _MODEL)


def _kind(name: str, column: str) -> str:
    """The number format of one Greek's cell in a table column (:data:`FORMATS`)."""
    gamma = name == "gamma"
    if column in ("error estimate", "reference error"):
        return "error_estimate"
    if column == "paths to settle":
        return "count"
    if column == "difference":
        return "gamma_difference" if gamma else "greek_difference"
    return "gamma" if gamma else "greek"


def _inputs(ws, top: int, col: int, title: str, rows) -> dict:
    """A titled block of label / value rows; returns each label's value cell."""
    ws.cell(row=top, column=col, value=title).font = BOLD
    where = {}
    for i, (label, value, kind, editable) in enumerate(rows, start=1):
        ws.cell(row=top + i, column=col, value=label)
        cell = ws.cell(row=top + i, column=col + 1, value=value)
        if kind:
            cell.number_format = FORMATS[kind]
        if editable:
            cell.fill = INPUT
        where[label] = f"${get_column_letter(col + 1)}${top + i}"
    return where


def add_greeks_sheet(wb, price_twice: str = "Price twice") -> None:
    """Append the Greeks sheet: model, call and seed from *Price twice*, the barrier from
    *Exotics*."""
    m = _model()
    ws = wb.create_sheet(SHEET)
    heading(ws, f"{DESK_NAME}: {m.underlying} Greeks priced twice (invented contracts)")
    pt, ex = f"'{price_twice}'", f"'{EXOTICS}'"

    params = (("v0", "variance"), ("kappa", "param"), ("theta", "variance"),
              ("vol_of_vol", "param"), ("rho", "param"))  # fmt: skip
    model = [(name, f"={pt}!B{5 + i}", kind, False) for i, (name, kind) in enumerate(params)]
    _inputs(ws, 4, 1, "Model (from Price twice)", model)
    block = "$A$5:$B$9"
    # the titles sit on the tables' header rows, which are taller: no input row stands apart
    call = _inputs(ws, TABLES[0][1], 1, "Call (from Price twice)", (
        ("spot", f"={pt}!B12", "price", False),
        ("strike", f"={pt}!B13", "price", False),
        ("maturity (years)", f"={pt}!B14", "years", False),
        ("rate", f"={pt}!B15", "rate", False),
        ("dividend yield", f"={pt}!B16", "rate", False),
        ("kind", f"={pt}!B17", None, False),
    ))  # fmt: skip
    contract = {arg: (label, f"={ex}!E{CONTRACT_TOP + i}")
                for i, (label, arg) in enumerate(CONTRACT_ROWS)}  # fmt: skip
    barrier = _inputs(ws, TABLES[0][1] + 8, 1, "Down-and-out call (from Exotics)", [
        (*contract[arg], _CONTRACT_FORMATS.get(arg), False) for arg in _BARRIER_ARGS
    ])  # fmt: skip
    run = _inputs(ws, 4, _FIRST_COL, "Monte Carlo (both checks)", (
        ("scheme", GREEKS_SCHEME, None, True),
        ("steps per year", None, "count", True),  # blank: the engine's default by product
        ("paths (antithetic)", PATHS, "count", True),
        ("seed (Price twice)", f"={pt}!B21", "seed", False),
        ("band (std errors)", 3, "z", True),
    ))  # fmt: skip
    for i, text in enumerate(_NOTES):
        ws.cell(row=4 + i, column=_FIRST_COL + 3, value=text).font = NOTE

    spot, strike, maturity = (call[k] for k in ("spot", "strike", "maturity (years)"))
    rate, div, kind = (call[k] for k in ("rate", "dividend yield", "kind"))
    bar = {arg: barrier[contract[arg][0]] for arg in _BARRIER_ARGS}
    mc = ",".join(run[k] for k in ("scheme", "steps per year", "paths (antithetic)",
                                   "seed (Price twice)"))  # fmt: skip
    z = run["band (std errors)"]
    formulas = (
        f'=ROOTVAR_GREEKS({block},{spot},{strike},{maturity},{rate},{div},{kind},"fourier")',
        # product, kind, strike, maturity, barrier, direction, knock, rebate, dates, start,
        # strike_share, cash: ROOTVAR_EXOTIC_CHECK's argument order
        f'=ROOTVAR_GREEKS_CHECK({block},{spot},"european",{kind},{strike},{maturity},'
        f",,,,,,,,{rate},{div},{mc},{z})",
        f'=ROOTVAR_GREEKS_CHECK({block},{spot},"barrier",{bar["kind"]},{bar["strike"]},'
        f"{bar['maturity']},{bar['barrier']},{bar['direction']},{bar['knock']},,,,,,"
        f"{rate},{div},{mc},{z})",
    )
    checks = iter(ESTIMATOR_LINES)
    for (title, header, what), formula in zip(TABLES, formulas, strict=True):
        ws.cell(row=header - 1, column=_FIRST_COL, value=title).font = BOLD
        headers = GREEKS_HEADERS if what == "greeks" else CHECK_HEADERS
        table_header(ws, header, _FIRST_COL, headers, _WIDTHS)
        for j, column in enumerate(headers):
            cell = ws.cell(row=header, column=_FIRST_COL + j)
            cell.value = None  # the function spills its own header
            side = "left" if column in _TEXT_COLUMNS else "right"
            # a space between a column of numbers and its neighbours, headers with them
            indent = int(column not in ("Greek", "unit"))
            cell.alignment = Alignment(
                wrap_text=True, vertical="bottom", horizontal=side, indent=indent
            )
        # the Greeks table without its notes row (the route's details, repeated in the check's)
        height = 1 + len(ROWS) + (what == "check")
        array_formula(ws, f"D{header}", height, len(headers), formula)
        _format_table(ws, header, headers, what, next(checks) if what == "check" else {})
    # the barrier's check prints on a page of its own, its title with it
    ws.row_breaks.append(Break(id=TABLES[2][1] - 2))
    column_widths(ws, {"A": 26, "B": 12, "C": 3})
    print_setup(ws, "1:2")  # the title and the caution on both pages


def _format_table(ws, header: int, headers, what: str, lines: dict) -> None:
    """Number formats per Greek and column, alignments, row heights, the rose for biased."""
    top = header + 1
    names = (*ROWS, "overall") if what == "check" else ROWS
    for i, name in enumerate(names):
        r = top + i
        for j, column in enumerate(headers):
            cell = ws.cell(row=r, column=_FIRST_COL + j)
            if column in _TEXT_COLUMNS:
                # texts beside numbers keep a space from them; the estimator of a check
                # wraps in its column, the Greeks table's runs on to the empty right
                cell.alignment = Alignment(
                    vertical="top",
                    horizontal="left",
                    indent=int(column in ("verdict", "estimator", "Monte Carlo estimator")),
                    wrap_text=column == "Monte Carlo estimator",
                )
            else:
                cell.alignment = Alignment(vertical="top", horizontal="right", indent=1)
                if name != "overall":
                    cell.number_format = FORMATS[_kind(name, column)]
        if lines.get(name, 1) > 1:
            ws.row_dimensions[r].height = LINE_HEIGHT * lines[name]
    if what == "greeks":
        return
    last = top + len(ROWS)  # the overall row: reference method, verdict, notes
    verdict_col = _FIRST_COL + headers.index("verdict")
    for col in (_FIRST_COL, verdict_col):
        ws.cell(row=last, column=col).font = BOLD
    verdict = get_column_letter(verdict_col)
    ws.conditional_formatting.add(
        f"{verdict}{top}:{verdict}{last}",
        FormulaRule(formula=[f'{verdict}{top}="biased"'], fill=BREACH, stopIfTrue=False),
    )
