"""``rootvar history``: show or export the history store, with a trend chart.

The source is a control workbook (its store and book name come from its
*Settings* sheet, else the SQLite file beside it) or a store URL.  The trend
is the Monte Carlo minus Fourier difference in vol bp: per model, the
largest in size over its test options on each date; with ``--model``, one
line per test option (maturity, strike) of that model.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import pandas as pd
from openpyxl import Workbook
from openpyxl.chart import LineChart, Reference
from openpyxl.styles import Font
from openpyxl.utils import get_column_letter

from .book import SETTINGS_SHEET, ControlError, read_book, read_settings
from .results import FIELDS
from .store import HistoryStore, book_label, default_store_url

__all__ = ["open_history", "trend_table", "write_export"]

_HEADERS = {f.key: f.header for f in FIELDS}


def open_history(source: str, book: str | None = None):
    """``(store, book)`` for a workbook path or a store URL; raises ControlError."""
    path = Path(source)
    looks_like_book = path.suffix.lower() in (".xlsx", ".xlsm")
    if looks_like_book:
        _, wb = read_book(path)
        _, extra = read_settings(wb[SETTINGS_SHEET])
        store = HistoryStore(extra["history_url"] or default_store_url(path))
        return store, book or book_label(path, extra["book_name"])
    if "://" not in source and not path.exists():
        raise ControlError(f"{source}: no such workbook or store file")
    return HistoryStore(source), book


def _since(text: str | None) -> str | None:
    if text is None:
        return None
    try:
        return dt.date.fromisoformat(text).isoformat()
    except ValueError as exc:
        raise ControlError(f"--since must be a date like 2026-12-01, got {text!r}") from exc


def history_frame(store: HistoryStore, book, model=None, since=None) -> pd.DataFrame:
    """The store's rows as a table with the sheets' headers."""
    if store.schema_version() == 0:
        raise ControlError(f"history store {store.shown} holds no history yet")
    rows = store.read(book, model=model, since=_since(since))
    frame = pd.DataFrame(rows, columns=["book", *[f.key for f in FIELDS]])
    return frame


def trend_table(frame: pd.DataFrame, by_option: bool) -> pd.DataFrame:
    """Dates down, one column per model (or per option), vol bp difference in the cells."""
    data = frame.dropna(subset=["diff_vol_bp"])
    if data.empty:
        return pd.DataFrame()
    if by_option:
        data = data.assign(
            series=[f"T={t:g} K={k:g}" for t, k in zip(data.maturity, data.strike, strict=True)]
        )
        return data.pivot_table(
            index="as_of", columns="series", values="diff_vol_bp", aggfunc="first"
        )
    worst = data.loc[data.diff_vol_bp.abs().groupby([data.as_of, data.model_id]).idxmax()]
    return worst.pivot_table(index="as_of", columns="model_id", values="diff_vol_bp")


def write_export(frame: pd.DataFrame, out: Path, by_option: bool) -> None:
    """CSV of the rows, or an xlsx with the rows and a native trend chart."""
    suffix = out.suffix.lower()
    table = frame.rename(columns=_HEADERS)
    if suffix == ".csv":
        table.to_csv(out, index=False)
        return
    if suffix != ".xlsx":
        raise ControlError(f"--out must end in .csv or .xlsx, got {out.name!r}")
    wb = Workbook()
    ws = wb.active
    ws.title = "Stored rows"
    ws.append(list(table.columns))
    for cell in ws[1]:
        cell.font = Font(bold=True)
    for row in table.itertuples(index=False):
        ws.append([None if (isinstance(v, float) and v != v) else v for v in row])
    ws.freeze_panes = "A2"
    trend = trend_table(frame, by_option)
    tw = wb.create_sheet("Trend")
    tw.append(["as-of", *[str(c) for c in trend.columns]])
    for cell in tw[1]:
        cell.font = Font(bold=True)
    for as_of, values in trend.iterrows():
        tw.append([dt.date.fromisoformat(as_of), *[None if v != v else float(v) for v in values]])
    for r in range(2, tw.max_row + 1):
        tw.cell(row=r, column=1).number_format = "yyyy-mm-dd"
        for c in range(2, tw.max_column + 1):
            tw.cell(row=r, column=c).number_format = "+0.0;-0.0;0.0"
    tw.column_dimensions["A"].width = 12
    if len(trend):
        chart = LineChart()
        what = "option" if by_option else "model (largest in size over its options)"
        chart.title = f"MC minus Fourier (vol bp) by {what}"
        chart.y_axis.title = "vol bp"
        chart.x_axis.title = "as-of date"
        chart.x_axis.number_format = "yyyy-mm-dd"
        for axis in (chart.x_axis, chart.y_axis):
            axis.delete = False
        last = tw.max_row
        chart.add_data(
            Reference(tw, min_col=2, max_col=tw.max_column, min_row=1, max_row=last),
            titles_from_data=True,
        )
        chart.set_categories(Reference(tw, min_col=1, min_row=2, max_row=last))
        for series in chart.series:
            series.marker.symbol = "circle"
            series.smooth = False
        chart.height, chart.width = 9, 20
        tw.add_chart(chart, f"{get_column_letter(tw.max_column + 2)}2")
    wb.save(out)


def text_table(frame: pd.DataFrame) -> str:
    """A short plain listing for the terminal."""
    if frame.empty:
        return "no rows"
    cols = ["as_of", "model_id", "maturity", "strike", "status", "verdict", "diff_vol_bp"]
    shown = frame[cols].rename(columns=_HEADERS)
    with pd.option_context("display.width", 160, "display.max_rows", 200):
        return shown.to_string(index=False, float_format=lambda v: f"{v:.4g}")
