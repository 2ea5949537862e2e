"""One-time import of a *History* sheet written before the history store existed.

Older refreshes kept the history only in the workbook.  The first refresh
that meets a store without this book's history reads that sheet (its header
row names the columns, in the old wording or the current one) and records
its dates in the store, so no past day is lost.
"""

from __future__ import annotations

import datetime as dt
import math
import re

from .results import FIELDS

__all__ = ["rows_from_history_sheet"]

#: Headers of the sheet before the store existed, by the key they hold now.
_OLD_HEADERS = {
    "negative-step prob.": "negative_probability",
    "largest safe step (years)": "safe_step_years",
    "maturity": "maturity",
    "difference": "diff_price",
    "difference (vol bp)": "diff_vol_bp",
    "std error": "std_error",
    "variance quantiles": "quantiles",
}


def _norm(text) -> str:
    text = re.sub(r"\(1/\d+ y\)", "", str(text or ""))  # the production step in a header
    return re.sub(r"\s+", " ", text.strip().lower())


_BY_HEADER = {_norm(f.header): f.key for f in FIELDS} | {
    _norm(h): k for h, k in _OLD_HEADERS.items()
}
_KIND = {f.key: f.kind for f in FIELDS}


def _as_date(value) -> str | None:
    if isinstance(value, dt.datetime):
        return value.date().isoformat()
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, str):
        try:
            return dt.date.fromisoformat(value.strip()).isoformat()
        except ValueError:
            return None
    return None


def _value(key, value):
    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    kind = _KIND[key]
    if kind == "datetime":
        return value.isoformat() if isinstance(value, dt.datetime) else str(value)
    if kind == "text":
        return str(value)
    if kind == "seed":
        return int(value) if isinstance(value, (int, float)) and math.isfinite(value) else None
    if isinstance(value, str) and value.strip().lower() == "unbounded":
        return math.inf
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    return float(value)


def rows_from_history_sheet(ws) -> list[dict]:
    """Rows of a *History* sheet as store rows (keys of FIELDS); notes and blanks skipped."""
    values = list(ws.iter_rows(values_only=True))
    if not values:
        return []
    columns, seen = {}, set()
    for j, h in enumerate(values[0]):
        key = _BY_HEADER.get(_norm(h))
        if key and key not in seen:  # the first column of a name wins
            columns[j] = key
            seen.add(key)
    if "as_of" not in columns.values() or "model_id" not in columns.values():
        return []
    out = []
    for raw in values[1:]:
        row = {key: raw[j] for j, key in columns.items() if j < len(raw)}
        as_of = _as_date(row.get("as_of"))
        if as_of is None:
            continue  # notes and chart data below the table
        item = {key: _value(key, v) for key, v in row.items() if key != "as_of"}
        item["as_of"] = as_of
        if item.get("safe_step_years") is not None and item.get("safe_step_days") is None:
            years = item["safe_step_years"]
            item["safe_step_days"] = years * 252 if math.isfinite(years) else math.inf
        out.append(item)
    return out
