"""Reading the control workbook: the file itself, its settings and its models.

Everything here is read and validated before any model is checked.  A
file-level problem (no such file, no right to read it, not a workbook, a
missing sheet, column or setting) raises :class:`ControlError` and the run
writes nothing.  A row-level problem (text in a number cell, an out-of-range
parameter, a duplicate id, an empty entry in a list) marks that model as an
input error naming the cell, and the other models are still checked.
"""

from __future__ import annotations

import hashlib
import io
import math
import os
import re
import zipfile
from dataclasses import dataclass
from pathlib import Path

from openpyxl import load_workbook
from openpyxl.utils import get_column_letter

from rootvar.addin.files import file_problem, os_cause
from rootvar.core import HestonParams, InputError
from rootvar.core.checks.daily import ControlSettings, ModelSpec

__all__ = [
    "HISTORY_SHEET",
    "MAX_UNPACKED",
    "MODELS_SHEET",
    "MODEL_COLUMNS",
    "RESULTS_SHEET",
    "SETTINGS_SHEET",
    "SETTING_LABELS",
    "BookSnapshot",
    "ControlError",
    "ModelRow",
    "read_book",
    "read_models",
    "read_settings",
]

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
#: Settings every book must have: label -> (field of ControlSettings, kind).
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
#: Settings a book may have (older books do not): label -> (name, kind, default).
OPTIONAL_SETTINGS = {
    "history store": ("history_url", str, ""),
    "history dates shown": ("history_dates", int, 20),
    "book name": ("book_name", str, ""),
}


class ControlError(Exception):
    """A file-level problem: nothing is written."""


def _norm(label) -> str:
    return re.sub(r"\s+", " ", str(label).strip().lower().replace("_", " ")) if label else ""


_MODEL_KEYS = {_norm(k): v for k, v in MODEL_COLUMNS.items()}
_SETTING_KEYS = {_norm(k): v for k, v in SETTING_LABELS.items()}
_OPTIONAL_KEYS = {_norm(k): v for k, v in OPTIONAL_SETTINGS.items()}


# ------------------------------------------------------------------ the file


@dataclass(frozen=True)
class BookSnapshot:
    """The bytes of the workbook as read, and its identity at that moment.

    The identity (size, modification time in ns, SHA-256) is compared again
    just before the refreshed file replaces the workbook: if anything else
    wrote the file meanwhile, the refresh does not overwrite it.
    """

    path: Path
    data: bytes
    size: int
    mtime_ns: int
    sha256: str

    @classmethod
    def read(cls, path: Path) -> BookSnapshot:
        problem = file_problem(path)
        if problem:
            raise ControlError(f"{path}: {problem}")
        try:
            with open(path, "rb") as fh:
                st = os.fstat(fh.fileno())
                data = fh.read()
        except OSError as exc:
            raise ControlError(f"{path}: cannot read the file ({os_cause(exc)})") from exc
        return cls(path, data, st.st_size, st.st_mtime_ns, hashlib.sha256(data).hexdigest())

    def changed_since(self) -> str:
        """Why the file on disk is no longer the one read ("" if it is the same)."""
        try:
            st = self.path.stat()
        except OSError as exc:
            return f"it can no longer be reached ({os_cause(exc)})"
        if st.st_size != self.size or st.st_mtime_ns != self.mtime_ns:
            return "it was changed by something else while the refresh ran"
        try:
            digest = hashlib.sha256(self.path.read_bytes()).hexdigest()
        except OSError as exc:
            return f"it can no longer be read ({os_cause(exc)})"
        if digest != self.sha256:
            return "its content was changed by something else while the refresh ran"
        return ""


def _check_archive(snap: BookSnapshot) -> None:
    path = snap.path
    buffer = io.BytesIO(snap.data)
    if not zipfile.is_zipfile(buffer):
        raise ControlError(f"{path}: not a workbook (.xlsx files are zip archives; this is not)")
    try:
        with zipfile.ZipFile(buffer) as z:
            total = sum(i.file_size for i in z.infolist())
            if total > MAX_UNPACKED:
                raise ControlError(
                    f"{path}: refusing an archive that unpacks to {total:,} bytes "
                    f"(limit {MAX_UNPACKED:,})"
                )
            bad = z.testzip()
    except (zipfile.BadZipFile, OSError, EOFError) as exc:
        raise ControlError(f"{path}: corrupted workbook archive: {exc}") from exc
    if bad is not None:
        raise ControlError(f"{path}: corrupted workbook archive (damaged part {bad})")


def foreign_content(snap: BookSnapshot, wb) -> list[str]:
    """Content openpyxl would drop or rewrite on save (reasons, empty if none)."""
    reasons = []
    with zipfile.ZipFile(io.BytesIO(snap.data)) as z:
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


def read_book(path: Path):
    """Snapshot and parsed workbook of ``path``; raises ControlError."""
    snap = BookSnapshot.read(path)
    _check_archive(snap)
    try:
        wb = load_workbook(io.BytesIO(snap.data), keep_vba=path.suffix.lower() == ".xlsm")
    except Exception as exc:  # openpyxl raises many kinds on a damaged file
        raise ControlError(f"{path}: unreadable workbook ({exc})") from exc
    for sheet in (SETTINGS_SHEET, MODELS_SHEET):
        if sheet not in wb.sheetnames:
            raise ControlError(
                f"{path}: missing sheet {sheet!r} (sheets: {', '.join(wb.sheetnames)})"
            )
    return snap, wb


# ------------------------------------------------------------------ cells


def _float(value, name):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"{name} must be a number, got {value!r}")
    if not math.isfinite(value):
        raise InputError(f"{name} must be finite, got {value!r}")
    return float(value)


def _list_of_numbers(value, name):
    """A comma-separated list of positive numbers; an empty entry is an error."""
    rule = f"{name} must be positive numbers separated by commas"
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        items = [value]
    elif isinstance(value, str) and value.strip():
        parts = [p.strip() for p in value.strip().split(",")]
        if len(parts) == 1:
            parts = [p for p in re.split(r"[;\s]+", parts[0]) if p]
        if any(not p for p in parts):
            raise InputError(f"{rule} with no empty entries, got {value!r}")
        try:
            items = [float(x) for x in parts]
        except ValueError as exc:
            raise InputError(f"{rule}, got {value!r}") from exc
    else:
        raise InputError(f"{rule}, got {value!r}")
    if not all(math.isfinite(x) and x > 0 for x in items):
        raise InputError(f"{rule}, got {value!r}")
    return tuple(float(x) for x in items)


def read_settings(ws) -> tuple[ControlSettings, dict]:
    """The desk's settings, and the optional store settings (name -> value)."""
    found, optional = {}, {name: default for name, _, default in OPTIONAL_SETTINGS.values()}
    for row in ws.iter_rows(values_only=True):
        if not row or row[0] is None:
            continue
        label = _norm(row[0])
        value = row[1] if len(row) > 1 else None
        try:
            if label in _OPTIONAL_KEYS:
                name, kind, _ = _OPTIONAL_KEYS[label]
                if value is None or (isinstance(value, str) and not value.strip()):
                    continue
                if kind is int:
                    number = _float(value, row[0])
                    if number != int(number) or number < 1:
                        raise InputError(f"{row[0]} must be a whole number >= 1, got {value!r}")
                    optional[name] = int(number)
                else:
                    optional[name] = str(value).strip()
                continue
            key = _SETTING_KEYS.get(label)
            if key is None:
                continue
            name, kind = key
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
        return ControlSettings(**found), optional
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


_NUMBER_KEYS = ("spot", "rate", "div_yield", "v0", "kappa", "theta", "vol_of_vol", "rho")


def read_models(ws) -> list[ModelRow]:
    """One :class:`ModelRow` per non-empty row of the models sheet."""
    rows = list(ws.iter_rows(values_only=True))
    if not rows:
        raise ControlError(f"sheet {MODELS_SHEET!r} is empty")
    header = {
        _MODEL_KEYS.get(_norm(v)): j for j, v in enumerate(rows[0]) if _MODEL_KEYS.get(_norm(v))
    }
    missing = [label for label, key in MODEL_COLUMNS.items() if key not in header]
    if missing:
        raise ControlError(f"sheet {MODELS_SHEET!r}: missing column(s): {', '.join(missing)}")
    labels = {key: label for label, key in MODEL_COLUMNS.items()}
    out = []
    for i, values in enumerate(rows[1:], start=2):
        cells = {key: (values[j] if j < len(values) else None) for key, j in header.items()}
        if all(v is None or (isinstance(v, str) and not v.strip()) for v in cells.values()):
            continue  # empty rows are skipped
        model_id = str(cells["model_id"]).strip() if cells["model_id"] is not None else ""
        underlying = str(cells["underlying"] or "").strip()
        item = ModelRow(i, model_id, underlying)

        def where(key, row=i):
            return f"cell {get_column_letter(header[key] + 1)}{row}"

        try:
            if not model_id:
                raise InputError(f"model id ({where('model_id')}) is empty")
            numbers = {}
            for key in _NUMBER_KEYS:
                try:
                    numbers[key] = _float(cells[key], labels[key])
                except InputError as exc:
                    raise InputError(f"{where(key)}: {exc}") from exc
            if numbers["spot"] <= 0:
                raise InputError(f"{where('spot')}: spot must be > 0, got {numbers['spot']!r}")
            params = HestonParams(
                numbers["v0"],
                numbers["kappa"],
                numbers["theta"],
                numbers["vol_of_vol"],
                numbers["rho"],
            )
            lists = {}
            for key in ("maturities", "moneyness"):
                try:
                    lists[key] = _list_of_numbers(cells[key], key)
                except InputError as exc:
                    raise InputError(f"{where(key)}: {exc}") from exc
            item.spec = ModelSpec(
                model_id,
                underlying,
                numbers["spot"],
                numbers["rate"],
                numbers["div_yield"],
                params,
                lists["maturities"],
                lists["moneyness"],
            )
        except InputError as exc:
            item.error = str(exc)
        out.append(item)
    counts: dict[str, int] = {}
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
