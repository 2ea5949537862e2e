"""Build the shipped workbooks from the invented demo desk, deterministically.

``rootvar build-workbooks`` writes them into ``workbooks/``; a test rebuilds
them and compares the bytes with the committed files.  Formulas that return
tables are written as array formulas over the exact range they fill, so they
show the whole table in every spreadsheet version and the headless engine
fills the same cells.
"""

from __future__ import annotations

import io
import re
import zipfile
from datetime import datetime
from pathlib import Path

from openpyxl import Workbook
from openpyxl.chart import BarChart, Reference, ScatterChart, Series
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.formula import ArrayFormula

from rootvar.core import DEFAULT_QUANTILES

from .cli_text import CAUTION
from .demo_desk import DESK_NAME, demo_models

__all__ = ["CONTROL", "PARAMETER_CHECK", "PRICE_TWICE", "build_all", "save_deterministic"]

PARAMETER_CHECK = "parameter_check.xlsx"
PRICE_TWICE = "price_twice.xlsx"
CONTROL = "control.xlsx"

_FIXED_TIME = datetime(2026, 1, 5, 9, 0, 0)
_STAMP = b"2026-01-05T09:00:00Z"
_TITLE = Font(bold=True, size=13)
_BOLD = Font(bold=True)
_NOTE = Font(italic=True, size=9, color="555555")
_INPUT = PatternFill("solid", fgColor="EEF2F5")  # pale blue-grey: cells a user may change


def save_deterministic(wb: Workbook, path: Path) -> None:
    """Save with fixed document times and zip timestamps, so rebuilds are byte-identical."""
    wb.properties.creator = "rootvar"
    wb.properties.created = _FIXED_TIME
    wb.properties.modified = _FIXED_TIME
    wb.properties.lastModifiedBy = "rootvar"
    raw = io.BytesIO()
    wb.save(raw)
    raw.seek(0)
    out = io.BytesIO()
    with zipfile.ZipFile(raw) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            fixed = zipfile.ZipInfo(info.filename, date_time=(1980, 1, 1, 0, 0, 0))
            fixed.compress_type = zipfile.ZIP_DEFLATED
            fixed.external_attr = 0o644 << 16
            data = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                # openpyxl stamps the save time into "modified"; pin it
                data = re.sub(rb"(<dcterms:modified[^>]*>)[^<]*", rb"\g<1>" + _STAMP, data)
            dst.writestr(fixed, data)
    path.write_bytes(out.getvalue())


def _heading(ws, title: str, note: str = CAUTION) -> None:
    ws["A1"], ws["A2"] = title, note
    ws["A1"].font, ws["A2"].font = _TITLE, _NOTE


def _widths(ws, widths):
    for col, width in widths.items():
        ws.column_dimensions[col].width = width


def _array(ws, top_left: str, rows: int, cols: int, text: str) -> None:
    cell = ws[top_left]
    last = get_column_letter(cell.column + cols - 1) + str(cell.row + rows - 1)
    ws[top_left] = ArrayFormula(f"{top_left}:{last}", text)


def _params_block(ws, row: int, col: int, params, fill=True) -> str:
    """Label/value block of five rows; returns its range."""
    labels = ("v0", "kappa", "theta", "vol_of_vol", "rho")
    for i, label in enumerate(labels):
        ws.cell(row=row + i, column=col, value=label)
        cell = ws.cell(row=row + i, column=col + 1, value=getattr(params, label))
        if fill:
            cell.fill = _INPUT
    a = f"{get_column_letter(col)}{row}"
    b = f"{get_column_letter(col + 1)}{row + 4}"
    return f"{a}:{b}"


def build_parameter_check(path: Path) -> None:
    """The trader's workbook: every desk model's Euler risk and one model's exact law."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Desk models"
    _heading(ws, f"{DESK_NAME}: Heston variance check (invented data)")
    ws["A4"], ws["B4"] = "Production Euler step (years)", "=1/252"
    ws["A5"], ws["B5"] = "Acceptable one-step negative probability", 0.001
    ws["B5"].fill = _INPUT
    header = [
        "model",
        "underlying",
        "v0",
        "kappa",
        "theta",
        "vol_of_vol",
        "rho",
        "Feller ratio",
        "negative-step prob. at production step",
        "largest safe step (years)",
        "largest safe step (trading days)",
    ]
    for j, h in enumerate(header, start=1):
        ws.cell(row=7, column=j, value=h).font = _BOLD
        ws.cell(row=7, column=j).alignment = Alignment(wrap_text=True, vertical="top")
    models = demo_models()
    for i, m in enumerate(models):
        r = 8 + i
        p = m.params
        row = [m.model_id, m.underlying, p.v0, p.kappa, p.theta, p.vol_of_vol, p.rho]
        for j, v in enumerate(row, start=1):
            ws.cell(row=r, column=j, value=v)
        for j in range(3, 8):
            ws.cell(row=r, column=j).fill = _INPUT
        block = f"C{r}:G{r}"
        ws[f"H{r}"] = f"=ROOTVAR_FELLER({block})"
        ws[f"I{r}"] = f"=ROOTVAR_EULER_NEG_PROB({block},$B$4)"
        ws[f"J{r}"] = f"=ROOTVAR_EULER_SAFE_STEP({block},$B$5)"
        ws[f"K{r}"] = f'=IF(J{r}="unbounded","unbounded",J{r}*252)'
        ws[f"H{r}"].number_format = "0.000"
        ws[f"I{r}"].number_format = "0.00E+00"
        ws[f"J{r}"].number_format = "0.00000"
        ws[f"K{r}"].number_format = "0.00"
    _widths(ws, {"A": 12, "B": 26, "H": 11, "I": 16, "J": 14, "K": 14})

    law = wb.create_sheet("Variance law")
    chosen = next(m for m in models if m.model_id == "TMS-BIO")
    _heading(
        law,
        f"Exact law of the variance: {chosen.model_id} ({chosen.underlying})",
        "Change the parameters or horizons; the table and charts follow.",
    )
    block = _params_block(law, 4, 1, chosen.params)
    law["A10"], law["B10"] = "Production Euler step (years)", "='Desk models'!B4"
    law["A11"], law["B11"] = "Near-zero variance level", 1e-4
    law["B11"].fill = _INPUT
    law["A13"] = "horizons (years)"
    law["A13"].font = _BOLD
    horizons = [0.08, 0.25, 0.5, 1.0, 2.0, 5.0]
    for i, h in enumerate(horizons):
        law.cell(row=14 + i, column=1, value=h).fill = _INPUT
    h_range = f"A14:A{13 + len(horizons)}"
    # horizon, mean, std, quantiles, near zero, Euler at v0, worst case, v*, P(v <= v*), notes
    cols = 1 + 2 + len(DEFAULT_QUANTILES) + 1 + 4 + 1
    law["C13"] = "exact-law table"
    law["C13"].font = _BOLD
    _array(law, "C14", 1 + len(horizons), cols, f"=ROOTVAR_VAR_TABLE({block},{h_range},,B10,B11)")
    first, last = 15, 14 + len(horizons)
    near_zero_col = 3 + 3 + len(DEFAULT_QUANTILES)  # C + horizon, mean, std, quantiles
    bars = BarChart()
    bars.title = "Probability that the variance is below the near-zero level"
    bars.y_axis.title = "probability"
    bars.x_axis.title = "horizon (years)"
    bars.add_data(
        Reference(law, min_col=near_zero_col, min_row=14, max_row=last), titles_from_data=True
    )
    bars.set_categories(Reference(law, min_col=3, min_row=first, max_row=last))
    bars.legend = None
    bars.height, bars.width = 7, 14
    law.add_chart(bars, "C23")
    quant = ScatterChart()
    quant.title = "Quantiles of the variance by horizon"
    quant.x_axis.title = "horizon (years)"
    quant.y_axis.title = "variance"
    xs = Reference(law, min_col=3, min_row=first, max_row=last)
    for k, q in enumerate(DEFAULT_QUANTILES):
        if q in (0.05, 0.5, 0.95):
            col = 6 + k
            series = Series(
                Reference(law, min_col=col, min_row=14, max_row=last), xs, title_from_data=True
            )
            quant.series.append(series)
    quant.height, quant.width = 7, 14
    law.add_chart(quant, "L23")
    _widths(law, {"A": 30, "B": 12})
    path.parent.mkdir(parents=True, exist_ok=True)
    save_deterministic(wb, path)


def build_price_twice(path: Path) -> None:
    """The structurer's workbook: one vanilla by Fourier and Monte Carlo, and a step study."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Price twice"
    model = next(m for m in demo_models() if m.model_id == "CRV-SHP")
    _heading(ws, f"{DESK_NAME}: {model.underlying} call priced twice (invented data)")
    ws["A4"] = "Model"
    ws["A4"].font = _BOLD
    block = _params_block(ws, 5, 1, model.params)
    inputs = [
        ("spot", model.spot),
        ("strike", 40.0),
        ("maturity (years)", 1.0),
        ("rate", model.rate),
        ("dividend yield", model.div_yield),
        ("kind", "call"),
        ("scheme", "qe"),
        ("steps", 32),
        ("paths", 20000),
        ("seed", 20240601),
        ("tolerance (vol bp)", 10.0),
    ]
    ws["A11"] = "Option and simulation"
    ws["A11"].font = _BOLD
    for i, (label, value) in enumerate(inputs):
        ws.cell(row=12 + i, column=1, value=label)
        ws.cell(row=12 + i, column=2, value=value).fill = _INPUT
    market = "B12,B13,B14,B15,B16,B17"
    mc = f"{market},B18,B19,B20,B21"
    ws["D4"] = "Fourier (COS)"
    ws["D4"].font = _BOLD
    ws["D5"], ws["E5"] = "price", f"=ROOTVAR_FOURIER_PRICE({block},{market})"
    ws["D6"], ws["E6"] = "implied vol", f"=ROOTVAR_IMPLIED_VOL(E5,{market})"
    ws["D8"] = "Monte Carlo"
    ws["D8"].font = _BOLD
    _array(ws, "D9", 8, 2, f"=ROOTVAR_MC_PRICE({block},{mc})")
    ws["D18"] = "Fourier against Monte Carlo (conditional)"
    ws["D18"].font = _BOLD
    _array(ws, "D19", 10, 2, f"=ROOTVAR_MC_CHECK({block},{mc},B22)")
    ws["G4"] = "Side by side"
    ws["G4"].font = _BOLD
    side = [
        ("Fourier price", "=E19"),
        ("Monte Carlo price (conditional)", "=E20"),
        ("difference", "=E22"),
        ("difference (vol bp)", "=E23"),
        ("verdict", "=E26"),
        ("paths to settle", "=E27"),
    ]
    for i, (label, formula) in enumerate(side):
        ws.cell(row=5 + i, column=7, value=label)
        ws.cell(row=5 + i, column=8, value=formula)
    _widths(ws, {"A": 20, "B": 12, "D": 28, "E": 16, "G": 20, "H": 14})

    st = wb.create_sheet("Step study")
    st["A1"] = "Bias against Fourier by scheme and step count (conditional Monte Carlo)"
    st["A1"].font = _TITLE
    study_schemes = ["euler_absorb", "euler_full", "qe", "exact_variance"]
    st["A3"], st["B3"] = "schemes", ",".join(study_schemes)
    st["A4"], st["B4"] = "paths per cell (antithetic)", 40000
    st["A5"] = "step counts"
    steps = [2, 4, 8, 16, 32]
    for j, n in enumerate(steps):
        st.cell(row=5, column=2 + j, value=n).fill = _INPUT
    for ref in ("B3", "B4"):
        st[ref].fill = _INPUT
    schemes = len(study_schemes)
    rows = 1 + schemes * len(steps) + 1
    pt = "'Price twice'"
    st_block = f"{pt}!A5:B9"
    st_market = ",".join(f"{pt}!B{r}" for r in range(12, 18))
    last_step = get_column_letter(1 + len(steps))
    _array(
        st,
        "A7",
        rows,
        10,
        f"=ROOTVAR_STEP_STUDY({st_block},{st_market},B3,B5:{last_step}5,B4,{pt}!B21,{pt}!B22,TRUE)",
    )
    chart = ScatterChart()
    chart.title = "Bias (vol bp) against step count"
    chart.x_axis.title = "steps over the maturity"
    chart.y_axis.title = "bias (implied-vol basis points)"
    chart.x_axis.scaling.logBase = 2
    for s in range(schemes):
        top = 8 + s * len(steps)
        xs = Reference(st, min_col=2, min_row=top, max_row=top + len(steps) - 1)
        ys = Reference(st, min_col=7, min_row=top, max_row=top + len(steps) - 1)
        series = Series(ys, xs, title=study_schemes[s])
        chart.series.append(series)
    chart.height, chart.width = 8, 16
    st.add_chart(chart, "L7")
    _widths(st, {"A": 16, "B": 12})
    path.parent.mkdir(parents=True, exist_ok=True)
    save_deterministic(wb, path)


def build_control(path: Path) -> None:
    """Middle office's control workbook: settings, the models of the book, results, history."""
    from .control import MODEL_COLUMNS, RESULT_COLUMNS, SETTING_LABELS

    wb = Workbook()
    ws = wb.active
    ws.title = "Settings"
    _heading(ws, f"{DESK_NAME}: daily Heston model control")
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
    for i, label in enumerate(SETTING_LABELS, start=4):
        ws.cell(row=i, column=1, value=label)
        ws.cell(row=i, column=2, value=defaults[label]).fill = _INPUT
    ws["A14"] = (
        "Refresh with: rootvar refresh control.xlsx [--as-of DATE] [--workers N]; "
        "results and history are written by the refresh."
    )
    ws["A14"].font = _NOTE
    _widths(ws, {"A": 34, "B": 18})

    models = wb.create_sheet("Models")
    for j, name in enumerate(MODEL_COLUMNS, start=1):
        models.cell(row=1, column=j, value=name).font = _BOLD
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
            models.cell(row=i, column=j, value=v).fill = _INPUT
    _widths(models, {"A": 12, "B": 26, "K": 18, "L": 26})
    for title in ("Results", "History"):
        sheet = wb.create_sheet(title)
        for j, name in enumerate(RESULT_COLUMNS, start=1):
            sheet.cell(row=1, column=j, value=name).font = _BOLD
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
