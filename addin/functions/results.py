"""What a cell gives back: numbers, columns and tables of plain words and values.

A spreadsheet has no NaN, infinity or numpy scalar, and a table spills with a
header row of plain trade words; these helpers shape the core's results into
such cells.  :func:`step_words` and :func:`trading_days` state a step in years
and in trading days.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["finite", "frame_rows", "one_or_column", "pairs", "step_words", "trading_days"]


def _column(values) -> list[list]:
    return [[float(v)] for v in np.ravel(values)]


def one_or_column(values, single: bool):
    return float(np.ravel(values)[0]) if single else _column(values)


def finite(value):
    """Spreadsheets have no NaN or infinity: show them as empty text."""
    if isinstance(value, (float, np.floating)) and not math.isfinite(value):
        return ""
    if isinstance(value, np.generic):
        return value.item()
    return value


def _header(column: str) -> str:
    """Plain words for a core column name."""
    fixed = {
        "horizon_years": "horizon (years)",
        "std": "std dev",
        "p_below_near_zero": "P(variance < near-zero level)",
        "euler_neg_prob_at_v0": "Euler negative-step prob. at v0",
        "notes": "notes",
        "dt": "dt (years)",
        "std_error": "std error",
        "bias_price": "bias",
        "bias_vol_bp": "bias (vol bp)",
        "z_score": "z-score",
    }
    if column in fixed:
        return fixed[column]
    return column.replace("_", " ")


def step_words(dt: float) -> str:
    """A step in years as header words: years and trading days (252 a year)."""
    return f"step {dt:.4g} y = {trading_days(dt)}"


def trading_days(years: float) -> str:
    """Years as trading days (252 a year, common practice, no source), in words."""
    days = f"{years * 252:.3g}"
    return f"{days} trading day" + ("" if days == "1" else "s")


def frame_rows(frame, index_name=None) -> list[list]:
    """A pandas DataFrame as a header row of plain words plus data rows."""
    frame = frame.reset_index() if index_name else frame
    rows = [[_header(str(c)) for c in frame.columns]]
    rows += [[finite(v) for v in row] for row in frame.itertuples(index=False)]
    return rows


def pairs(rows) -> list[list]:
    """Label / value rows with plain Python values."""
    return [[label, finite(value)] for label, value in rows]
