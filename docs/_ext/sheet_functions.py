"""Sphinx extension: the spreadsheet functions' reference, rendered from their registry.

``.. sheet-functions::`` renders every ``ROOTVAR_*`` function registered by
``@sheet_function`` in :mod:`rootvar.addin.functions`: a summary table
(name, arguments with optional ones in brackets, result, what it gives),
then one entry per function with its call, its description and the
documentation of each argument, exactly as the function wizard shows it.
The page is built from the code on every build, so it cannot drift.

``:sheet:`ROOTVAR_FELLER``` links to a function's entry.  A name that is not
registered fails the build (with ``-W``), so prose cannot name a function
that does not exist.  ``sheet_function_renames`` in ``conf.py`` maps a new
name to the registry's name while a rename is under way; the link then
shows the registry's name, the one a cell takes in the installed version.
"""

from __future__ import annotations

import inspect
import re

from docutils import nodes
from docutils.statemachine import StringList
from sphinx.util import logging
from sphinx.util.docutils import SphinxDirective
from sphinx.util.nodes import nested_parse_with_titles

logger = logging.getLogger(__name__)

_SPECIAL = re.compile(r"([\\`*_|\[\]<>])")


def registry():
    """The registry the add-in's ``@sheet_function`` decorator fills (name -> entry)."""
    from rootvar.addin.functions import REGISTRY

    return REGISTRY


def escape(text: str) -> str:
    """Plain text as reStructuredText that renders it character for character."""
    return _SPECIAL.sub(r"\\\1", " ".join(str(text).split()))


def label(name: str) -> str:
    return f"sheet-{name.lower()}"


def arguments(entry) -> list[tuple[str, bool]]:
    """(name, optional) for each argument, in order."""
    sig = inspect.signature(entry.func)
    return [(p.name, p.default is not inspect.Parameter.empty) for p in sig.parameters.values()]


def call_text(name: str, entry) -> str:
    args = ", ".join(f"[{a}]" if optional else a for a, optional in arguments(entry))
    return f"={name}({args})"


def description(entry) -> list[str]:
    """Paragraphs of the function's docstring after its summary line."""
    doc = inspect.getdoc(entry.func) or ""
    rest = doc.split("\n", 1)[1] if "\n" in doc else ""
    return [" ".join(p.split()) for p in re.split(r"\n\s*\n", rest) if p.strip()]


def render(reg) -> list[str]:
    out = [
        ".. list-table::",
        "   :header-rows: 1",
        "   :widths: 22 26 26 26",
        "",
        "   * - function",
        "     - arguments",
        "     - result",
        "     - what it gives",
    ]
    for name, entry in reg.items():
        args = ", ".join(f"[{a}]" if optional else a for a, optional in arguments(entry))
        out += [
            f"   * - :ref:`{name} <{label(name)}>`",
            f"     - {escape(args) or '(none)'}",
            f"     - {escape(entry.result)}",
            f"     - {escape(entry.summary)}",
        ]
    out.append("")
    for name, entry in reg.items():
        docs = dict(entry.args)
        out += [f".. _{label(name)}:", "", name, "-" * len(name), ""]
        out += [f"``{call_text(name, entry)}``", "", escape(entry.summary), ""]
        for paragraph in description(entry):
            out += [escape(paragraph), ""]
        out += [f"**Result.** {escape(entry.result)}", ""]
        if arguments(entry):
            out += ["**Arguments.**", ""]
            for arg, optional in arguments(entry):
                doc = docs.get(arg)
                if doc is None:
                    logger.warning(
                        "%s: argument %r has no documentation in its @sheet_function", name, arg
                    )
                    doc = "(undocumented)"
                out += [f"``{arg}``" + (" (optional)" if optional else ""), f"   {escape(doc)}", ""]
    return out


class SheetFunctions(SphinxDirective):
    """Render the registry of spreadsheet functions."""

    has_content = False

    def run(self):
        reg = registry()
        container = nodes.container()
        lines = StringList()
        source = "<rootvar.addin.functions registry>"
        for i, line in enumerate(render(reg)):
            lines.append(line, source, i)
        nested_parse_with_titles(self.state, lines, container)
        return container.children


def resolve(app, name: str) -> str | None:
    """The registry's name for ``name`` (itself, or through a rename under way)."""
    reg = registry()
    if name in reg:
        return name
    old = app.config.sheet_function_renames.get(name)
    return old if old in reg else None


def sheet_role(typ, rawtext, text, lineno, inliner, options=None, content=None):
    env = inliner.document.settings.env
    app = env.app
    name = text.strip()
    found = resolve(app, name)
    if found is None:
        msg = inliner.reporter.error(
            f"unknown spreadsheet function {name!r} (not in rootvar.addin.functions.REGISTRY)",
            line=lineno,
        )
        return [inliner.problematic(rawtext, rawtext, msg)], [msg]
    from sphinx.addnodes import pending_xref

    node = pending_xref(
        rawtext,
        refdomain="std",
        reftype="ref",
        reftarget=label(found),
        refexplicit=True,
        refwarn=True,
    )
    node += nodes.literal(found, found, classes=["xref", "sheet"])
    return [node], []


def report_renames(app, env):
    reg = registry()
    for new, old in app.config.sheet_function_renames.items():
        if new in reg:
            logger.info(
                "sheet_functions: %s is registered; the rename entry %s -> %s in conf.py "
                "is no longer needed",
                new,
                new,
                old,
            )
        elif old not in reg:
            logger.warning("sheet_functions: neither %s nor %s is registered", new, old)


def setup(app):
    app.add_config_value("sheet_function_renames", {}, "env")
    app.add_directive("sheet-functions", SheetFunctions)
    app.add_role("sheet", sheet_role)
    app.connect("env-check-consistency", report_renames)
    return {"version": "1", "parallel_read_safe": True, "parallel_write_safe": True}
