"""The trader's smile-fit sheet: the free and the Feller fit of an invented index smile.

The quotes are invented for the Harbourline desk's Alder 50 equity index:
a Heston smile with extra short-dated put wing and a slightly softer call
wing, rounded to 1 bp of volatility and strikes to 25 index points, so no
Heston parameter set fits it exactly.  Everything else on the sheet is a
formula the headless engine computes.
"""

from __future__ import annotations

import numpy as np
from openpyxl.chart import Reference, ScatterChart, Series

from rootvar.addin.cli.text import CAUTION
from rootvar.addin.workbooks.demo_desk import DESK_NAME, demo_models
from rootvar.addin.workbooks.style import BOLD, INPUT, NOTE, TITLE, array_formula, print_setup
from rootvar.core import HestonParams, heston_implied_vol

__all__ = ["SHEET", "add_calibration_sheet", "invented_smile"]

SHEET = "Smile fit"
#: Quote maturities of the invented smile (years).
MATURITIES = (1 / 12, 2 / 12, 3 / 12, 6 / 12, 9 / 12, 1.0, 1.5, 2.0)
#: Strikes per maturity, in standard deviations of a 20% volatility.
STRIKE_SD = tuple(np.linspace(-2.5, 1.5, 11))
#: Smiles drawn in the first chart (indices into MATURITIES).
CHARTED = (0, 3, 7)
_STATS_ROWS = 19  # rows of ROOTVAR_CALIBRATE's block


def _model():
    return next(m for m in demo_models() if m.model_id == "ALD-EQX")


def invented_smile() -> list[tuple[float, float, float]]:
    """(maturity, strike, implied vol) rows of the invented Alder 50 smile."""
    m = _model()
    shape = HestonParams(v0=0.026, kappa=1.8, theta=0.048, vol_of_vol=0.78, rho=-0.72)
    z = np.array(STRIKE_SD)
    rows = []
    for t in MATURITIES:
        forward = m.spot * np.exp((m.rate - m.div_yield) * t)
        strikes = np.round(forward * np.exp(z * 0.2 * np.sqrt(t)) / 25.0) * 25.0
        vols = heston_implied_vol(shape, m.spot, strikes, t, m.rate, m.div_yield)
        # a steeper short-dated put wing and a softer call wing than Heston can make
        vols = vols + 0.0025 * np.maximum(-z, 0) ** 2 / (1 + 3 * t)
        vols = vols - 0.001 * np.maximum(z, 0) / (1 + t)
        rows += [
            (round(t, 4), float(k), round(float(v), 4)) for k, v in zip(strikes, vols, strict=True)
        ]
    return rows


#: Numbers in label/value blocks: up to four decimals, no trailing noise digits.
_SHORT = "0.0###"


def _formats(ws, top_left: str, rows: int, cols: int, fmt: str) -> None:
    """Give a block of (spill) cells one number format."""
    first = ws[top_left]
    for r in range(first.row, first.row + rows):
        for c in range(first.column, first.column + cols):
            ws.cell(row=r, column=c).number_format = fmt


def add_calibration_sheet(wb) -> None:
    """Append the smile-fit sheet to an openpyxl workbook."""
    m = _model()
    ws = wb.create_sheet(SHEET)
    ws["A1"] = f"{DESK_NAME}: {m.underlying} smile, free fit against Feller (invented quotes)"
    ws["A2"] = CAUTION
    ws["A1"].font, ws["A2"].font = TITLE, NOTE
    inputs = [
        ("spot", m.spot),
        ("rate", m.rate),
        ("dividend yield", m.div_yield),
        ("constraint of the second fit", "enforce"),
        ("Sobol start points", 8),
    ]
    for i, (label, value) in enumerate(inputs):
        ws.cell(row=4 + i, column=1, value=label)
        ws.cell(row=4 + i, column=2, value=value).fill = INPUT
    quotes = invented_smile()
    top = 11
    ws.cell(row=top - 1, column=1, value="market quotes").font = BOLD
    for j, name in enumerate(("maturity", "strike", "implied_vol")):
        ws.cell(row=top, column=1 + j, value=name).font = BOLD
    quote_formats = ("0.0000", "#,##0", "0.00%")  # years, strike, implied vol
    for i, row in enumerate(quotes, start=top + 1):
        for j, value in enumerate(row):
            cell = ws.cell(row=i, column=1 + j, value=value)
            cell.fill, cell.number_format = INPUT, quote_formats[j]
    last = top + len(quotes)
    q = f"$A${top}:$C${last}"
    market = "$B$4,$B$5,$B$6"

    ws["E4"], ws["H4"] = "free fit", "constrained fit"
    ws["E4"].font = ws["H4"].font = BOLD
    array_formula(ws, "E5", _STATS_ROWS, 2, f'=ROOTVAR_CALIBRATE({q},{market},"free",$B$8)')
    array_formula(ws, "H5", _STATS_ROWS, 2, f"=ROOTVAR_CALIBRATE({q},{market},$B$7,$B$8)")
    ws["K4"] = "cost of the constraint"
    ws["K4"].font = BOLD
    costs = [
        ("RMSE (bp)", "=I12-F12"),
        ("largest error (bp)", "=I13-F13"),
        ("Feller ratio", "=I10-F10"),
    ]
    for i, (label, formula) in enumerate(costs):
        ws.cell(row=5 + i, column=11, value=label)
        ws.cell(row=5 + i, column=12, value=formula).number_format = "0.0"
    ws["K9"] = "Feller ratio of the free fit"
    ws["L9"] = "=ROOTVAR_FELLER(E5:F9)"
    ws["K10"] = "Euler negative-step prob., free fit, 1 day"
    ws["L10"] = "=ROOTVAR_EULER_NEG_PROB(E5:F9,1/252)"
    ws["L10"].number_format = "0.00E+00"

    trade_top = 26
    ws.cell(row=trade_top - 1, column=5, value="trade-off: what the constraint costs and buys")
    ws.cell(row=trade_top - 1, column=5).font = BOLD
    array_formula(ws, f"E{trade_top}", 18, 4, f"=ROOTVAR_FELLER_TRADEOFF({q},{market},$B$7,$B$8)")

    res_top = 48
    n = len(quotes)
    ws.cell(row=res_top - 1, column=5, value="residuals, free fit").font = BOLD
    ws.cell(row=res_top - 1, column=12, value="residuals, constrained fit").font = BOLD
    array_formula(
        ws, f"E{res_top}", n + 1, 6, f'=ROOTVAR_CALIBRATION_RESIDUALS({q},{market},"free",$B$8)'
    )
    array_formula(
        ws, f"L{res_top}", n + 1, 6, f"=ROOTVAR_CALIBRATION_RESIDUALS({q},{market},$B$7,$B$8)"
    )
    # spilled values take the formats of the cells they land in: no raw 15-digit numbers
    _formats(ws, "F5", _STATS_ROWS, 1, _SHORT)
    _formats(ws, "I5", _STATS_ROWS, 1, _SHORT)
    _formats(ws, f"E{trade_top + 1}", 17, 4, _SHORT)
    residual_formats = ("0.0000", "#,##0", "0.00%", "0.00%", "+0.0;-0.0;0.0", "0.00")
    for first in ("E", "L"):
        col = ws[f"{first}{res_top}"].column
        for j, fmt in enumerate(residual_formats):
            letter = ws.cell(row=1, column=col + j).column_letter
            _formats(ws, f"{letter}{res_top + 1}", n, 1, fmt)
    print_setup(ws)
    _charts(ws, res_top, len(STRIKE_SD))
    for col, width in {"A": 28, "B": 12, "E": 24, "F": 14, "H": 24, "I": 14, "K": 36}.items():
        ws.column_dimensions[col].width = width


def _charts(ws, res_top: int, per: int) -> None:
    """Market against both fits for a few maturities; free-fit residuals by strike."""
    smile = ScatterChart()
    smile.title = "Market smile (dots) against the free and the Feller fit"
    smile.x_axis.title = "strike"
    smile.y_axis.title = "implied volatility"
    for i in CHARTED:
        first = res_top + 1 + i * per
        end = first + per - 1
        label = f"{MATURITIES[i] * 12:g}m" if MATURITIES[i] < 1 else f"{MATURITIES[i]:g}y"
        xs = Reference(ws, min_col=6, min_row=first, max_row=end)
        dots = Series(Reference(ws, min_col=7, min_row=first, max_row=end), xs, title=label)
        dots.marker.symbol = "circle"
        dots.graphicalProperties.line.noFill = True
        smile.series.append(dots)
        free = Series(
            Reference(ws, min_col=8, min_row=first, max_row=end), xs, title=f"{label} free"
        )
        smile.series.append(free)
        tied = Series(
            Reference(ws, min_col=15, min_row=first, max_row=end), xs, title=f"{label} Feller"
        )
        tied.graphicalProperties.line.dashStyle = "dash"
        smile.series.append(tied)
    smile.height, smile.width = 9, 18
    ws.add_chart(smile, "S4")

    errors = ScatterChart()
    errors.title = "Free fit: implied-vol error by strike, per maturity"
    errors.x_axis.title = "strike"
    errors.y_axis.title = "model minus market (bp)"
    for i, t in enumerate(MATURITIES):
        first = res_top + 1 + i * per
        end = first + per - 1
        label = f"{t * 12:g}m" if t < 1 else f"{t:g}y"
        xs = Reference(ws, min_col=6, min_row=first, max_row=end)
        series = Series(Reference(ws, min_col=9, min_row=first, max_row=end), xs, title=label)
        series.marker.symbol = "circle"
        errors.series.append(series)
    errors.height, errors.width = 9, 18
    ws.add_chart(errors, "S24")
