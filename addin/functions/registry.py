"""The registry of spreadsheet functions: the ``@sheet_function`` decorator, its guard, the caches.

:func:`sheet_function` registers a ``ROOTVAR_*`` function in :data:`REGISTRY`
(in the order the job modules are imported by :mod:`rootvar.addin.functions`),
applies the xlwings decorators (no-ops off Windows) and guards it, so that any
exception becomes one short ``[rootvar]`` text worded by :func:`_plain_failure`.
:func:`call` calls a function by its spreadsheet name (the headless engine's
way in).  :func:`cell_cache` is the in-process cache of a cell's results and
:func:`clear_cache` forgets every one of them, whichever module holds it.

The bottom of the package: it imports none of its siblings.
"""

from __future__ import annotations

import functools
import inspect
import traceback
from dataclasses import dataclass

import xlwings as xw

from rootvar.addin.cells import CellError, error_text
from rootvar.core import FourierCheckError, InputError

__all__ = ["REGISTRY", "SheetFunction", "call", "cell_cache", "clear_cache", "sheet_function"]


@dataclass(frozen=True)
class SheetFunction:
    """A registered spreadsheet function and the documentation shown for it."""

    name: str
    func: object
    summary: str
    args: tuple  # (name, doc) pairs
    result: str


REGISTRY: dict[str, SheetFunction] = {}


def sheet_function(result: str, **arg_docs: str):
    """Register a spreadsheet function, guard it, and declare it to xlwings.

    The guard turns any exception into an error text, so the host never
    sees one; the xlwings decorators carry the argument docs to the
    function wizard.
    """

    def decorate(f):
        signature = inspect.signature(f)
        needed = [n for n, p in signature.parameters.items() if p.default is p.empty]

        @functools.wraps(f)
        def guarded(*args):
            try:
                signature.bind(*args)
            except TypeError:
                return error_text(_arity_text(f.__name__, needed, len(signature.parameters), args))
            try:
                return f(*args)
            except CellError as exc:
                return error_text(str(exc))
            except Exception as exc:
                return error_text(_plain_failure(f.__name__, exc))

        wrapped = guarded
        for arg, doc in reversed(list(arg_docs.items())):
            wrapped = xw.arg(arg, doc=doc)(wrapped)
        wrapped = xw.func(wrapped)
        summary = (f.__doc__ or "").strip().splitlines()[0]
        REGISTRY[f.__name__] = SheetFunction(
            f.__name__, wrapped, summary, tuple(arg_docs.items()), result
        )
        return wrapped

    return decorate


def _arity_text(name: str, needed: list[str], most: int, args) -> str:
    if len(args) > most:
        return f"{name} takes at most {most} arguments, got {len(args)}"
    missing = needed[len(args) :]
    return f"{name} needs {', '.join(needed)}; missing {', '.join(missing)}"


def _plain_failure(name: str, exc: Exception) -> str:
    """Words for an unexpected failure: the rule or the cause, never a Python class name.

    Inputs are checked up front, so reaching here means a computation failed
    on inputs that passed; the message says so and what to try.
    """
    if isinstance(exc, InputError):  # a core rule, named after the core's argument
        return f"{name} could not compute these inputs: {exc}"
    if isinstance(exc, FourierCheckError):
        return f"{name}: the Fourier price could not be certified for these inputs ({exc})"
    if isinstance(exc, MemoryError):
        return f"{name}: these inputs need more memory than is available; reduce the work"
    if isinstance(exc, (OverflowError, FloatingPointError, ZeroDivisionError)):
        return f"{name}: an intermediate number overflowed for these inputs; check their scale"
    where = traceback.extract_tb(exc.__traceback__)[-1].name
    return f"{name} failed on these inputs ({exc or 'no detail'}, in {where}); please report it"


# Every cache made by cell_cache, in whichever job module it lives, so clear_cache clears all.
_CACHES: list = []


def cell_cache(maxsize: int):
    """``functools.lru_cache(maxsize)`` for a cell's results, cleared by :func:`clear_cache`."""

    def decorate(f):
        cached = functools.lru_cache(maxsize=maxsize)(f)
        _CACHES.append(cached)
        return cached

    return decorate


def clear_cache() -> None:
    """Forget cached Monte Carlo results (for tests and long sessions).

    Every cache made by :func:`cell_cache` is cleared: the Monte Carlo, step
    study, finite-difference, calibration and exotic results alike.
    """
    for cached in _CACHES:
        cached.cache_clear()


def call(name: str, *args):
    """Call a registered function by its spreadsheet name (used by the engine)."""
    return REGISTRY[name].func(*args)
