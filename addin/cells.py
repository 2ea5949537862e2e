"""Converting and checking spreadsheet cell values, in one place.

xlwings hands a function floats, ``None`` for empty cells, strings, booleans,
datetimes and lists (of lists) for ranges; an error value in a cell arrives
as ``None`` or as its text (``"#N/A"``).  Every spreadsheet function turns its
arguments into Python values through the converters here, which raise
:class:`CellError` with a message naming the argument and the rule; the
function then shows it as one short text with :data:`MARK` in front.
"""

from __future__ import annotations

import math
import numbers
import re

import numpy as np

from rootvar.core import HestonParams, InputError
from rootvar.core.validation import as_float_array

__all__ = [
    "MARK",
    "PARAM_ORDER",
    "PARAM_RANGES",
    "CellError",
    "error_text",
    "parameter_name",
    "to_bool",
    "to_choice",
    "to_int",
    "to_number",
    "to_numbers",
    "to_params",
    "to_table",
    "to_text_list",
    "within",
]

#: Start of every error text a rootvar cell function returns.
MARK = "[rootvar] "

#: Order of the five parameters when they are given as five bare cells.
PARAM_ORDER = ("v0", "kappa", "theta", "vol_of_vol", "rho")

# Labels accepted in a two-column parameter block, after lower-casing and
# dropping spaces, underscores, hyphens and dots.
_ALIASES = {
    "v0": "v0",
    "initialvariance": "v0",
    "variance0": "v0",
    "spotvariance": "v0",
    "kappa": "kappa",
    "meanreversion": "kappa",
    "meanreversionspeed": "kappa",
    "theta": "theta",
    "longrunvariance": "theta",
    "longtermvariance": "theta",
    "volofvol": "vol_of_vol",
    "volvol": "vol_of_vol",
    "sigma": "vol_of_vol",
    "xi": "vol_of_vol",
    "eta": "vol_of_vol",
    "volatilityofvariance": "vol_of_vol",
    "volatilityofvolatility": "vol_of_vol",
    "rho": "rho",
    "correlation": "rho",
    "corr": "rho",
}


class CellError(ValueError):
    """A cell argument broke its rule; the message is shown in the cell."""


#: Ranges the cell functions accept for the parameters, beyond the core's own
#: rules: wide enough for any calibration seen on a desk (a variance of 10 is a
#: volatility of 316%), narrow enough that the numerics behind a cell stay
#: inside what the tests cover.  Outside, a cell says so rather than compute.
PARAM_RANGES = {
    "v0": (0.0, 10.0),
    "kappa": (1e-4, 1e3),
    "theta": (1e-8, 10.0),
    "vol_of_vol": (1e-4, 20.0),
}


def within(name: str, value: float, low: float, high: float) -> float:
    """``value`` if it lies in ``[low, high]``, else a CellError naming the cell rule."""
    if not low <= value <= high:
        raise CellError(
            f"{name} must lie in [{low:g}, {high:g}] for a cell function (the range its "
            f"numerics are checked on), got {value!r}"
        )
    return value


def error_text(message: str) -> str:
    """The text a cell shows for an error, one line, with the rootvar mark."""
    return MARK + " ".join(str(message).split())


def _describe(value) -> str:
    if value is None:
        return "an empty cell"
    if isinstance(value, bool):
        return f"the logical value {str(value).upper()}"
    if isinstance(value, str):
        if value.startswith("#"):
            return f"the error value {value}"
        return f"the text {value!r}"
    if isinstance(value, (list, tuple)):
        return "a range"
    return repr(value)


def _flat(value) -> list:
    """Cells of a scalar, row, column or block, row by row."""
    if isinstance(value, np.ndarray):
        return list(value.ravel())
    if isinstance(value, (list, tuple)):
        out = []
        for item in value:
            out.extend(_flat(item) if isinstance(item, (list, tuple)) else [item])
        return out
    return [value]


def _is_number(value) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def to_number(name: str, value, *rules: str, default=None) -> float:
    """One number; ``default`` stands in for an empty cell when given."""
    value = _single(name, value)
    if value is None and default is not None:
        value = default
    if not _is_number(value):
        raise CellError(f"{name} must be a number, got {_describe(value)}")
    try:
        return float(as_float_array(name, float(value), *rules))
    except InputError as exc:
        raise CellError(str(exc)) from exc


def to_numbers(name: str, value, *rules: str) -> np.ndarray:
    """A strip of numbers from a cell or range; blank cells are skipped."""
    cells = [
        c for c in _flat(value) if c is not None and not (isinstance(c, str) and not c.strip())
    ]
    if not cells:
        raise CellError(f"{name} must hold at least one number, got only empty cells")
    for c in cells:
        if not _is_number(c):
            raise CellError(f"{name} must hold numbers only, got {_describe(c)}")
    return np.array([to_number(name, c, *rules) for c in cells])


def to_int(name: str, value, default: int, low: int = 1, high: int | None = None) -> int:
    """A whole number in ``[low, high]``; empty gives ``default``."""
    number = to_number(name, value, default=default)
    if number != math.floor(number):
        raise CellError(f"{name} must be a whole number, got {number!r}")
    if number < low or (high is not None and number > high):
        upper = f" and <= {high:,}" if high is not None else ""
        raise CellError(f"{name} must be >= {low}{upper}, got {int(number)}")
    return int(number)


def _single(name: str, value):
    """The one cell of a single-value argument; a range of several cells is an error."""
    if isinstance(value, (list, tuple, np.ndarray)):
        cells = _flat(value)
        if len(cells) > 1:
            raise CellError(f"{name} must be a single cell, got a range of {len(cells)} cells")
        return cells[0] if cells else None
    return value


def to_bool(name: str, value, default: bool) -> bool:
    """TRUE/FALSE, 1/0 or the texts true/false/yes/no; empty gives ``default``."""
    value = _single(name, value)
    if value is None:
        return default
    if isinstance(value, bool):
        return value
    if _is_number(value) and value in (0, 1):
        return bool(value)
    if isinstance(value, str) and value.strip().lower() in ("true", "false", "yes", "no"):
        return value.strip().lower() in ("true", "yes")
    raise CellError(f"{name} must be TRUE or FALSE, got {_describe(value)}")


def to_choice(name: str, value, choices, default: str) -> str:
    """One of ``choices`` (text, case and spaces ignored); empty gives ``default``."""
    value = _single(name, value)
    if value is None or (isinstance(value, str) and not value.strip()):
        return default
    if isinstance(value, str):
        key = value.strip().lower().replace(" ", "_").replace("-", "_")
        if key in choices:
            return key
    listed = ", ".join(choices)
    raise CellError(f"{name} must be one of {listed}, got {_describe(value)}")


def to_text_list(name: str, value, choices, default) -> list[str]:
    """Several choices from one comma-separated text or a range of texts; all blank: default."""
    cells = [
        c for c in _flat(value) if c is not None and not (isinstance(c, str) and not c.strip())
    ]
    if not cells:
        return list(default)
    items = []
    for c in cells:
        if not isinstance(c, str):
            raise CellError(f"{name} must hold names, got {_describe(c)}")
        items.extend(part for part in re.split(r"[,;]", c) if part.strip())
    return [to_choice(name, item, choices, default=item) for item in items]


def _label_key(label: str) -> str:
    return re.sub(r"[\s_\-.]", "", label.lower())


def parameter_name(label: str) -> str | None:
    """The parameter a label means (``"Vol of vol"``, ``"sigma"`` -> ``"vol_of_vol"``), or None."""
    return _ALIASES.get(_label_key(label))


def to_params(name: str, value) -> HestonParams:
    """Heston parameters from a label/value block or from five cells.

    Accepted shapes:

    * two columns, labels left and values right, in any order, labels
      matched without regard to case, spaces, underscores, hyphens or dots,
      with the usual aliases (``sigma``, ``xi``, ``eta``, ``vol of vol`` for
      vol_of_vol; ``correlation`` for rho; ``mean reversion`` for kappa;
      ``long run variance`` for theta; ``initial variance`` for v0);
      blank rows are skipped;
    * five numbers in a row or column in the order v0, kappa, theta,
      vol_of_vol, rho.
    """
    if not isinstance(value, (list, tuple)):
        raise CellError(
            f"{name} must be a range of five cells or a two-column label/value "
            f"block, got {_describe(value)}"
        )
    rows = [list(r) if isinstance(r, (list, tuple)) else [r] for r in value]
    if len({len(r) for r in rows}) > 1:
        shape = " / ".join(str(len(r)) for r in rows)
        raise CellError(f"{name} must be a rectangular range, got rows of {shape} cells")
    if rows and all(len(r) == 2 for r in rows) and any(isinstance(r[0], str) for r in rows):
        found: dict[str, object] = {}
        for label, val in rows:
            if label is None and val is None:
                continue
            if not isinstance(label, str):
                raise CellError(
                    f"{name}: each row needs a label on the left, got {_describe(label)}"
                )
            key = _ALIASES.get(_label_key(label))
            if key is None:
                raise CellError(
                    f"{name}: unknown label {label!r}; expected v0, kappa, theta, "
                    "vol_of_vol (or sigma), rho"
                )
            if key in found:
                raise CellError(f"{name}: {key} is given twice")
            found[key] = val
        missing = [k for k in PARAM_ORDER if k not in found]
        if missing:
            raise CellError(f"{name}: missing {', '.join(missing)}")
        values = [found[k] for k in PARAM_ORDER]
    else:
        values = _flat(value)
        if len(values) != 5:
            raise CellError(
                f"{name} must be five cells (v0, kappa, theta, vol_of_vol, rho) or a "
                f"two-column label/value block, got {len(values)} cells"
            )
    numbers_ = {}
    for key, val in zip(PARAM_ORDER, values, strict=True):
        if not _is_number(val):
            raise CellError(f"{name}: {key} must be a number, got {_describe(val)}")
        numbers_[key] = float(val)
    try:
        params = HestonParams(**numbers_)
    except InputError as exc:
        raise CellError(f"{name}: {exc}") from exc
    for key, (low, high) in PARAM_RANGES.items():  # the core's rules first, then the cell's
        within(f"{name}: {key}", numbers_[key], low, high)
    return params


def to_table(name: str, value) -> dict:
    """A range whose first row holds column names, as ``{column: [values]}``.

    Rows whose cells are all empty are dropped; other empty cells stay
    ``None`` so the core can skip and count them.  Used for the quotes of a
    calibration (maturity, strike, implied_vol, ...).
    """
    if not isinstance(value, (list, tuple)) or not value or not isinstance(value[0], (list, tuple)):
        raise CellError(
            f"{name} must be a range with a header row and one row per item, got {_describe(value)}"
        )
    rows = [list(r) for r in value]
    header = rows[0]
    if not all(isinstance(h, str) and h.strip() for h in header):
        raise CellError(f"{name}: the first row must name every column, got {header!r}")
    keys = [h.strip() for h in header]
    if len(set(k.lower() for k in keys)) != len(keys):
        raise CellError(f"{name}: column names must not repeat, got {keys!r}")
    body = [r for r in rows[1:] if any(c is not None and c != "" for c in r)]
    if not body:
        raise CellError(f"{name} must hold at least one row below its header, got none")
    return {k: [r[j] if j < len(r) else None for r in body] for j, k in enumerate(keys)}
