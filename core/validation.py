"""Argument checks shared by every public entry of the core.

Every public function validates its inputs once, here, and raises
:class:`InputError` (a ``ValueError``) whose message names the argument, the
rule and the offending value, e.g. ``kappa must be > 0, got -0.5``.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

__all__ = [
    "InputError",
    "as_float_array",
    "as_positive_int",
    "broadcast",
    "check_choice",
    "cir_parameters",
    "scalar_or_array",
]


class InputError(ValueError):
    """A public argument broke its documented rule."""


_RULES = {
    "finite": (lambda a: np.isfinite(a), "must be finite"),
    ">0": (lambda a: a > 0, "must be > 0"),
    ">=0": (lambda a: a >= 0, "must be >= 0"),
    "[-1,1]": (lambda a: (a >= -1) & (a <= 1), "must lie in [-1, 1]"),
    "(0,1)": (lambda a: (a > 0) & (a < 1), "must lie in (0, 1)"),
    "[0,1]": (lambda a: (a >= 0) & (a <= 1), "must lie in [0, 1]"),
}


def _show(value: object) -> str:
    return repr(float(value)) if isinstance(value, numbers.Real) else _plain(value)


def _plain(value: object) -> str:
    """``repr`` of a value, numpy scalars shown as the Python numbers they hold."""
    return repr(value.item() if isinstance(value, np.generic) else value)


def as_float_array(name: str, value: object, *rules: str) -> np.ndarray:
    """Return ``value`` as a float array after checking ``rules``.

    Parameters
    ----------
    name : str
        Argument name used in the error message.
    value : array_like
        Number or array of numbers.  Booleans and strings are refused.
    *rules : str
        Keys of the rule table: ``"finite"``, ``">0"``, ``">=0"``,
        ``"[-1,1]"``, ``"(0,1)"``, ``"[0,1]"``.  ``"finite"`` is always applied.

    Raises
    ------
    InputError
        Naming ``name``, the broken rule and the first offending value.
    """
    if isinstance(value, (bool, np.bool_, str, bytes)) or value is None:
        raise InputError(f"{name} must be a number, got {_plain(value)}")
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name} must be a number or an array of numbers, got {value!r}") from exc
    if arr.dtype == object or (arr.size and np.asarray(value).dtype.kind in "bUSO"):
        raise InputError(f"{name} must be numeric, got {value!r}")
    for key in ("finite", *rules):
        test, text = _RULES[key]
        ok = test(arr)
        if not np.all(ok):
            bad = arr[~ok] if arr.ndim else arr
            raise InputError(f"{name} {text}, got {_show(np.ravel(bad)[0])}")
    return arr


def as_float(name: str, value: object, *rules: str) -> float:
    """One number as a ``float``, after :func:`as_float_array`'s ``rules``; an array is refused."""
    arr = as_float_array(name, value, *rules)
    if arr.ndim:
        raise InputError(f"{name} must be a single number, got shape {arr.shape}")
    return float(arr)


def as_positive_int(name: str, value: object) -> int:
    """Return ``value`` as a positive ``int``; refuse 2.5, 0, -3, True, "10"."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InputError(f"{name} must be a positive whole number, got {_plain(value)}")
    if not math.isfinite(value) or value != int(value) or value < 1:
        raise InputError(f"{name} must be a positive whole number, got {_plain(value)}")
    return int(value)


def check_choice(name: str, value: object, choices) -> str:
    """Return ``value`` if it is one of ``choices`` (strings), else raise."""
    if not isinstance(value, str) or value not in choices:
        listed = ", ".join(repr(c) for c in choices)
        raise InputError(f"{name} must be one of {listed}, got {_plain(value)}")
    return value


def broadcast(**arrays: np.ndarray) -> list[np.ndarray]:
    """Broadcast named arrays together; a shape clash names the arguments."""
    try:
        return list(np.broadcast_arrays(*arrays.values()))
    except ValueError as exc:
        shapes = ", ".join(f"{k} {np.shape(v)}" for k, v in arrays.items())
        raise InputError(f"arguments must broadcast to one shape, got {shapes}") from exc


def cir_parameters(kappa, theta, vol_of_vol, **more):
    """Checked, broadcast CIR parameters (each > 0), plus any ``name=(value, rule)`` extras.

    Returns the arrays in the order kappa, theta, vol_of_vol, then the extras.
    """
    arrays = {
        "kappa": as_float_array("kappa", kappa, ">0"),
        "theta": as_float_array("theta", theta, ">0"),
        "vol_of_vol": as_float_array("vol_of_vol", vol_of_vol, ">0"),
    }
    for name, (value, rule) in more.items():
        arrays[name] = as_float_array(name, value, rule)
    return broadcast(**arrays)


def scalar_or_array(result: np.ndarray):
    """Return a Python float for 0-d results, the array otherwise."""
    result = np.asarray(result)
    return float(result) if result.ndim == 0 else result
