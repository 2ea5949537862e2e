"""Short printed forms for result objects: arrays and tables by their shape, not their numbers.

A finite-difference result holds its whole grid and a Monte Carlo result its
per-strike arrays; printed in a notebook or the REPL they should read as a
summary.  The values stay reachable as attributes.
"""

from __future__ import annotations

import dataclasses

import numpy as np

__all__ = ["BriefRepr"]

#: Arrays and sequences with more items than this print by their shape.
MAX_ITEMS = 8


def _brief(value) -> str:
    if isinstance(value, np.ndarray):
        if value.size <= MAX_ITEMS:
            return repr(value.tolist())
        return f"<array {'x'.join(map(str, value.shape))} {value.dtype}>"
    if hasattr(value, "shape") and hasattr(value, "columns"):  # a pandas table
        rows, cols = value.shape
        return f"<table {rows} rows x {cols} columns>"
    if isinstance(value, list | tuple) and len(value) > MAX_ITEMS:
        return f"<{type(value).__name__} of {len(value)} items>"
    if isinstance(value, dict) and len(value) > MAX_ITEMS:
        return f"<dict of {len(value)} entries>"
    return repr(value)


class BriefRepr:
    """Mixin for dataclasses: ``repr`` lists each field, long arrays and tables by shape.

    Declare the dataclass with ``repr=False`` so this one is kept.
    """

    def __repr__(self) -> str:
        parts = (
            f"{f.name}={_brief(getattr(self, f.name))}" for f in dataclasses.fields(self) if f.repr
        )
        return f"{type(self).__name__}({', '.join(parts)})"
