"""The control's result rows and the sheets that show them.

One list, :data:`FIELDS`, says for every column of the results: its key (the
history store's column), its header, how a number is shown and how wide the
column is.  The *Results* sheet, the *History* window, the store and the
``history`` export all follow it, so they cannot drift apart.

Shading rule (stated on the sheet): a cell is shaded amber when it breached a
threshold of the *Settings* sheet (Feller ratio, negative-step probability,
a verdict other than consistent); a whole row is shaded rose only when its
check failed (an input error or a check that could not be formed).
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass

from openpyxl.chart import BarChart, LineChart, Reference
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from rootvar.core import __version__
from rootvar.core.checks.daily import CHECK_FAILED, ControlSettings, row_seed

from .book import HISTORY_SHEET, RESULTS_SHEET

__all__ = [
    "FIELDS",
    "RESULT_COLUMNS",
    "STATUS_BREACH",
    "STATUS_CLEAR",
    "STATUS_FAILED",
    "STATUS_INPUT",
    "result_rows",
    "summary_table",
    "write_history_window",
    "write_results",
]

STATUS_CLEAR, STATUS_BREACH, STATUS_INPUT, STATUS_FAILED = (
    "clear",
    "breach",
    "input error",
    "check failed",
)

#: Number formats by kind of quantity (Excel format codes).
_FORMATS = {
    "date": "yyyy-mm-dd",
    "datetime": "yyyy-mm-dd hh:mm",
    "ratio": "0.000",
    "variance": "0.000E+00",
    "prob": "0.00%",
    "years": "0.0000",
    "days": "0.0",
    "price": "#,##0.0000",
    "bp": "+0.0;-0.0;0.0",
    "z": "+0.00;-0.00;0.00",
    "seed": "0",
}
_TINY_PROB_FORMAT = "0.0E+00"  # probabilities below 0.01% would read 0.00%


@dataclass(frozen=True)
class Field:
    """One column of the results: store key, header, kind of number, width.

    ``since`` is the history-store schema version that added the column.
    """

    key: str
    header: str
    kind: str
    width: float
    since: int = 1


FIELDS = [
    Field("as_of", "as-of", "date", 10.5),
    Field("run_time", "run time (UTC)", "datetime", 15),
    Field("rootvar_version", "rootvar version", "text", 8),
    Field("model_id", "model id", "text", 12),
    Field("underlying", "underlying", "text", 16),
    Field("status", "status", "text", 12),
    Field("feller_ratio", "Feller ratio", "ratio", 8),
    Field("regime", "regime", "text", 14),
    Field(
        "negative_probability", "Euler negative-step probability at v0, production step", "prob", 13
    ),
    Field(
        "worst_probability",
        "Euler worst-case negative-step probability, production step",
        "prob",
        13,
        since=2,
    ),
    Field("worst_level", "variance level of the worst case (v*)", "variance", 11, since=2),
    Field("prob_below_worst_level", "P(variance <= v*) at maturity", "prob", 11, since=2),
    Field("safe_step_years", "largest safe Euler step (years)", "years", 10),
    Field("safe_step_days", "largest safe Euler step (trading days)", "days", 10),
    Field("maturity", "maturity (years)", "years", 9),
    Field("strike", "strike", "price", 10),
    Field("fourier_price", "Fourier price", "price", 11),
    Field("mc_price", "Monte Carlo price", "price", 11),
    Field("std_error", "MC std error", "price", 10),
    Field("diff_price", "MC minus Fourier (price)", "price", 11),
    Field("diff_vol_bp", "MC minus Fourier (vol bp)", "bp", 10),
    Field("z_score", "z-score", "z", 8),
    Field("verdict", "verdict", "text", 12),
    Field("quantiles", "variance quantiles at maturity", "text", 24),
    Field("recommendation", "recommended scheme and step", "text", 20),
    Field("flags", "flags", "text", 32),
    Field("seed", "seed", "seed", 16),
    Field("message", "message", "text", 32),
]
RESULT_COLUMNS = [f.header for f in FIELDS]
KEYS = [f.key for f in FIELDS]
_COL = {f.key: j for j, f in enumerate(FIELDS, start=1)}

_AMBER = PatternFill("solid", fgColor="F6E3B4")
_ROSE = PatternFill("solid", fgColor="F2C9C4")
_HEAD = PatternFill("solid", fgColor="E4E8EC")
_BOLD = Font(bold=True)
_NOTE = Font(italic=True, size=9, color="555555")
_WRAP = Alignment(wrap_text=True, vertical="top")
_TOP = Alignment(vertical="top")

RULE_TEXT = (
    "Shading: an amber cell breached the threshold named in its flags (Settings sheet: Feller "
    "ratio warning, max negative-step probability, the Monte Carlo tolerance); a rose row is a "
    "check that failed or could not be formed (see its message). Unshaded rows passed."
)


def _steps_label(settings: ControlSettings) -> str:
    return f"1/{settings.steps_per_year} y"


def _number(x):
    """A finite float, or None (the cell stays empty and the message says why)."""
    return float(x) if x is not None and math.isfinite(x) else None


def result_rows(models, results, settings: ControlSettings, as_of: str, run_time: str):
    """One dict per result row (keys of :data:`FIELDS`), in the order of the models sheet."""
    rows = []
    for item in models:
        base = {
            "as_of": as_of,
            "run_time": run_time,
            "rootvar_version": __version__,
            "model_id": item.model_id,
            "underlying": item.underlying,
        }
        if item.spec is None:
            rows.append(base | {"status": STATUS_INPUT, "message": item.error})
            continue
        res, err = results[item.row]
        seed = row_seed(settings.seed, item.model_id)
        if err:
            rows.append(base | {"status": STATUS_FAILED, "seed": seed, "message": err})
            continue
        for r in res:
            safe = r["safe_step_years"]
            quant = ", ".join(f"q{100 * q:g}%={v:.4g}" for q, v in r["quantiles"].items())
            failed = r["verdict"] == CHECK_FAILED
            status = STATUS_FAILED if failed else (STATUS_BREACH if r["flags"] else STATUS_CLEAR)
            rows.append(
                base
                | {
                    "status": status,
                    "feller_ratio": r["feller_ratio"],
                    "regime": r["regime"],
                    "negative_probability": r["negative_probability"],
                    "worst_probability": r["worst_probability"],
                    "worst_level": r["worst_level"],
                    "prob_below_worst_level": r["prob_below_worst_level"],
                    "safe_step_years": safe,
                    "safe_step_days": safe * 252 if math.isfinite(safe) else math.inf,
                    "maturity": r["maturity"],
                    "strike": r["strike"],
                    "fourier_price": _number(r["fourier_price"]),
                    "mc_price": _number(r["mc_price"]),
                    "std_error": _number(r["std_error"]),
                    "diff_price": _number(r["diff_price"]),
                    "diff_vol_bp": _number(r["diff_vol_bp"]),
                    "z_score": _number(r["z_score"]),
                    "verdict": r["verdict"],
                    "quantiles": quant,
                    "recommendation": r["recommendation"],
                    "flags": "; ".join(r["flags"]),
                    "seed": r["seed"],
                    "message": r.get("reason", "") if failed else "",
                }
            )
    return rows


# ------------------------------------------------------------------ sheets


def _cell_value(key, value):
    if value is None:
        return None
    if key == "as_of" and isinstance(value, str):
        return dt.date.fromisoformat(value)
    if key == "run_time" and isinstance(value, str):
        try:  # a spreadsheet has no time zones: UTC, as the header says
            return dt.datetime.fromisoformat(value).replace(tzinfo=None)
        except ValueError:
            return value
    if key in ("safe_step_years", "safe_step_days", "worst_level") and isinstance(value, float):
        return "unbounded" if math.isinf(value) else value
    return value


def _put(ws, row, col, value):
    cell = ws.cell(row=row, column=col, value=value)
    if isinstance(value, str) and value.startswith("="):
        cell.data_type = "s"  # text from input cells is never written as a formula
    return cell


def _header(ws, settings: ControlSettings | None):
    step = f" ({_steps_label(settings)})" if settings else ""
    lines = 1
    for f in FIELDS:
        text = f.header.replace("production step", f"production step{step}")
        cell = ws.cell(row=1, column=_COL[f.key], value=text)
        cell.font, cell.alignment, cell.fill = _BOLD, _WRAP, _HEAD
        # width rule: the column holds its longest header word plus a margin
        width = max(f.width, max(len(w) for w in text.split()) + 2)
        ws.column_dimensions[get_column_letter(_COL[f.key])].width = width
        # words wrap at the column width; estimate the lines the longest header takes
        per_line = max(1, int(width) - 1)
        used, n = 0, 1
        for word in text.split():
            if used and used + 1 + len(word) > per_line:
                n, used = n + 1, len(word)
            else:
                used += (1 if used else 0) + len(word)
        lines = max(lines, n)
    ws.row_dimensions[1].height = 15 * lines + 3
    ws.freeze_panes = "E2"  # header row and the date, run, version and model id stay in view


def _format(cell, kind, value):
    if isinstance(value, str) or kind == "text":
        return  # text keeps the General format
    if kind == "prob" and 0 < abs(value) < 1e-4:
        cell.number_format = _TINY_PROB_FORMAT
    else:
        cell.number_format = _FORMATS[kind]


def _write_table(ws, rows, settings, first=2):
    _header(ws, settings)
    for i, row in enumerate(rows, start=first):
        lines = 1
        for f in FIELDS:
            value = _cell_value(f.key, row.get(f.key))
            if value is None:
                continue
            cell = _put(ws, i, _COL[f.key], value)
            _format(cell, f.kind, value)
            if isinstance(value, str) and len(value) > f.width:
                cell.alignment = _WRAP  # long flags and messages wrap inside their column
                lines = max(lines, math.ceil(len(value) / (f.width - 1)))
        if lines > 1:
            # spreadsheet programs do not grow a row for wrapped text written by a library
            ws.row_dimensions[i].height = 13 * lines + 2
            for f in FIELDS:
                cell = ws.cell(row=i, column=_COL[f.key])
                if cell.value is not None and not cell.alignment.wrap_text:
                    cell.alignment = _TOP  # one baseline across the row


def _print_setup(ws):
    """Landscape A3, one page wide, header row repeated: 25 columns stay legible."""
    ws.page_setup.orientation = "landscape"
    ws.page_setup.paperSize = ws.PAPERSIZE_A3
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.print_title_rows = "1:1"
    ws.page_margins.left = ws.page_margins.right = 0.4
    ws.page_margins.top = ws.page_margins.bottom = 0.5


def _shade(ws, i, row, settings: ControlSettings):
    if row.get("status") in (STATUS_INPUT, STATUS_FAILED):
        for j in range(1, len(FIELDS) + 1):
            ws.cell(row=i, column=j).fill = _ROSE
        return
    ratio, neg = row.get("feller_ratio"), row.get("negative_probability")
    if ratio is not None and ratio < settings.feller_warning:
        ws.cell(row=i, column=_COL["feller_ratio"]).fill = _AMBER
    if neg is not None and neg > settings.max_negative_probability:
        ws.cell(row=i, column=_COL["negative_probability"]).fill = _AMBER
    if row.get("verdict") not in (None, "", "consistent"):
        for key in ("verdict", "diff_vol_bp"):
            ws.cell(row=i, column=_COL[key]).fill = _AMBER


def _replace_sheet(wb, title):
    if title in wb.sheetnames:
        index = wb.sheetnames.index(title)
        del wb[title]
        return wb.create_sheet(title, index)
    return wb.create_sheet(title)


#: Largest number of rows drawn in the chart: past that a bar chart reads as noise.
CHART_ROWS = 40


def chart_block(ws, rows, settings: ControlSettings, top: int):
    """Chart data under the table: the rows with the largest |vol bp|, and the band."""
    drawn = [
        r for r in rows if r.get("diff_vol_bp") is not None and r.get("status") != STATUS_FAILED
    ]
    drawn = sorted(drawn, key=lambda r: -abs(r["diff_vol_bp"]))[:CHART_ROWS]
    if not drawn:
        return
    drawn.sort(key=lambda r: (r["model_id"], r["maturity"], r["strike"]))
    # the block sits in the columns from "underlying" on, wide enough for its labels
    c0 = _COL["underlying"]
    ws.cell(row=top, column=c0, value="Chart data").font = _BOLD
    note = (
        f"The {len(drawn)} rows with the largest |MC minus Fourier| (vol bp), "
        f"and the tolerance band of +-{settings.tolerance_bp:g} bp."
    )
    # one far wing (a tiny price difference read as many vol bp) must not flatten every other
    # bar: the axis stops at the 90th percentile of |bp| or 3 tolerances, whichever is wider
    tol = settings.tolerance_bp
    sizes = sorted(abs(r["diff_vol_bp"]) for r in drawn)
    limit = max(3.0 * tol, sizes[int(0.9 * (len(sizes) - 1))])
    limit = tol * math.ceil(limit / tol) if tol > 0 else limit
    cut = sum(1 for x in sizes if x > limit)
    if cut:
        note += f" The axis stops at +-{limit:g} bp: {cut} bar(s) beyond it are cut; see the table."
    ws.cell(row=top + 1, column=c0, value=note).font = _NOTE
    head = top + 2
    headers = ("option", "MC minus Fourier (vol bp)", "+tolerance", "-tolerance")
    for j, text in enumerate(headers):
        cell = ws.cell(row=head, column=c0 + j, value=text)
        cell.font, cell.alignment = _BOLD, _WRAP
    ws.row_dimensions[head].height = 45
    labels = [f"{r['model_id']} {r['maturity']:g}y K{r['strike']:g}" for r in drawn]
    letter = get_column_letter(c0)
    ws.column_dimensions[letter].width = max(
        ws.column_dimensions[letter].width or 0, max(len(t) for t in labels) + 2
    )
    for i, (r, label) in enumerate(zip(drawn, labels, strict=True), start=head + 1):
        ws.cell(row=i, column=c0, value=label)
        values = (r["diff_vol_bp"], settings.tolerance_bp, -settings.tolerance_bp)
        for j, value in enumerate(values, start=1):
            ws.cell(row=i, column=c0 + j, value=value).number_format = _FORMATS["bp"]
    last = head + len(drawn)
    bars = BarChart()
    bars.type = "col"
    bars.title = f"MC minus Fourier (vol bp), production scheme {settings.scheme}"
    bars.add_data(Reference(ws, min_col=c0 + 1, min_row=head, max_row=last), titles_from_data=True)
    cats = Reference(ws, min_col=c0, min_row=head + 1, max_row=last)
    bars.set_categories(cats)
    bars.x_axis.title = "option (model, maturity, strike)"
    bars.y_axis.title = "vol bp"
    if cut:
        bars.y_axis.scaling.min, bars.y_axis.scaling.max = -limit, limit
    band = LineChart()
    band.add_data(
        Reference(ws, min_col=c0 + 2, max_col=c0 + 3, min_row=head, max_row=last),
        titles_from_data=True,
    )
    band.set_categories(cats)
    for series in band.series:
        series.graphicalProperties.line.dashStyle = "dash"
        series.graphicalProperties.line.solidFill = "B03A2E"
        series.smooth = False
    for axis in (bars.x_axis, bars.y_axis):
        axis.delete = False  # axes left to defaults vanish in some spreadsheet programs
    bars += band
    bars.legend.position = "b"
    bars.height, bars.width = 10, max(16.0, 0.6 * len(drawn) + 6)
    ws.add_chart(bars, f"{get_column_letter(c0 + 5)}{top}")


def write_results(wb, rows, settings: ControlSettings):
    """Replace the *Results* sheet with ``rows``: formats, shading rule, chart, print setup."""
    ws = _replace_sheet(wb, RESULTS_SHEET)
    _write_table(ws, rows, settings)
    for i, row in enumerate(rows, start=2):
        _shade(ws, i, row, settings)
    last = len(rows) + 1
    rule = ws.cell(row=last + 2, column=1, value=RULE_TEXT)
    rule.font = _NOTE
    chart_block(ws, rows, settings, last + 4)
    _print_setup(ws)
    return ws


def write_history_window(wb, rows, settings: ControlSettings, dates_shown: int, store_text: str):
    """Replace the *History* sheet with the last dates of the store (a window, not the record)."""
    ws = _replace_sheet(wb, HISTORY_SHEET)
    _write_table(ws, rows, settings)
    last = len(rows) + 1
    note = (
        f"The last {dates_shown} as-of dates of the history store {store_text}. "
        "The store is the record; this sheet is rewritten by every refresh."
    )
    ws.cell(row=last + 2, column=1, value=note).font = _NOTE
    _print_setup(ws)
    return ws


def summary_table(rows) -> str:
    """Plain text: one line per model with its status and its worst verdict."""
    order = {"biased": 3, CHECK_FAILED: 3, "undecided": 2, "consistent": 1, "": 0}
    per: dict[str, tuple[str, str, str]] = {}
    for r in rows:
        key = r["model_id"] or f"(row without id: {r.get('message', '')[:30]})"
        status, verdict = r["status"], r.get("verdict") or ""
        flags = r.get("flags") or r.get("message") or ""
        cur = per.get(key)
        if cur is None:
            per[key] = (status, verdict, flags)
            continue
        worst_status = status if cur[0] == STATUS_CLEAR else cur[0]
        if order.get(verdict, 0) > order.get(cur[1], 0):
            per[key] = (worst_status, verdict, flags or cur[2])
        else:
            per[key] = (worst_status, cur[1], cur[2] or flags)
    width = max([len("model id")] + [len(k) for k in per])
    lines = [f"{'model id':<{width}}  {'status':<12}  {'worst verdict':<13}  flags / message"]
    for key, (status, verdict, flags) in per.items():
        lines.append(f"{key:<{width}}  {status:<12}  {verdict:<13}  {flags[:90]}")
    return "\n".join(lines)
