"""Headless workbook engine: evaluate rootvar formulas without a spreadsheet program.

It opens a workbook with openpyxl, evaluates every formula with the same
Python functions the add-in exposes, lays spilled results into the cells
below and to the right (or into the fixed range of an array formula), and
saves a computed copy in which formulas are replaced by their values.  The
template itself is never written.

Supported formula subset (a clear error names the cell for anything else):
numbers, texts, TRUE/FALSE, cell and range references (``A1``, ``$B$2:$C$6``,
``Sheet!A1``, ``'Sheet name'!A1:B2``), ``+ - * / ^ &``, comparisons, unary
minus, ``%``, parentheses, the ``ROOTVAR_*`` functions and the built-ins
``SUM MIN MAX AVERAGE ABS SQRT EXP LN ROUND IF AND OR NOT INDEX``.  A maintained
formula library (``formulas``, ``pycel``) was considered: neither evaluates
user functions returning spilled arrays without patching their internals,
and both pull in large dependency trees, so a small evaluator for exactly
this subset is kept here instead.

Evaluation order follows the references between formula cells
(``graphlib.TopologicalSorter``; a cycle is reported with its cells), then
repeats until no value changes, so formulas that read spilled cells see them.
"""

from __future__ import annotations

import difflib
import math
import zipfile
from dataclasses import dataclass, field
from graphlib import CycleError, TopologicalSorter
from pathlib import Path

from openpyxl import load_workbook
from openpyxl.cell.cell import MergedCell
from openpyxl.formula import Tokenizer
from openpyxl.formula.tokenizer import Token
from openpyxl.utils.cell import get_column_letter, range_boundaries
from openpyxl.worksheet.formula import ArrayFormula

from rootvar.addin.cells import MARK, error_text
from rootvar.addin.files import SaveError, file_problem, save_atomic
from rootvar.addin.functions import REGISTRY, work_cap

__all__ = [
    "ComputeReport",
    "FormulaError",
    "WorkbookFileError",
    "compute_workbook",
    "evaluate_workbook",
]

MAX_PASSES = 6


class FormulaError(ValueError):
    """A formula outside the supported subset, or a reference cycle."""


class WorkbookFileError(OSError):
    """The workbook cannot be read, or its computed copy cannot be written."""


class _Unsupported(FormulaError):
    """A cell's formula uses a function or element the engine cannot evaluate."""


@dataclass
class ComputeReport:
    """What a computation did.

    ``unsupported`` lists the cells whose formula could not be evaluated at
    all (an unknown or unsupported function, syntax outside the subset) as
    ``(cell, message)``; those cells hold the message and every other cell
    is computed.  ``error_cells`` lists every cell that ends with an error
    text, those included.
    """

    formulas: int = 0
    passes: int = 0
    error_cells: list = field(default_factory=list)  # (cell, text)
    unsupported: list = field(default_factory=list)  # (cell, text)
    output: Path | None = None


# ------------------------------------------------------------------ parsing


def _parse(formula: str, where: str):
    """Formula text -> nested tuples (a tiny precedence-climbing parser)."""
    try:
        tokens = [t for t in Tokenizer(formula).items if t.type != Token.WSPACE]
    except Exception as exc:
        raise FormulaError(f"{where}: cannot read formula {formula!r}: {exc}") from exc
    pos = 0

    def peek():
        return tokens[pos] if pos < len(tokens) else None

    def take():
        nonlocal pos
        pos += 1
        return tokens[pos - 1]

    levels = [("=", "<>", "<", ">", "<=", ">="), ("&",), ("+", "-"), ("*", "/"), ("^",)]

    def expression(level=0):
        if level == len(levels):
            return unary()
        left = expression(level + 1)
        while (t := peek()) is not None and t.type == Token.OP_IN and t.value in levels[level]:
            take()
            left = ("bin", t.value, left, expression(level + 1))
        return left

    def unary():
        t = peek()
        if t is not None and t.type == Token.OP_PRE:
            take()
            inner = unary()
            return ("neg", inner) if t.value == "-" else inner
        node = primary()
        while (t := peek()) is not None and t.type == Token.OP_POST and t.value == "%":
            take()
            node = ("bin", "/", node, ("val", 100.0))
        return node

    def primary():
        t = take() if peek() is not None else None
        if t is None:
            raise FormulaError(f"{where}: formula ends too early: {formula!r}")
        if t.type == Token.OPERAND:
            if t.subtype == Token.NUMBER:
                return ("val", float(t.value))
            if t.subtype == Token.TEXT:
                return ("val", t.value[1:-1].replace('""', '"'))
            if t.subtype == Token.LOGICAL:
                return ("val", t.value.upper() == "TRUE")
            if t.subtype == Token.RANGE:
                return _reference(t.value, where)
            raise FormulaError(f"{where}: unsupported operand {t.value!r}")
        if t.type == Token.PAREN and t.subtype == Token.OPEN:
            node = expression()
            close = take() if peek() is not None else None
            if close is None or close.type != Token.PAREN:
                raise FormulaError(f"{where}: unbalanced parenthesis in {formula!r}")
            return node
        if t.type == Token.FUNC and t.subtype == Token.OPEN:
            name = t.value[:-1].upper()
            args = []
            if peek() is not None and peek().type == Token.FUNC and peek().subtype == Token.CLOSE:
                take()
                return ("call", name, args)
            while True:
                nxt = peek()
                if nxt is not None and nxt.type == Token.SEP and nxt.subtype == Token.ARG:
                    args.append(("val", None))  # an omitted argument, as in F(A1,,B2)
                elif nxt is not None and nxt.type == Token.FUNC and nxt.subtype == Token.CLOSE:
                    args.append(("val", None))
                else:
                    args.append(expression())
                sep = take() if peek() is not None else None
                if sep is None:
                    raise FormulaError(f"{where}: unclosed function {name} in {formula!r}")
                if sep.type == Token.FUNC and sep.subtype == Token.CLOSE:
                    return ("call", name, args)
                if not (sep.type == Token.SEP and sep.subtype == Token.ARG):
                    raise FormulaError(f"{where}: unexpected {sep.value!r} in {formula!r}")
        raise FormulaError(f"{where}: unsupported element {t.value!r} in {formula!r}")

    if not tokens:
        raise FormulaError(f"{where}: empty formula")
    tree = expression()
    if pos != len(tokens):
        raise FormulaError(f"{where}: cannot read {formula!r} past {tokens[pos].value!r}")
    return tree


def _reference(text: str, where: str):
    sheet = None
    if "!" in text:
        sheet, text = text.rsplit("!", 1)
        if sheet.startswith("'") and sheet.endswith("'"):
            sheet = sheet[1:-1].replace("''", "'")
    try:
        c1, r1, c2, r2 = range_boundaries(text.replace("$", ""))
    except ValueError as exc:
        raise FormulaError(
            f"{where}: unsupported reference {text!r} (named ranges and whole "
            "columns are not supported)"
        ) from exc
    if None in (c1, r1, c2, r2):
        raise FormulaError(f"{where}: whole rows or columns ({text!r}) are not supported")
    return ("ref", sheet, r1, c1, r2, c2)


def _refs(node, home):
    """Cells a parsed formula reads, as (sheet, row, col)."""
    if node[0] == "ref":
        _, sheet, r1, c1, r2, c2 = node
        sheet = sheet or home
        return {(sheet, r, c) for r in range(r1, r2 + 1) for c in range(c1, c2 + 1)}
    out = set()
    for child in node[1:]:
        if isinstance(child, tuple):
            out |= _refs(child, home)
        elif isinstance(child, list):
            for item in child:
                out |= _refs(item, home)
    return out


# ------------------------------------------------------------------ evaluation

_ERR_DIV0 = "#DIV/0!"


def _flat_numbers(values):
    out = []
    for v in values:
        if isinstance(v, list):
            out.extend(_flat_numbers(v))
        elif isinstance(v, (int, float)) and not isinstance(v, bool):
            out.append(float(v))
    return out


def _scalar(v):
    if isinstance(v, list):
        if len(v) == 1 and len(v[0]) == 1:
            return v[0][0]
        raise TypeError("a range was used where one value is needed")
    return v


def _num(v):
    v = _scalar(v)
    if v is None:
        return 0.0
    if isinstance(v, bool):
        return float(v)
    if isinstance(v, (int, float)):
        return float(v)
    raise TypeError(f"not a number: {v!r}")


def _index(rng, row, col=1.0):
    rows = rng if isinstance(rng, list) else [[rng]]
    return rows[int(_num(row)) - 1][int(_num(col)) - 1]


_BUILTINS = {
    "SUM": lambda *a: math.fsum(_flat_numbers(a)),
    "MIN": lambda *a: min(_flat_numbers(a)),
    "MAX": lambda *a: max(_flat_numbers(a)),
    "AVERAGE": lambda *a: math.fsum(x := _flat_numbers(a)) / len(x),
    "ABS": lambda x: abs(_num(x)),
    "SQRT": lambda x: math.sqrt(_num(x)),
    "EXP": lambda x: math.exp(_num(x)),
    "LN": lambda x: math.log(_num(x)),
    "ROUND": lambda x, n=0.0: round(_num(x), int(_num(n))),
    "IF": lambda c, a=True, b=False: a if _scalar(c) else b,
    "AND": lambda *a: all(_scalar(x) for x in a),
    "OR": lambda *a: any(_scalar(x) for x in a),
    "NOT": lambda x: not _scalar(x),
    "INDEX": _index,
}

_ARITHMETIC = {
    "+": lambda x, y: x + y,
    "-": lambda x, y: x - y,
    "*": lambda x, y: x * y,
    "/": lambda x, y: x / y,
    "^": lambda x, y: x**y,
}

_COMPARE = {
    "=": lambda a, b: a == b,
    "<>": lambda a, b: a != b,
    "<": lambda a, b: a < b,
    ">": lambda a, b: a > b,
    "<=": lambda a, b: a <= b,
    ">=": lambda a, b: a >= b,
}


class _Book:
    """Cell values of a workbook and the evaluation of its formulas."""

    def __init__(self, wb):
        self.wb = wb
        self.values: dict[tuple, object] = {}
        self.formulas: dict[tuple, tuple] = {}  # cell -> (text, tree, array ref or None)
        self.occupied: set[tuple] = set()
        self.unreadable: dict[tuple, str] = {}  # cell -> message, formulas outside the subset
        for ws in wb.worksheets:
            for merged in ws.merged_cells.ranges:  # covered cells of a merge hold nothing
                for r in range(merged.min_row, merged.max_row + 1):
                    for c in range(merged.min_col, merged.max_col + 1):
                        if (r, c) != (merged.min_row, merged.min_col):
                            self.occupied.add((ws.title, r, c))
            for row in ws.iter_rows():
                for cell in row:
                    key = (ws.title, cell.row, cell.column)
                    v = cell.value
                    if v is None:
                        continue
                    self.occupied.add(key)
                    where = f"{ws.title}!{cell.coordinate}"
                    try:
                        if isinstance(v, ArrayFormula):
                            self.formulas[key] = (v.text, _parse(v.text, where), v.ref)
                        elif isinstance(v, str) and v.startswith("="):
                            self.formulas[key] = (v, _parse(v, where), None)
                        else:
                            self.values[key] = v
                    except FormulaError as exc:
                        # one cell outside the subset must not stop the others
                        message = error_text(str(exc))
                        self.unreadable[key] = message
                        self.values[key] = message

    def order(self):
        graph = {}
        for key, (_, tree, _) in self.formulas.items():
            graph[key] = {c for c in _refs(tree, key[0]) if c in self.formulas and c != key}
            if key in _refs(tree, key[0]):
                raise FormulaError(f"{_name(key)} refers to itself")
        try:
            return list(TopologicalSorter(graph).static_order())
        except CycleError as exc:
            cells = " -> ".join(_name(c) for c in exc.args[1])
            raise FormulaError(f"reference cycle: {cells}") from exc

    def read(self, node, home):
        _, sheet, r1, c1, r2, c2 = node
        sheet = sheet or home
        if sheet not in self.wb.sheetnames:
            raise KeyError(f"no sheet named {sheet!r}")
        if r1 == r2 and c1 == c2:
            return self.values.get((sheet, r1, c1))
        return [
            [self.values.get((sheet, r, c)) for c in range(c1, c2 + 1)] for r in range(r1, r2 + 1)
        ]

    def evaluate(self, node, home):
        kind = node[0]
        if kind == "val":
            return node[1]
        if kind == "ref":
            return self.read(node, home)
        if kind == "neg":
            return -_num(self.evaluate(node[1], home))
        if kind == "bin":
            op, a, b = node[1], self.evaluate(node[2], home), self.evaluate(node[3], home)
            if op == "&":
                return f"{_text(_scalar(a))}{_text(_scalar(b))}"
            if op in _COMPARE:
                return _COMPARE[op](_scalar(a), _scalar(b))
            x, y = _num(a), _num(b)
            if op == "/" and y == 0:
                return _ERR_DIV0
            return _ARITHMETIC[op](x, y)
        if kind == "call":
            name, args = node[1], [self.evaluate(a, home) for a in node[2]]
            if name in REGISTRY:
                while args and args[-1] is None:  # trailing omitted arguments take defaults
                    args.pop()
                return REGISTRY[name].func(*args)
            if name in _BUILTINS:
                return _BUILTINS[name](*args)
            raise _Unsupported(_unknown_function(name))
        raise FormulaError(f"unknown node {kind}")

    def place(self, key, text, result, array_ref):
        """Write a result into its cell, spilling 2-d results; returns cells written."""
        sheet, row, col = key
        if not isinstance(result, list):
            self.values[key] = result
            return {key: result}
        rows = [r if isinstance(r, list) else [r] for r in result] or [[""]]
        if array_ref is not None:
            c1, r1, c2, r2 = range_boundaries(array_ref)
            height, width = r2 - r1 + 1, c2 - c1 + 1
            row, col = r1, c1
        else:
            height, width = len(rows), max(len(r) for r in rows)
            for r in range(height):
                for c in range(width):
                    target = (sheet, row + r, col + c)
                    if (r or c) and target in self.occupied:
                        message = error_text(
                            f"result of {height}x{width} cells cannot spill: "
                            f"{_name(target)} is not empty"
                        )
                        self.values[key] = message
                        return {key: message}
        written = {}
        for r in range(height):
            for c in range(width):
                value = rows[r][c] if r < len(rows) and c < len(rows[r]) else ""
                written[(sheet, row + r, col + c)] = value
        self.values.update(written)
        return written


def _unknown_function(name: str) -> str:
    """Words for a function the engine does not know, with the closest known name."""
    ours = name.upper().startswith("ROOTVAR_")
    pool = list(REGISTRY) if ours else [*REGISTRY, *_BUILTINS]
    close = difflib.get_close_matches(name.upper(), pool, n=1, cutoff=0.6)
    hint = f"; did you mean {close[0]}?" if close else ""
    if ours:
        return f"function {name} is unknown: no rootvar function has that name{hint}"
    return f"function {name} is not supported by the headless engine{hint}"


def _plain(exc: Exception) -> str:
    """An exception's message without the Python class name (cells show rules, not types)."""
    if isinstance(exc, KeyError) and exc.args:
        return str(exc.args[0])
    if isinstance(exc, ZeroDivisionError):
        return "division by zero"
    if isinstance(exc, (OverflowError, MemoryError)):
        return "a number is too large to compute with"
    return str(exc) or "this formula cannot be computed"


def _text(v):
    if v is None:
        return ""
    if isinstance(v, bool):
        return "TRUE" if v else "FALSE"
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return str(v)


def _name(key):
    sheet, row, col = key
    return f"{sheet}!{get_column_letter(col)}{row}"


def evaluate_workbook(wb, max_path_steps=None) -> tuple[dict, ComputeReport]:
    """Evaluate every formula of an openpyxl workbook; returns (cell values written, report).

    ``max_path_steps`` caps the Monte Carlo work of one cell (``None``: no
    cap, the default headless; a spreadsheet program applies
    :data:`rootvar.addin.functions.MAX_PATH_STEPS`).  A cell whose formula
    uses an unknown or unsupported function, or syntax outside the subset,
    gets an error text naming it and is listed in ``report.unsupported``;
    every other cell is computed.  A reference cycle still stops the run.
    """
    book = _Book(wb)
    order = book.order()
    report = ComputeReport(formulas=len(order) + len(book.unreadable))
    outputs: dict[tuple, object] = dict(book.unreadable)
    unsupported = {key: text for key, text in book.unreadable.items()}
    previous = None
    with work_cap(max_path_steps):
        for pass_no in range(1, MAX_PASSES + 1):
            outputs = dict(book.unreadable)
            for key in order:
                text, tree, array_ref = book.formulas[key]
                try:
                    result = book.evaluate(tree, key[0])
                except _Unsupported as exc:
                    result = error_text(f"{_name(key)}: {exc}")
                    unsupported[key] = result
                except FormulaError as exc:
                    raise FormulaError(f"{_name(key)}: {exc}") from exc
                except Exception as exc:
                    result = error_text(_plain(exc))
                outputs.update(book.place(key, text, result, array_ref))
            report.passes = pass_no
            if outputs == previous:
                break
            previous = outputs
    report.unsupported = sorted(
        ((_name(k), v) for k, v in unsupported.items()), key=lambda item: item[0]
    )
    report.error_cells = [
        (_name(k), v)
        for k, v in outputs.items()
        if isinstance(v, str) and (v.startswith(MARK) or v.startswith("#"))
    ]
    return outputs, report


def _open(template: Path):
    """The workbook, or one WorkbookFileError naming the file and the cause."""
    problem = file_problem(template)
    if problem:
        raise WorkbookFileError(f"{template}: {problem}")
    if not zipfile.is_zipfile(template):
        raise WorkbookFileError(f"{template}: not a workbook (an .xlsx or .xlsm file is a zip)")
    try:
        return load_workbook(template, keep_vba=template.suffix.lower() == ".xlsm")
    except Exception as exc:  # openpyxl raises many kinds for a damaged archive
        raise WorkbookFileError(
            f"{template}: cannot be read as a workbook ({_plain(exc)})"
        ) from exc


def compute_workbook(template, out=None, max_path_steps=None) -> ComputeReport:
    """Compute a workbook headlessly and save a copy with values.

    Parameters
    ----------
    template : path-like
        The workbook with formulas; it is read, never written.
    out : path-like, optional
        Where to save the computed copy (default: ``<name>.computed.xlsx``
        beside the template).  Saved through a temporary file in the same
        folder and an atomic replace.
    max_path_steps : int, optional
        Cap on one cell's Monte Carlo work, paths x steps (default: none;
        give :data:`rootvar.addin.functions.MAX_PATH_STEPS` to see what a
        spreadsheet program would refuse).

    Returns
    -------
    ComputeReport

    Raises
    ------
    WorkbookFileError
        The template is missing, unreadable or not a workbook, or the folder
        of ``out`` does not exist; nothing is written.
    FormulaError
        A reference cycle, or ``out`` is the template; nothing is written.
    """
    template = Path(template)
    out = Path(out) if out else template.with_name(template.stem + ".computed" + template.suffix)
    wb = _open(template)
    if out.resolve() == template.resolve():
        raise FormulaError("the computed copy must not overwrite its template; give another --out")
    if not out.parent.is_dir():
        raise WorkbookFileError(f"{out}: its folder {out.parent} does not exist")
    outputs, report = evaluate_workbook(wb, max_path_steps)
    for (sheet, row, col), value in outputs.items():
        cell = wb[sheet].cell(row=row, column=col)
        if isinstance(cell, MergedCell):  # an array range over a merge: the anchor shows it
            continue
        cell.value = _cell_value(value)
        if isinstance(cell.value, str) and cell.value.startswith("="):
            cell.data_type = "s"  # a text that looks like a formula stays text
    for ws in wb.worksheets:  # any formula left (none expected) becomes its value or blank
        for row in ws.iter_rows():
            for cell in row:
                if isinstance(cell.value, ArrayFormula):
                    cell.value = None
    try:
        save_atomic(wb.save, out, keep_backup=False)
    except SaveError as exc:
        raise WorkbookFileError(f"{out}: cannot be written ({exc})") from exc
    report.output = out
    return report


def _cell_value(value):
    """A value as a cell can hold it (no NaN or infinity in a workbook).

    An empty text is written as an empty cell, so a long text beside it shows
    in full, as it does in a spreadsheet program.
    """
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if value == "":
        return None
    return value
