"""Control books for the refresh tests: the shipped template, fast settings, few models."""

import datetime as dt
import hashlib
from pathlib import Path

from openpyxl import load_workbook

import rootvar.addin.control as control
from rootvar.addin.workbooks.build import build_control

FAST = {"paths": 4096, "steps per year": 8, "quantile levels": "0.01, 0.99"}


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def make_book(folder: Path, edit=None, models=3, name="control.xlsx") -> Path:
    """The shipped control template with fast settings and short test options."""
    path = folder / name
    build_control(path)
    wb = load_workbook(path)
    settings = wb["Settings"]
    for row in settings.iter_rows(min_row=4, max_row=12):
        if row[0].value in FAST:
            row[1].value = FAST[row[0].value]
    ws = wb["Models"]
    for r in range(2, ws.max_row + 1):
        ws.cell(row=r, column=11, value="0.5")
        ws.cell(row=r, column=12, value="0.9, 1.1")
    ws.delete_rows(2 + models, ws.max_row)
    if edit:
        edit(wb)
    wb.save(path)
    return path


def _rows(path: Path, sheet="Results"):
    """The table's rows (lists in RESULT_COLUMNS order), without notes and chart data below."""
    out = []
    for r in load_workbook(path)[sheet].iter_rows(min_row=2, values_only=True):
        if not isinstance(r[0], dt.datetime):
            break
        out.append([r[0].date().isoformat(), *r[1 : len(control.RESULT_COLUMNS)]])
    return out


def _col(name):
    return control.RESULT_COLUMNS.index(name)


def _without_run_time(rows):
    return [r[:1] + r[2:] for r in rows]


def _visible(folder):
    """Files a user sees: the lock rootvar leaves empty is hidden and holds no data."""
    return sorted(p.name for p in folder.iterdir() if not p.name.startswith("."))
