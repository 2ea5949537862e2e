"""The structurer's exotics sheet: three exotics priced twice, and a barrier chart.

The Harbourline desk's Corvid Shipping model (the one on the *Price twice*
sheet) prices a down-and-out call, an arithmetic Asian call and a
forward-start call by Monte Carlo with a control variate and by a second
method (the PDE, a reference Monte Carlo run, the Fourier forward-start
price), with the verdict of each.  A chart shows the barrier price against
the barrier level by Monte Carlo and by the PDE.  Every number on the sheet is
a formula the headless engine computes; the contracts are invented.
"""

from __future__ import annotations

from openpyxl.chart import Reference, ScatterChart, Series
from openpyxl.chart.shapes import GraphicalProperties
from openpyxl.styles import Alignment
from openpyxl.worksheet.pagebreak import Break

from rootvar.addin.workbooks.demo_desk import DESK_NAME, demo_models
from rootvar.addin.workbooks.style import BOLD, INPUT, LINE_HEIGHT, NOTE, axes, heading, print_setup

__all__ = [
    "BARRIER_LEVELS",
    "CONTRACT_ROWS",
    "CONTRACT_TOP",
    "PRODUCTS",
    "SHEET",
    "add_exotics_sheet",
]

SHEET = "Exotics"
_MODEL = "CRV-SHP"
_PRICE = "0.0000"

#: Contract rows (label, ROOTVAR_EXOTIC_* argument) and the three invented contracts, one
#: column each from E, the first contract row being CONTRACT_TOP.
CONTRACT_ROWS = (
    ("product", "product"),
    ("kind", "kind"),
    ("strike", "strike"),
    ("maturity (years)", "maturity"),
    ("barrier", "barrier"),
    ("direction", "direction"),
    ("knock", "knock"),
    ("start (years)", "start"),
    ("strike as share of spot at start", "strike_share"),
)
CONTRACT_TOP = 5
PRODUCTS = (
    ("down-and-out call", {"product": "barrier", "kind": "call", "strike": 40.0,
                           "maturity": 1.0, "barrier": 34.0, "direction": "down",
                           "knock": "out"}),
    ("arithmetic Asian call, monthly fixings", {"product": "asian", "kind": "call",
                                                "strike": 40.0, "maturity": 1.0}),
    ("forward-start call", {"product": "forward start", "kind": "call", "maturity": 1.0,
                            "start": 0.5, "strike_share": 1.0}),
)  # fmt: skip
#: Barrier levels of the chart (the down-and-out call above, spot 38.6).
BARRIER_LEVELS = (26.0, 28.0, 30.0, 32.0, 34.0, 36.0, 37.5)
#: Paths per Monte Carlo point of the chart (a tenth of a second each).
CHART_PATHS = 50_000

_ARG_ORDER = (
    "product", "kind", "strike", "maturity", "barrier", "direction", "knock", "rebate", "dates",
    "start", "strike_share", "cash",
)  # fmt: skip


def _model():
    return next(m for m in demo_models() if m.model_id == _MODEL)


def _contract_args(col: str, first_row: int) -> str:
    """The product arguments of ROOTVAR_EXOTIC_* read from one contract column."""
    rows = {arg: first_row + i for i, (_, arg) in enumerate(CONTRACT_ROWS)}
    return ",".join(f"{col}{rows[a]}" if a in rows else "" for a in _ARG_ORDER)


def add_exotics_sheet(wb, price_twice: str = "Price twice") -> None:
    """Append the exotics sheet; the model and market come from the *Price twice* sheet."""
    m = _model()
    ws = wb.create_sheet(SHEET)
    heading(ws, f"{DESK_NAME}: {m.underlying} exotics priced twice (invented contracts)")
    pt = f"'{price_twice}'"

    ws["A4"] = "Model (from Price twice)"
    ws["A4"].font = BOLD
    names = ("v0", "kappa", "theta", "vol_of_vol", "rho")
    kinds = ("0.0000", "0.00", "0.0000", "0.00", "0.00")
    for i, (name, fmt) in enumerate(zip(names, kinds, strict=True)):
        ws.cell(row=5 + i, column=1, value=name)
        ws.cell(row=5 + i, column=2, value=f"={pt}!B{5 + i}").number_format = fmt
    block = "$A$5:$B$9"
    ws["A11"] = "Market and simulation"
    ws["A11"].font = BOLD
    inputs = [
        ("spot", f"={pt}!B12", _PRICE, False),
        ("rate", f"={pt}!B15", "0.00%", False),
        ("dividend yield", f"={pt}!B16", "0.00%", False),
        ("scheme", "qe", None, True),
        ("steps per year", None, "#,##0", True),  # blank: the engine's default by product
        ("paths (antithetic)", 100000, "#,##0", True),
        ("seed", 20240601, "0", True),
        ("tolerance (price)", "=0.001*B12", _PRICE, True),
        ("band width (std errors)", 3, "0.0", True),
    ]
    for i, (label, value, fmt, editable) in enumerate(inputs):
        ws.cell(row=12 + i, column=1, value=label)
        cell = ws.cell(row=12 + i, column=2, value=value)
        if fmt:
            cell.number_format = fmt
        if editable:
            cell.fill = INPUT
    notes = (
        "Shaded blue-grey: inputs.",
        "Tolerance: 0.1% of the spot by default.",
        "Scheme: the Step study's recommendation.",
        "Steps per year blank: 256 for the barrier",
        "(its crossing bias falls with the step),",
        "64 otherwise; never fewer than the",
        "Step study's count.",
    )
    for i, text in enumerate(notes):
        ws.cell(row=22 + i, column=1, value=text).font = NOTE
    market = "$B$12"
    rates = "$B$13,$B$14"
    run = "$B$15,$B$16,$B$17,$B$18"

    # contracts: one column each
    cols = ("E", "F", "G")
    ws["D4"] = "contract"
    ws["D4"].font = BOLD
    top = CONTRACT_TOP
    for i, (label, _) in enumerate(CONTRACT_ROWS):
        ws.cell(row=top + i, column=4, value=label)
    for col, (title, spec) in zip(cols, PRODUCTS, strict=True):
        head = ws[f"{col}4"]
        head.value, head.font = title, BOLD
        head.alignment = Alignment(wrap_text=True, vertical="bottom")
        for i, (_, arg) in enumerate(CONTRACT_ROWS):
            cell = ws[f"{col}{top + i}"]
            if arg in spec:
                cell.value, cell.fill = spec[arg], INPUT
                if arg in ("strike", "barrier"):
                    cell.number_format = "0.00"
                elif arg in ("maturity", "start", "strike_share"):
                    cell.number_format = "0.00"
    ws.row_dimensions[4].height = 30

    # results: INDEX into the label/value blocks of the two functions
    price_rows = (
        ("Monte Carlo price, with control variate", 1, _PRICE),
        ("std error", 2, _PRICE),
        ("control variate", 5, None),
        ("variance reduction (x)", 7, "0.0"),
        ("Monte Carlo price, without control", 8, _PRICE),
        ("std error without control", 9, _PRICE),
        ("steps in all", 11, "#,##0"),
        ("seconds", 12, "0.00"),
    )
    check_rows = (
        ("second method", 3, None),
        ("second price", 4, _PRICE),
        ("second error", 5, "0.0E+00"),
        ("second error is a", 6, None),
        ("second method status", 7, None),
        ("difference (MC - second)", 8, "+0.0000;-0.0000;0.0000"),
        ("band half-width", 9, _PRICE),
        ("verdict", 11, None),
        ("paths to settle", 12, "#,##0"),
        ("reason", 13, None),
    )
    blocks = (
        ("Monte Carlo", price_rows, "ROOTVAR_EXOTIC_PRICE({args},{run})"),
        (
            "Second method and verdict",
            check_rows,
            "ROOTVAR_EXOTIC_CHECK({args},{run},,$B$19,$B$20)",
        ),
    )
    r = top + len(CONTRACT_ROWS) + 1
    for title, rows, call in blocks:
        ws.cell(row=r, column=4, value=title).font = BOLD
        r += 1
        for label, k, fmt in rows:
            ws.cell(row=r, column=4, value=label)
            for col in cols:
                args = f"{block},{market},{_contract_args(col, top)},{rates}"
                cell = ws[f"{col}{r}"]
                cell.value = f"=INDEX({call.format(args=args, run=run)},{k},2)"
                if fmt:
                    cell.number_format = fmt
                if label == "verdict":
                    cell.font = BOLD
                if label == "reason":
                    cell.alignment = Alignment(wrap_text=True, vertical="top")
            if label == "reason":
                ws.row_dimensions[r].height = LINE_HEIGHT * 9
                ws.cell(row=r, column=4).alignment = Alignment(vertical="top")
            r += 1
        r += 1
    r -= 1

    _barrier_chart(ws, r + 1, block, market, rates, top)
    widths = {"A": 26, "B": 12, "C": 3, "D": 36, "E": 26, "F": 26, "G": 26, "H": 12, "I": 14}
    widths.update({"J": 12, "K": 12, "L": 12})
    for col, width in widths.items():
        ws.column_dimensions[col].width = width
    print_setup(ws)


def _barrier_chart(ws, row: int, block: str, market: str, rates: str, top: int) -> None:
    """Barrier price against the barrier level, by Monte Carlo and by the PDE."""
    ws.row_breaks.append(Break(id=row - 1))  # the barrier study prints on its own page
    ws.cell(row=row, column=4, value="Down-and-out call against the barrier level").font = BOLD
    headers = ("barrier", "Monte Carlo", "MC std error", "PDE", "PDE error estimate", "PDE status")
    for j, text in enumerate(headers):
        cell = ws.cell(row=row + 1, column=4 + j, value=text)
        cell.font = BOLD
        # numbers sit at the right of these wide columns: so do their headers
        side = "left" if j == 0 or text == "PDE status" else "right"
        cell.alignment = Alignment(
            wrap_text=True, vertical="bottom", horizontal=side, indent=int(j == 5)
        )
    ws.row_dimensions[row + 1].height = 30
    contract = {arg: f"$E${top + i}" for i, (_, arg) in enumerate(CONTRACT_ROWS)}
    first = row + 2
    for i, level in enumerate(BARRIER_LEVELS):
        r = first + i
        level_cell = ws.cell(row=r, column=4, value=level)
        level_cell.number_format, level_cell.fill = "0.00", INPUT
        level_cell.alignment = Alignment(horizontal="left")
        mc_args = ",".join(f"$D{r}" if a == "barrier" else contract.get(a, "") for a in _ARG_ORDER)
        mc = (
            f"ROOTVAR_EXOTIC_PRICE({block},{market},{mc_args},{rates},$B$15,$B$16,"
            f"{CHART_PATHS},$B$18)"
        )
        pde = (
            f"ROOTVAR_PDE_PRICE({block},{market},{contract['strike']},{contract['maturity']},"
            f"{contract['kind']},$D{r},{contract['direction']},{contract['knock']},,,{rates})"
        )
        formulas = (
            f"=INDEX({mc},1,2)",
            f"=INDEX({mc},2,2)",
            f"=INDEX({pde},1,2)",
            f"=INDEX({pde},2,2)",
            f"=INDEX({pde},3,2)",
        )
        for j, formula in enumerate(formulas):
            cell = ws.cell(row=r, column=5 + j, value=formula)
            cell.number_format = ("0.0000", "0.0000", "0.0000", "0.0E+00", "General")[j]
            if j == 4:  # the status text, set off from the number before it
                cell.alignment = Alignment(horizontal="left", indent=1)
    last = first + len(BARRIER_LEVELS) - 1
    ws.cell(
        row=last + 1,
        column=4,
        value=f"Monte Carlo points: {CHART_PATHS:,} paths each. A PDE price whose status is not "
        "converged is not settled: its error estimate exceeds 0.1% of the spot.",
    )
    ws.cell(row=last + 1, column=4).font = NOTE

    # the gap between the methods against the Monte Carlo noise: the point of the check
    extra = ("MC minus PDE", "+3 MC std errors", "-3 MC std errors")
    for j, text in enumerate(extra):
        cell = ws.cell(row=row + 1, column=10 + j, value=text)
        cell.font = BOLD
        cell.alignment = Alignment(wrap_text=True, vertical="bottom", horizontal="right")
    for r in range(first, last + 1):
        for j, formula in enumerate((f"=E{r}-G{r}", f"=3*F{r}", f"=-3*F{r}")):
            ws.cell(row=r, column=10 + j, value=formula).number_format = "+0.0000;-0.0000;0.0000"

    xs = Reference(ws, min_col=4, min_row=first, max_row=last)
    prices = _scatter("Down-and-out call: price against the barrier", "barrier level", "price")
    pde_series = Series(Reference(ws, min_col=7, min_row=first, max_row=last), xs, title="PDE")
    _line(pde_series, "1F4E79", "solid")
    prices.series.extend([pde_series, _dots(ws, 5, first, last, xs, "Monte Carlo")])
    ws.add_chart(prices, f"D{last + 3}")

    gap = _scatter("Monte Carlo minus PDE, with 3 std errors", "barrier level", "price difference")
    gap.series.append(_dots(ws, 10, first, last, xs, "MC minus PDE"))
    for col, title in ((11, "+3 std errors"), (12, "-3 std errors")):
        band = Series(Reference(ws, min_col=col, min_row=first, max_row=last), xs, title=title)
        _line(band, "7F7F7F", "dash")
        gap.series.append(band)
    ws.add_chart(gap, f"G{last + 3}")


def _scatter(title: str, x_title: str, y_title: str) -> ScatterChart:
    """A scatter chart with its axes set explicitly (shown in every spreadsheet program)."""
    chart = ScatterChart()
    chart.title = title
    axes(chart, x_title, y_title)
    chart.x_axis.scaling.min, chart.x_axis.scaling.max = 25, 39
    chart.x_axis.number_format = "0"
    chart.y_axis.number_format = "0.00"
    chart.height, chart.width = 8, 15
    chart.legend.position = "b"
    return chart


def _line(series, colour: str, dash: str) -> None:
    series.marker.symbol = "none"
    series.graphicalProperties.line.solidFill = colour
    series.graphicalProperties.line.dashStyle = dash
    series.graphicalProperties.line.width = 22000
    series.smooth = False


def _dots(ws, col: int, first: int, last: int, xs, title: str) -> Series:
    """Filled round markers, no line: Monte Carlo points."""
    series = Series(Reference(ws, min_col=col, min_row=first, max_row=last), xs, title=title)
    series.marker.symbol, series.marker.size = "circle", 7
    series.marker.graphicalProperties = GraphicalProperties(solidFill="C55A11")
    series.marker.graphicalProperties.line.solidFill = "C55A11"
    series.graphicalProperties.line.noFill = True
    series.smooth = False
    return series
