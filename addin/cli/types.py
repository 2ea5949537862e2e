"""Argument types shared by the ``rootvar`` commands.

Each is an ``argparse`` ``type=`` callable: it returns the value or raises
``argparse.ArgumentTypeError`` with the rule, which argparse turns into a
one-line usage error and exit code 2.
"""

from __future__ import annotations

import argparse
import math
from fractions import Fraction

__all__ = [
    "NO_LIMIT",
    "non_negative_float",
    "number",
    "numbers",
    "path_steps_cap",
    "positive_int",
    "positive_number",
]

#: The one word for "no limit", in sheets and on the command line alike.
NO_LIMIT = "unbounded"


def number(text: str) -> float:
    """A finite number, written as a decimal (``0.003968``, ``1e-3``) or a fraction (``1/252``)."""
    raw = text.strip()
    try:
        value = float(Fraction(raw)) if "/" in raw else float(raw)
    except (ValueError, ZeroDivisionError) as exc:
        raise argparse.ArgumentTypeError(
            f"expected a number or a fraction such as 1/252, got {text!r}"
        ) from exc
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"expected a finite number, got {text!r}")
    return value


def positive_number(text: str) -> float:
    """A number (or fraction) > 0."""
    value = number(text)
    if value <= 0:
        raise argparse.ArgumentTypeError(f"must be > 0, got {text!r}")
    return value


def numbers(text: str) -> list[float]:
    """Comma-separated numbers or fractions, e.g. ``0.25,1,5`` or ``1/12,1/4``."""
    parts = [x for x in text.split(",") if x.strip()]
    if not parts:
        raise argparse.ArgumentTypeError(f"expected comma-separated numbers, got {text!r}")
    return [number(x) for x in parts]


def positive_int(text: str) -> int:
    """A whole number >= 1 (worker counts, paths, steps)."""
    try:
        value = int(text.strip())
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}") from exc
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be >= 1, got {value}")
    return value


def path_steps_cap(text: str) -> int | None:
    """A cap on paths x steps (a whole number >= 1), or ``unbounded`` for none."""
    if text.strip().lower() == NO_LIMIT:
        return None
    return positive_int(text.replace(",", "").replace("_", ""))


def non_negative_float(text: str) -> float:
    """argparse type: a finite number >= 0."""
    try:
        value = float(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"must be a number >= 0, got {text!r}") from exc
    if not (value >= 0 and value != float("inf")):
        raise argparse.ArgumentTypeError(f"must be a number >= 0, got {text!r}")
    return value
