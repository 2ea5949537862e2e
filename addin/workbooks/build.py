"""Build the shipped workbooks from the invented demo desk, deterministically.

``rootvar build-workbooks`` writes them into ``workbooks/``; a test rebuilds
them and compares the bytes with the committed files.  Formulas that return
tables are written as array formulas over the exact range they fill, so they
show the whole table in every spreadsheet version and the headless engine
fills the same cells.
"""

from __future__ import annotations

from pathlib import Path

from openpyxl import Workbook
from openpyxl.chart import BarChart, Reference, ScatterChart, Series
from openpyxl.formatting.rule import FormulaRule
from openpyxl.styles import Alignment
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.formula import ArrayFormula

from rootvar.addin.cli.text import CAUTION
from rootvar.addin.workbooks.demo_desk import DESK_NAME, demo_models
from rootvar.addin.workbooks.style import (
    BOLD,
    BREACH,
    FORMATS,
    INPUT,
    LINE_HEIGHT,
    NOTE,
    TITLE,
    array_formula,
    axes,
    column_widths,
    heading,
    line_style,
    number_format,
    print_setup,
    save_deterministic,
    table_header,
)
from rootvar.core import DEFAULT_QUANTILES

__all__ = ["CONTROL", "PARAMETER_CHECK", "PRICE_TWICE", "build_all", "save_deterministic"]

PARAMETER_CHECK = "parameter_check.xlsx"
PRICE_TWICE = "price_twice.xlsx"
CONTROL = "control.xlsx"


def _params_block(ws, row: int, col: int, params, fill=True) -> str:
    """Label/value block of five rows; returns its range."""
    labels = ("v0", "kappa", "theta", "vol_of_vol", "rho")
    kinds = ("variance", "param", "variance", "param", "param")
    for i, label in enumerate(labels):
        ws.cell(row=row + i, column=col, value=label)
        cell = ws.cell(row=row + i, column=col + 1, value=getattr(params, label))
        cell.number_format = FORMATS[kinds[i]]
        if fill:
            cell.fill = INPUT
    a = f"{get_column_letter(col)}{row}"
    b = f"{get_column_letter(col + 1)}{row + 4}"
    return f"{a}:{b}"


def _step_words(cell: str) -> str:
    """Formula text naming the production step of ``cell`` (years) in trading days."""
    days = f"ROUND({cell}*252,2)"
    return f'"step "&{days}&IF({days}=1," trading day"," trading days")'


def build_parameter_check(path: Path) -> None:
    """The trader's workbook: every desk model's Euler risk and one model's exact law."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Desk models"
    heading(ws, f"{DESK_NAME}: Heston variance check (invented data)")
    ws["A4"], ws["B4"] = "Production Euler step (years)", "=1/252"
    ws["C4"] = '=ROUND(B4*252,2)&" trading days"'
    ws["A5"], ws["B5"] = "Acceptable one-step negative probability", 0.001
    number_format(ws, "B4", "step_years")
    number_format(ws, "B5", "probability")
    ws["B5"].fill = INPUT
    ws["A6"] = (
        "Shaded blue-grey: inputs. Shaded rose: a negative-step probability above the "
        "acceptable one (B5), and B5 itself when any row breaches it."
    )
    ws["A6"].font = NOTE
    header = [
        "model",
        "underlying",
        "v0",
        "kappa",
        "theta",
        "vol_of_vol",
        "rho",
        "Feller ratio",
        '="negative-step prob. at the production step ("&' + _step_words("$B$4") + '&")"',
        '="worst-case negative-step prob. over all variance levels ("&'
        + _step_words("$B$4")
        + '&")"',
        '="riskiest variance level v* ("&' + _step_words("$B$4") + '&")"',
        "largest safe step (years)",
        "largest safe step (trading days)",
    ]
    # what the header formulas compute to at the shipped step (for the width rule)
    step = "step 1 trading day"
    shown = header[:8] + [
        f"negative-step prob. at the production step ({step})",
        f"worst-case negative-step prob. over all variance levels ({step})",
        f"riskiest variance level v* ({step})",
    ]
    shown += header[11:]
    table_header(ws, 7, 1, shown, {1: 24, 8: 16, 9: 16, 10: 16, 11: 12, 12: 12})
    for j, h in enumerate(header, start=1):
        ws.cell(row=7, column=j, value=h)
    models = demo_models()
    for i, m in enumerate(models):
        r = 8 + i
        p = m.params
        row = [m.model_id, m.underlying, p.v0, p.kappa, p.theta, p.vol_of_vol, p.rho]
        for j, v in enumerate(row, start=1):
            ws.cell(row=r, column=j, value=v)
        for j, kind in zip(
            range(3, 8), ("variance", "param", "variance", "param", "param"), strict=True
        ):
            ws.cell(row=r, column=j).fill = INPUT
            ws.cell(row=r, column=j).number_format = FORMATS[kind]
        block = f"C{r}:G{r}"
        ws[f"H{r}"] = f"=ROOTVAR_FELLER({block})"
        ws[f"I{r}"] = f"=ROOTVAR_EULER_NEG_PROB({block},$B$4)"
        ws[f"J{r}"] = f"=ROOTVAR_EULER_WORST_CASE({block},$B$4)"
        ws[f"K{r}"] = f"=ROOTVAR_EULER_WORST_LEVEL({block},$B$4)"
        ws[f"L{r}"] = f"=ROOTVAR_EULER_SAFE_STEP({block},$B$5)"
        ws[f"M{r}"] = f'=IF(L{r}="unbounded","unbounded",L{r}*252)'
        number_format(ws, f"H{r}", "ratio")
        number_format(ws, f"I{r}", "probability")
        number_format(ws, f"J{r}", "probability")
        number_format(ws, f"K{r}", "variance_log")
        number_format(ws, f"L{r}", "step_years")
        number_format(ws, f"M{r}", "days")
    last = 7 + len(models)
    ws.conditional_formatting.add(
        f"I8:I{last}", FormulaRule(formula=["I8>$B$5"], fill=BREACH, stopIfTrue=False)
    )
    ws.conditional_formatting.add(
        "B5", FormulaRule(formula=[f"MAX(I8:I{last})>B5"], fill=BREACH, stopIfTrue=False)
    )
    column_widths(ws, {"A": 14})
    for ref in ("A4", "A5"):  # long labels wrap in the model column rather than run under B
        ws[ref].alignment = Alignment(wrap_text=True, vertical="top")
        ws.row_dimensions[ws[ref].row].height = LINE_HEIGHT * 3
    ws.freeze_panes = "C8"
    print_setup(ws, "7:7")

    law = wb.create_sheet("Variance law")
    chosen = next(m for m in models if m.model_id == "TMS-BIO")
    heading(
        law,
        f"Exact law of the variance: {chosen.model_id} ({chosen.underlying})",
        "Change the parameters or horizons (shaded); the table and charts follow. " + CAUTION,
    )
    block = _params_block(law, 4, 1, chosen.params)
    law["A10"], law["B10"] = "Production Euler step (years)", "='Desk models'!B4"
    law["C10"] = '=ROUND(B10*252,2)&" trading days"'
    number_format(law, "B10", "step_years")
    law["A11"], law["B11"] = "Near-zero variance level", 1e-4
    number_format(law, "B11", "variance_log")
    law["B11"].fill = INPUT
    law["A14"] = "horizons (years)"
    law["A14"].font = BOLD
    law["A14"].alignment = Alignment(vertical="bottom")
    horizons = [0.08, 0.25, 0.5, 1.0, 2.0, 5.0]
    for i, h in enumerate(horizons):
        law.cell(row=15 + i, column=1, value=h).fill = INPUT
        law.cell(row=15 + i, column=1).number_format = FORMATS["years"]
    h_range = f"A15:A{14 + len(horizons)}"
    # horizon, mean, std, quantiles, near zero, Euler at v0, worst case, v*, P(v <= v*), notes
    cols = 1 + 2 + len(DEFAULT_QUANTILES) + 1 + 4 + 1
    law["C13"] = "exact-law table (the Euler columns state the step)"
    law["C13"].font = BOLD
    array_formula(
        law, "C14", 1 + len(horizons), cols, f"=ROOTVAR_VARIANCE_TABLE({block},{h_range},,B10,B11)"
    )
    first, last = 15, 14 + len(horizons)
    kinds = ["years", "variance", "variance"] + ["variance_log"] * len(DEFAULT_QUANTILES)
    kinds += ["probability", "probability", "probability", "variance_log", "probability"]
    for j, kind in enumerate(kinds):
        for r in range(first, last + 1):
            law.cell(row=r, column=3 + j).number_format = FORMATS[kind]
    # the headers come from the function; their words are known here for the width rule
    step = "(step 0.003968 y = 1 trading day)"
    words = ["horizon (years)", "mean", "std dev"] + [f"q{100 * q:g}%" for q in DEFAULT_QUANTILES]
    words += ["P(variance < near-zero level)", f"Euler negative-step prob. at v0 {step}"]
    words += [f"Euler worst-case negative-step prob. {step}", f"riskiest variance level v* {step}"]
    words += [f"P(variance <= v*) {step}", "notes"]
    widths = {j: 11 for j in range(len(words))}
    widths.update({j: 17 for j in range(len(words) - 5, len(words) - 1)})
    table_header(law, 14, 3, words, widths)
    for j in range(len(words)):
        law.cell(row=14, column=3 + j).value = None  # the array formula fills the header
    law["C14"] = ArrayFormula(
        f"C14:{get_column_letter(2 + cols)}{last}",
        f"=ROOTVAR_VARIANCE_TABLE({block},{h_range},,B10,B11)",
    )
    law.column_dimensions[get_column_letter(2 + cols)].width = 24
    near_zero_col = 3 + 3 + len(DEFAULT_QUANTILES)  # C + horizon, mean, std, quantiles
    bars = BarChart()
    bars.title = "P(variance below the near-zero level)"
    axes(bars, "horizon (years)", "probability")
    bars.y_axis.numFmt = "0%"
    bars.add_data(
        Reference(law, min_col=near_zero_col, min_row=14, max_row=last), titles_from_data=True
    )
    bars.set_categories(Reference(law, min_col=3, min_row=first, max_row=last))
    bars.legend = None
    bars.height, bars.width = 9, 13
    law.add_chart(bars, "C22")
    quant = ScatterChart()
    quant.title = "Variance quantiles (log scale)"
    quant.style = 13
    axes(quant, "horizon (years)", "variance (log scale)")
    quant.y_axis.scaling.logBase = 10
    quant.y_axis.numFmt = "0.0E+00"
    quant.x_axis.scaling.min = 0
    xs = Reference(law, min_col=3, min_row=first, max_row=last)
    shown_levels = [k for k, q in enumerate(DEFAULT_QUANTILES) if q in (0.05, 0.5, 0.95)]
    for n, k in enumerate(shown_levels):
        series = Series(
            Reference(law, min_col=6 + k, min_row=14, max_row=last), xs, title_from_data=True
        )
        line_style(series, n)
        quant.series.append(series)
    quant.height, quant.width = 9, 15
    quant.legend.position = "b"
    law.add_chart(quant, "J22")
    column_widths(law, {"A": 30, "B": 12})
    law.freeze_panes = "A15"
    print_setup(law, "14:14")
    from rootvar.addin.workbooks.calibration import add_calibration_sheet

    add_calibration_sheet(wb)
    path.parent.mkdir(parents=True, exist_ok=True)
    save_deterministic(wb, path)


def build_price_twice(path: Path) -> None:
    """The structurer's workbook: one vanilla by Fourier and Monte Carlo, a step study, the
    exotics and the Greeks, each priced twice."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Price twice"
    model = next(m for m in demo_models() if m.model_id == "CRV-SHP")
    heading(ws, f"{DESK_NAME}: {model.underlying} call priced twice (invented data)")
    ws["A4"] = "Model"
    ws["A4"].font = BOLD
    block = _params_block(ws, 5, 1, model.params)
    inputs = [
        ("spot", model.spot, "price"),
        ("strike", 40.0, "price"),
        ("maturity (years)", 1.0, "years"),
        ("rate", model.rate, "rate"),
        ("dividend yield", model.div_yield, "rate"),
        ("kind", "call", None),
        ("scheme", "qe", None),
        ("steps over the maturity", 32, "count"),
        ("paths", 200000, "count"),
        ("seed", 20240601, "seed"),
        ("tolerance (vol bp)", 10.0, "bp"),
    ]
    ws["A11"] = "Option and simulation"
    ws["A11"].font = BOLD
    for i, (label, value, kind) in enumerate(inputs):
        ws.cell(row=12 + i, column=1, value=label)
        cell = ws.cell(row=12 + i, column=2, value=value)
        cell.fill = INPUT
        if kind:
            cell.number_format = FORMATS[kind]
    ws["A23"] = "production step"
    ws["B23"] = "=B14/B19"
    number_format(ws, "B23", "step_years")
    ws["A24"] = '=ROUND(B23*252,2)&" trading days per step"'
    ws["A26"] = "Shaded blue-grey: inputs."
    ws["A26"].font = NOTE
    market = "B12,B13,B14,B15,B16,B17"
    mc = f"{market},B18,B19,B20,B21"
    ws["D4"] = "Fourier (certified; contour or COS)"
    ws["D4"].font = BOLD
    ws["D5"], ws["E5"] = "price", f"=ROOTVAR_FOURIER_PRICE({block},{market})"
    ws["D6"], ws["E6"] = "implied vol", f"=ROOTVAR_IMPLIED_VOL(E5,{market})"
    number_format(ws, "E5", "price")
    number_format(ws, "E6", "vol")
    ws["D8"] = '="Monte Carlo, "&B19&" steps ("&' + _step_words("B23") + '&")"'
    ws["D8"].font = BOLD
    array_formula(ws, "D9", 8, 2, f"=ROOTVAR_MC_PRICE({block},{mc})")
    for r, kind in zip(
        range(9, 17),
        (
            "price",
            "price",
            "price",
            "price",
            "probability",
            "probability",
            "probability",
            "seconds",
        ),
        strict=True,
    ):
        number_format(ws, f"E{r}", kind)
    ws["D18"] = (
        '="Fourier against Monte Carlo (conditional, antithetic; "&' + _step_words("B23") + '&")"'
    )
    ws["D18"].font = BOLD
    array_formula(ws, "D19", 10, 2, f"=ROOTVAR_MC_CHECK({block},{mc},B22)")
    for r, kind in zip(
        range(19, 28),
        ("price", "price", "price", "price", "bp", "z", "bp", None, "count"),
        strict=True,
    ):
        if kind:
            number_format(ws, f"E{r}", kind)
    ws["E28"].alignment = Alignment(wrap_text=True, vertical="top")
    ws["D28"].alignment = Alignment(vertical="top")
    ws.row_dimensions[28].height = LINE_HEIGHT * 6
    ws["G4"] = "Side by side"
    ws["G4"].font = BOLD
    side = [
        ("Fourier price", "=E19", "price"),
        ("Monte Carlo price (conditional)", "=E20", "price"),
        ("difference", "=E22", "price"),
        ("difference (vol bp)", "=E23", "bp"),
        ("verdict", "=E26", None),
        ("paths to settle", "=E27", "count"),
    ]
    for i, (label, formula, kind) in enumerate(side):
        ws.cell(row=5 + i, column=7, value=label)
        cell = ws.cell(row=5 + i, column=8, value=formula)
        if kind:
            cell.number_format = FORMATS[kind]
    ws["H9"].font = BOLD
    column_widths(ws, {"A": 24, "B": 12, "C": 3, "D": 30, "E": 44, "F": 3, "G": 30, "H": 14})
    print_setup(ws)

    st = wb.create_sheet("Step study")
    st["A1"] = "Bias against Fourier by scheme and step count (conditional Monte Carlo)"
    st["A1"].font = TITLE
    study_schemes = ["euler_absorb", "euler_full", "qe", "exact_variance"]
    st["A3"], st["B3"] = "schemes", ",".join(study_schemes)
    st["A4"], st["B4"] = "paths per cell (antithetic)", 200000
    number_format(st, "B4", "count")
    st["A5"] = "step counts over the maturity"
    steps = [2, 4, 8, 16, 32]
    for j, n in enumerate(steps):
        st.cell(row=5, column=2 + j, value=n).fill = INPUT
    for ref in ("B3", "B4"):
        st[ref].fill = INPUT
    schemes = len(study_schemes)
    rows = 1 + schemes * len(steps) + 1
    pt = "'Price twice'"
    st_block = f"{pt}!A5:B9"
    st_market = ",".join(f"{pt}!B{r}" for r in range(12, 18))
    last_step = get_column_letter(1 + len(steps))
    headers = ["scheme", "steps", "dt (years)", "price", "std error", "bias", "bias (vol bp)"]
    headers += ["z-score", "verdict", "seconds"]
    table_header(st, 7, 1, headers, {0: 16, 8: 12})
    for j in range(len(headers)):
        st.cell(row=7, column=1 + j).value = None
    array_formula(
        st,
        "A7",
        rows,
        10,
        f"=ROOTVAR_STEP_STUDY({st_block},{st_market},B3,B5:{last_step}5,B4,{pt}!B21,{pt}!B22,TRUE)",
    )
    for r in range(8, 8 + schemes * len(steps)):
        for col, kind in zip(
            "CDEFGHJ", ("step_years", "price", "price", "price", "bp", "z", "seconds"), strict=True
        ):
            number_format(st, f"{col}{r}", kind)
    st.cell(row=7 + rows - 1, column=2).font = BOLD  # the recommendation
    chart = ScatterChart()
    chart.title = "Bias (vol bp) against step count"
    chart.style = 13
    axes(chart, "steps over the maturity (log scale)", "bias (implied-vol basis points)")
    chart.x_axis.scaling.logBase = 2
    chart.x_axis.scaling.min, chart.x_axis.scaling.max = 1, 64
    for s in range(schemes):
        top = 8 + s * len(steps)
        xs = Reference(st, min_col=2, min_row=top, max_row=top + len(steps) - 1)
        ys = Reference(st, min_col=7, min_row=top, max_row=top + len(steps) - 1)
        series = Series(ys, xs, title=study_schemes[s])
        line_style(series, s)
        chart.series.append(series)
    chart.height, chart.width = 9, 18
    chart.legend.position = "b"
    st.add_chart(chart, "L7")
    column_widths(st, {"A": 28, "B": 14})
    st.freeze_panes = "A8"
    print_setup(st, "7:7")
    from rootvar.addin.workbooks.exotics import add_exotics_sheet

    add_exotics_sheet(wb)
    from rootvar.addin.workbooks.greeks import add_greeks_sheet

    add_greeks_sheet(wb)
    path.parent.mkdir(parents=True, exist_ok=True)
    save_deterministic(wb, path)


def build_control(path: Path) -> None:
    """Middle office's control workbook: settings, the models of the book, results, history."""
    from rootvar.addin.control import (
        MODEL_COLUMNS,
        OPTIONAL_SETTINGS,
        RESULT_COLUMNS,
        SETTING_LABELS,
    )

    wb = Workbook()
    ws = wb.active
    ws.title = "Settings"
    heading(ws, f"{DESK_NAME}: daily Heston model control")
    defaults = {
        "feller ratio warning below": 0.3,
        "max negative-step probability": 0.001,
        "production scheme": "euler_full",
        "steps per year": 52,
        "paths": 40000,
        "seed": 20240601,
        "tolerance (vol bp)": 10.0,
        "z": 3.0,
        "quantile levels": "0.01, 0.5, 0.99",
    }
    setting_formats = {
        "feller ratio warning below": "ratio",
        "max negative-step probability": "probability",
        "steps per year": "count",
        "paths": "count",
        "seed": "seed",
        "tolerance (vol bp)": "bp",
        "z": "z",
        "history dates shown": "count",
    }
    # the history store: empty means NAME.history.sqlite beside the workbook
    defaults |= {"history store": "", "history dates shown": 20, "book name": ""}
    labels = [*SETTING_LABELS, *OPTIONAL_SETTINGS]
    for i, label in enumerate(labels, start=4):
        ws.cell(row=i, column=1, value=label)
        cell = ws.cell(row=i, column=2, value=defaults[label] or None)
        cell.fill = INPUT
        if label in setting_formats:
            cell.number_format = FORMATS[setting_formats[label]]
    note = 4 + len(labels) + 1
    for k, text in enumerate(
        (
            "Refresh with: rootvar refresh control.xlsx [--as-of DATE] [--workers N].",
            "Every refresh records its rows in the history store: empty means",
            "control.history.sqlite beside this file; or give a database URL.",
            "The History sheet shows the store's last dates; the store is the record.",
            "Shaded blue-grey: inputs.",
        )
    ):
        ws.cell(row=note + k, column=1, value=text).font = NOTE
    column_widths(ws, {"A": 34, "B": 18})
    print_setup(ws)

    models = wb.create_sheet("Models")
    table_header(models, 1, 1, list(MODEL_COLUMNS), {1: 26, 10: 18, 11: 26})
    model_formats = ["price", "rate", "rate", "variance", "param", "variance", "param", "param"]
    for i, m in enumerate(demo_models(), start=2):
        p = m.params
        row = [
            m.model_id,
            m.underlying,
            m.spot,
            m.rate,
            m.div_yield,
            p.v0,
            p.kappa,
            p.theta,
            p.vol_of_vol,
            p.rho,
            "0.5, 2",
            "0.8, 0.9, 1, 1.1, 1.2",
        ]
        for j, v in enumerate(row, start=1):
            models.cell(row=i, column=j, value=v).fill = INPUT
        for j, kind in enumerate(model_formats, start=3):
            models.cell(row=i, column=j).number_format = FORMATS[kind]
        for j in (11, 12):  # the lists of numbers are text: a space from rho's right edge
            models.cell(row=i, column=j).alignment = Alignment(horizontal="left", indent=1)
    for j in range(3, 13):  # headers over their columns: numbers right, the lists' text left
        header = models.cell(row=1, column=j)
        side, indent = ("right", 0) if j <= 10 else ("left", 1)
        header.alignment = Alignment(
            horizontal=side, vertical=header.alignment.vertical, wrap_text=True, indent=indent
        )
    models.freeze_panes = "C2"
    print_setup(models, "1:1")
    for title in ("Results", "History"):
        sheet = wb.create_sheet(title)
        for j, name in enumerate(RESULT_COLUMNS, start=1):
            sheet.cell(row=1, column=j, value=name).font = BOLD
    path.parent.mkdir(parents=True, exist_ok=True)
    save_deterministic(wb, path)


def build_all(folder) -> list[Path]:
    """Build every shipped workbook into ``folder``; returns their paths."""
    folder = Path(folder)
    paths = [folder / PARAMETER_CHECK, folder / PRICE_TWICE, folder / CONTROL]
    build_parameter_check(paths[0])
    build_price_twice(paths[1])
    build_control(paths[2])
    return paths
