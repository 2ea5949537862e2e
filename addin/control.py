"""The daily control refresh: read the book, check every model, write results safely.

File-level problems (not a workbook, unreadable, missing sheet or column,
bad settings) stop the run before anything is written.  Row-level problems
(text in a number cell, an out-of-range parameter, a duplicate id) mark that
model as an input error and the other models are still checked.

Writing never loses data: the new workbook is saved to a temporary file in
the target folder and moved over the target in one atomic step; the previous
file is kept as ``<name>.bak<suffix>`` first.  A workbook that is open in a
spreadsheet program (its lock file beside it) is not written in place, nor
one holding content openpyxl would drop (charts or images outside the
results sheet, pivot tables, macros, slicers): then the results go to a new
file and the reason is printed.
"""

from __future__ import annotations

import datetime as dt
import math
import os
import re
import shutil
import sys
import tempfile
import time
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

from openpyxl import load_workbook
from openpyxl.chart import BarChart, Reference
from openpyxl.formatting.rule import FormulaRule
from openpyxl.styles import Font, PatternFill
from openpyxl.utils import get_column_letter

from rootvar.core import HestonParams, InputError, __version__
from rootvar.core.control import ControlSettings, ModelSpec, check_model, row_seed

__all__ = [
    "EXIT_BREACH",
    "EXIT_CLEAR",
    "EXIT_FILE",
    "EXIT_ROWS",
    "RESULT_COLUMNS",
    "ControlError",
    "refresh",
]

EXIT_CLEAR, EXIT_BREACH, EXIT_FILE, EXIT_ROWS = 0, 1, 2, 3

SETTINGS_SHEET, MODELS_SHEET, RESULTS_SHEET, HISTORY_SHEET = (
    "Settings",
    "Models",
    "Results",
    "History",
)
#: Largest total uncompressed size accepted (bytes); larger archives are refused.
MAX_UNPACKED = 300 * 1024 * 1024

MODEL_COLUMNS = {
    "model id": "model_id",
    "underlying": "underlying",
    "spot": "spot",
    "rate": "rate",
    "dividend yield": "div_yield",
    "v0": "v0",
    "kappa": "kappa",
    "theta": "theta",
    "vol_of_vol": "vol_of_vol",
    "rho": "rho",
    "maturities (years)": "maturities",
    "moneyness (strike / spot)": "moneyness",
}
SETTING_LABELS = {
    "feller ratio warning below": ("feller_warning", float),
    "max negative-step probability": ("max_negative_probability", float),
    "production scheme": ("scheme", str),
    "steps per year": ("steps_per_year", int),
    "paths": ("paths", int),
    "seed": ("seed", int),
    "tolerance (vol bp)": ("tolerance_bp", float),
    "z": ("z", float),
    "quantile levels": ("quantiles", tuple),
}
RESULT_COLUMNS = [
    "as-of",
    "run time (UTC)",
    "rootvar version",
    "model id",
    "underlying",
    "status",
    "Feller ratio",
    "regime",
    "negative-step prob.",
    "largest safe step (years)",
    "maturity",
    "strike",
    "Fourier price",
    "Monte Carlo price",
    "std error",
    "difference",
    "difference (vol bp)",
    "z-score",
    "verdict",
    "variance quantiles",
    "recommendation",
    "flags",
    "seed",
    "message",
]
_AMBER = PatternFill("solid", fgColor="F6E3B4")
_ROSE = PatternFill("solid", fgColor="F2C9C4")
_BOLD = Font(bold=True)


class ControlError(Exception):
    """A file-level problem: nothing is written."""


def _norm(label) -> str:
    return re.sub(r"\s+", " ", str(label).strip().lower().replace("_", " ")) if label else ""


_MODEL_KEYS = {_norm(k): v for k, v in MODEL_COLUMNS.items()}
_SETTING_KEYS = {_norm(k): v for k, v in SETTING_LABELS.items()}


# ------------------------------------------------------------------ reading


def _check_archive(path: Path) -> None:
    if not path.exists():
        raise ControlError(f"{path}: no such file")
    if not zipfile.is_zipfile(path):
        raise ControlError(f"{path}: not a workbook (.xlsx files are zip archives; this is not)")
    try:
        with zipfile.ZipFile(path) as z:
            total = sum(i.file_size for i in z.infolist())
            bad = z.testzip()
    except (zipfile.BadZipFile, OSError, EOFError) as exc:
        raise ControlError(f"{path}: corrupted workbook archive: {exc}") from exc
    if bad is not None:
        raise ControlError(f"{path}: corrupted workbook archive (damaged part {bad})")
    if total > MAX_UNPACKED:
        raise ControlError(
            f"{path}: refusing an archive that unpacks to {total:,} bytes (limit {MAX_UNPACKED:,})"
        )


def _foreign_content(path: Path, wb) -> list[str]:
    """Content openpyxl would drop or rewrite on save (reasons, empty if none)."""
    reasons = []
    with zipfile.ZipFile(path) as z:
        names = z.namelist()
    for prefix, what in [
        ("xl/pivotTables/", "pivot tables"),
        ("xl/slicers/", "slicers"),
        ("xl/vbaProject.bin", "macros"),
        ("xl/externalLinks/", "external links"),
    ]:
        if any(n.startswith(prefix) for n in names):
            reasons.append(what)
    for ws in wb.worksheets:
        if ws.title != RESULTS_SHEET and getattr(ws, "_charts", None):
            reasons.append(f"charts on sheet {ws.title!r}")
        if getattr(ws, "_images", None):
            reasons.append(f"images on sheet {ws.title!r}")
    return reasons


def _float(value, name):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"{name} must be a number, got {value!r}")
    if not math.isfinite(value):
        raise InputError(f"{name} must be finite, got {value!r}")
    return float(value)


def _list_of_numbers(value, name):
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        items = [value]
    elif isinstance(value, str) and value.strip():
        try:
            items = [float(x) for x in re.split(r"[,;\s]+", value.strip()) if x]
        except ValueError as exc:
            raise InputError(f"{name} must be numbers separated by commas, got {value!r}") from exc
    else:
        raise InputError(f"{name} must be numbers separated by commas, got {value!r}")
    if not items or not all(math.isfinite(x) and x > 0 for x in items):
        raise InputError(f"{name} must be positive numbers, got {value!r}")
    return tuple(float(x) for x in items)


def read_settings(ws) -> ControlSettings:
    found = {}
    for row in ws.iter_rows(values_only=True):
        if not row or row[0] is None:
            continue
        key = _SETTING_KEYS.get(_norm(row[0]))
        if key is None:
            continue
        name, kind = key
        value = row[1] if len(row) > 1 else None
        try:
            if kind is float:
                found[name] = _float(value, row[0])
            elif kind is int:
                number = _float(value, row[0])
                if number != int(number):
                    raise InputError(f"{row[0]} must be a whole number, got {value!r}")
                found[name] = int(number)
            elif kind is tuple:
                found[name] = _list_of_numbers(value, row[0])
            else:
                found[name] = str(value).strip().lower() if value is not None else ""
        except InputError as exc:
            raise ControlError(f"sheet {SETTINGS_SHEET!r}: {exc}") from exc
    missing = [label for label, (name, _) in SETTING_LABELS.items() if name not in found]
    if missing:
        raise ControlError(f"sheet {SETTINGS_SHEET!r}: missing setting(s): {', '.join(missing)}")
    try:
        return ControlSettings(**found)
    except InputError as exc:
        raise ControlError(f"sheet {SETTINGS_SHEET!r}: {exc}") from exc


@dataclass
class ModelRow:
    """One row of the models sheet: a spec, or the reason it has none."""

    row: int
    model_id: str
    underlying: str
    spec: ModelSpec | None = None
    error: str = ""


def read_models(ws) -> list[ModelRow]:
    rows = list(ws.iter_rows(values_only=True))
    if not rows:
        raise ControlError(f"sheet {MODELS_SHEET!r} is empty")
    header = {
        _MODEL_KEYS.get(_norm(v)): j for j, v in enumerate(rows[0]) if _MODEL_KEYS.get(_norm(v))
    }
    missing = [label for label, key in MODEL_COLUMNS.items() if key not in header]
    if missing:
        raise ControlError(f"sheet {MODELS_SHEET!r}: missing column(s): {', '.join(missing)}")
    out = []
    for i, values in enumerate(rows[1:], start=2):
        cells = {key: (values[j] if j < len(values) else None) for key, j in header.items()}
        if all(v is None or (isinstance(v, str) and not v.strip()) for v in cells.values()):
            continue  # empty rows are skipped
        model_id = str(cells["model_id"]).strip() if cells["model_id"] is not None else ""
        underlying = str(cells["underlying"] or "").strip()
        item = ModelRow(i, model_id, underlying)
        try:
            if not model_id:
                raise InputError("model id is empty")
            numbers = {
                k: _float(cells[k], label)
                for label, k in MODEL_COLUMNS.items()
                if k in ("spot", "rate", "div_yield", "v0", "kappa", "theta", "vol_of_vol", "rho")
            }
            if numbers["spot"] <= 0:
                raise InputError(f"spot must be > 0, got {numbers['spot']!r}")
            params = HestonParams(
                numbers["v0"],
                numbers["kappa"],
                numbers["theta"],
                numbers["vol_of_vol"],
                numbers["rho"],
            )
            item.spec = ModelSpec(
                model_id,
                underlying,
                numbers["spot"],
                numbers["rate"],
                numbers["div_yield"],
                params,
                _list_of_numbers(cells["maturities"], "maturities"),
                _list_of_numbers(cells["moneyness"], "moneyness"),
            )
        except InputError as exc:
            item.error = str(exc)
        out.append(item)
    counts = {}
    for item in out:
        if item.model_id:
            counts[item.model_id] = counts.get(item.model_id, 0) + 1
    for item in out:
        if counts.get(item.model_id, 0) > 1:
            item.spec, item.error = (
                None,
                f"duplicate model id {item.model_id!r} (rows "
                + ", ".join(str(o.row) for o in out if o.model_id == item.model_id)
                + ")",
            )
    return out


# ------------------------------------------------------------------ computing


def _check_one(spec: ModelSpec, settings: ControlSettings):
    """Rows for one model, or the error that stopped it (never raises)."""
    try:
        return check_model(spec, settings), ""
    except Exception as exc:
        return [], f"{type(exc).__name__}: {exc}"


def _compute(specs, settings, workers, scheduler, progress):
    if scheduler:
        try:
            from dask.distributed import Client
        except ImportError as exc:
            raise ControlError(
                "--scheduler needs the optional extra: pip install 'rootvar[cluster]'"
            ) from exc
        with Client(scheduler) as client:
            futures = client.map(_check_one, specs, settings=settings, pure=False)
            results = client.gather(futures)
        for spec, (_, err) in zip(specs, results, strict=True):
            progress(spec, err)
        return results
    if workers <= 1 or len(specs) <= 1:
        results = []
        for spec in specs:
            results.append(_check_one(spec, settings))
            progress(spec, results[-1][1])
        return results
    from concurrent.futures import ProcessPoolExecutor

    with ProcessPoolExecutor(max_workers=workers) as pool:
        results = []
        for spec, res in zip(
            specs, pool.map(_check_one, specs, [settings] * len(specs)), strict=True
        ):
            results.append(res)
            progress(spec, res[1])
    return results


# ------------------------------------------------------------------ writing


def _result_rows(models, results, settings, as_of, run_time):
    rows = []
    by_id = dict(results)
    for item in models:
        base = [as_of, run_time, __version__, item.model_id, item.underlying]
        if item.spec is None:
            rows.append(base + ["input error"] + [""] * 16 + ["", item.error])
            continue
        res, err = by_id[item.row]
        seed = row_seed(settings.seed, item.model_id)
        if err:
            rows.append(base + ["failed"] + [""] * 16 + [seed, err])
            continue
        for r in res:
            quant = ", ".join(f"q{100 * q:g}%={v:.4g}" for q, v in r["quantiles"].items())
            safe = r["safe_step_years"]
            status = "breach" if r["flags"] else "clear"
            rows.append(
                base
                + [
                    status,
                    r["feller_ratio"],
                    r["regime"],
                    r["negative_probability"],
                    "unbounded" if math.isinf(safe) else safe,
                    r["maturity"],
                    r["strike"],
                    r["fourier_price"],
                    r["mc_price"],
                    r["std_error"],
                    r["diff_price"],
                    r["diff_vol_bp"] if math.isfinite(r["diff_vol_bp"]) else "",
                    r["z_score"] if math.isfinite(r["z_score"]) else "",
                    r["verdict"],
                    quant,
                    r["recommendation"],
                    "; ".join(r["flags"]),
                    r["seed"],
                    "",
                ]
            )
    return rows


def _put(ws, row, col, value):
    cell = ws.cell(row=row, column=col, value=value)
    if isinstance(value, str) and value.startswith("="):
        cell.data_type = "s"  # text from input cells is never written as a formula
    return cell


def _write_table(ws, rows):
    for j, name in enumerate(RESULT_COLUMNS, start=1):
        ws.cell(row=1, column=j, value=name).font = _BOLD
    for i, row in enumerate(rows, start=2):
        for j, value in enumerate(row, start=1):
            _put(ws, i, j, value)
    ws.freeze_panes = "A2"


def _write_results(wb, rows):
    if RESULTS_SHEET in wb.sheetnames:
        index = wb.sheetnames.index(RESULTS_SHEET)
        del wb[RESULTS_SHEET]
        ws = wb.create_sheet(RESULTS_SHEET, index)
    else:
        ws = wb.create_sheet(RESULTS_SHEET)
    _write_table(ws, rows)
    last = len(rows) + 1
    status = RESULT_COLUMNS.index("status") + 1
    col = get_column_letter(status)
    span = f"A2:{get_column_letter(len(RESULT_COLUMNS))}{max(last, 2)}"
    ws.conditional_formatting.add(span, FormulaRule(formula=[f'${col}2="breach"'], fill=_AMBER))
    ws.conditional_formatting.add(
        span, FormulaRule(formula=[f'OR(${col}2="input error",${col}2="failed")'], fill=_ROSE)
    )
    if len(rows):
        chart = BarChart()
        chart.title = "Monte Carlo minus Fourier (vol bp), production scheme"
        chart.y_axis.title = "vol bp"
        bp = RESULT_COLUMNS.index("difference (vol bp)") + 1
        chart.add_data(Reference(ws, min_col=bp, min_row=1, max_row=last), titles_from_data=True)
        chart.set_categories(Reference(ws, min_col=4, min_row=2, max_row=last))
        chart.legend = None
        chart.height, chart.width = 8, 22
        ws.add_chart(chart, f"{get_column_letter(len(RESULT_COLUMNS) + 2)}2")


def _write_history(wb, rows, as_of):
    old = []
    if HISTORY_SHEET in wb.sheetnames:
        ws = wb[HISTORY_SHEET]
        values = list(ws.iter_rows(values_only=True))
        old = [list(r) for r in values[1:] if r and r[0] is not None and str(r[0]) != as_of]
        index = wb.sheetnames.index(HISTORY_SHEET)
        del wb[HISTORY_SHEET]
        ws = wb.create_sheet(HISTORY_SHEET, index)
    else:
        ws = wb.create_sheet(HISTORY_SHEET)
    merged = sorted(
        old + [list(r) for r in rows], key=lambda r: str(r[0])
    )  # stable: one block a date
    _write_table(ws, merged)


def _lock_files(path: Path) -> list[Path]:
    return [
        p
        for p in (path.with_name("~$" + path.name), path.with_name(f".~lock.{path.name}#"))
        if p.exists()
    ]


def _save_atomic(wb, target: Path, keep_backup: bool) -> Path | None:
    folder = target.parent
    try:
        fd, tmp = tempfile.mkstemp(prefix=".rootvar-", suffix=target.suffix, dir=folder)
    except OSError as exc:
        raise ControlError(f"cannot write in {folder}: {exc}") from exc
    os.close(fd)
    backup = None
    try:
        wb.save(tmp)
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
        if keep_backup and target.exists():
            backup = target.with_name(f"{target.stem}.bak{target.suffix}")
            fd2, tmp_backup = tempfile.mkstemp(prefix=".rootvar-", suffix=".bak", dir=folder)
            os.close(fd2)
            shutil.copy2(target, tmp_backup)
            os.replace(tmp_backup, backup)
        os.replace(tmp, target)
    except Exception as exc:
        raise ControlError(f"could not save {target}: {exc}; the original is unchanged") from exc
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return backup


# ------------------------------------------------------------------ the command


@dataclass
class RefreshOutcome:
    """What a refresh did, for the command line and tests."""

    exit_code: int
    output: Path | None = None
    backup: Path | None = None
    rows: list = field(default_factory=list)
    notes: list = field(default_factory=list)


def refresh(
    workbook, as_of=None, out=None, workers=1, scheduler=None, quiet=True, stream=None
) -> RefreshOutcome:
    """Refresh the control workbook; see the module docstring.  Raises ControlError."""
    stream = stream or sys.stderr
    path = Path(workbook)
    as_of = as_of or dt.date.today().isoformat()
    try:
        dt.date.fromisoformat(as_of)
    except ValueError as exc:
        raise ControlError(f"--as-of must be a date like 2026-12-01, got {as_of!r}") from exc
    _check_archive(path)
    try:
        wb = load_workbook(path, keep_vba=path.suffix.lower() == ".xlsm")
    except Exception as exc:
        raise ControlError(f"{path}: unreadable workbook: {type(exc).__name__}: {exc}") from exc
    for sheet in (SETTINGS_SHEET, MODELS_SHEET):
        if sheet not in wb.sheetnames:
            raise ControlError(
                f"{path}: missing sheet {sheet!r} (sheets: {', '.join(wb.sheetnames)})"
            )
    settings = read_settings(wb[SETTINGS_SHEET])
    models = read_models(wb[MODELS_SHEET])
    notes = []
    target = Path(out) if out else path
    in_place = target.resolve() == path.resolve()
    if in_place:
        locks = _lock_files(path)
        if locks:
            raise ControlError(
                f"{path} is open in a spreadsheet program ({locks[0].name} exists); "
                "close it or give --out"
            )
        foreign = _foreign_content(path, wb)
        if foreign:
            target = path.with_name(f"{path.stem}.refreshed{path.suffix}")
            notes.append(
                f"wrote {target.name} instead of refreshing in place: the workbook holds "
                f"{', '.join(foreign)}, which would be lost on saving"
            )
    elif not target.parent.exists():
        raise ControlError(f"--out folder {target.parent} does not exist")

    specs = [m.spec for m in models if m.spec is not None]
    spec_rows = {id(m.spec): m.row for m in models if m.spec is not None}
    done = {"n": 0}
    started = time.perf_counter()

    def progress(spec, err):
        done["n"] += 1
        if not quiet:
            state = f"failed: {err}" if err else "done"
            print(
                f"[{done['n']}/{len(specs)}] {spec.model_id} {state} "
                f"({time.perf_counter() - started:.1f} s)",
                file=stream,
                flush=True,
            )

    results = _compute(specs, settings, workers, scheduler, progress)
    keyed = [(spec_rows[id(s)], r) for s, r in zip(specs, results, strict=True)]
    run_time = dt.datetime.now(dt.UTC).replace(microsecond=0).isoformat()
    rows = _result_rows(models, keyed, settings, as_of, run_time)
    _write_results(wb, rows)
    _write_history(wb, rows, as_of)
    backup = _save_atomic(wb, target, keep_backup=target.exists())
    statuses = {r[5] for r in rows}
    verdicts = {r[18] for r in rows}
    if statuses & {"input error", "failed"}:
        code = EXIT_ROWS
    elif "breach" in statuses or verdicts & {"biased", "undecided"}:
        code = EXIT_BREACH
    else:
        code = EXIT_CLEAR
    return RefreshOutcome(code, target, backup, rows, notes)


def summary_table(rows) -> str:
    """Plain text: one line per model with its status and its worst verdict."""
    order = {"biased": 3, "undecided": 2, "consistent": 1, "": 0}
    per = {}
    for r in rows:
        key = r[3]
        status, verdict, flags = r[5], r[18] or "", r[21] or r[23] or ""
        cur = per.get(key)
        if cur is None or order.get(verdict, 0) > order.get(cur[1], 0):
            per[key] = (status if cur is None or cur[0] == "clear" else cur[0], verdict, flags)
        elif status != "clear":
            per[key] = (status, cur[1], cur[2] or flags)
    width = max([len("model id")] + [len(k) for k in per])
    lines = [f"{'model id':<{width}}  {'status':<11}  {'worst verdict':<13}  flags / message"]
    for key, (status, verdict, flags) in per.items():
        lines.append(f"{key:<{width}}  {status:<11}  {verdict:<13}  {flags[:90]}")
    return "\n".join(lines)
