"""Sphinx extension: the parts of the rootvar documentation taken from the code.

- Every public name of ``rootvar.core`` (its ``__all__``) must be documented
  as ``rootvar.core.<name>`` somewhere in the site; the build warns (fails
  with ``-W``) for each one missing, and for a ``rootvar.core.<name>`` entry
  that is not public.  Names are documented where the package exports them,
  never by the module that defines them, so moving a module changes nothing.
- ``.. core-constants:: NAME ...`` renders a table of public constants: the
  name, its value and the ``#:`` comment beside its definition, wherever the
  defining module now lives.
- ``.. command-help::`` renders ``rootvar --help`` and every command's help
  by calling the installed command line, so options cannot drift.
- ``.. benchmark-output::`` includes the saved output of ``python -m
  benchmarks`` (``rootvar_benchmark_output`` in ``conf.py``), or says that no
  run has been saved yet.
"""

from __future__ import annotations

import contextlib
import io
import re
import sys
from pathlib import Path

from docutils import nodes
from sphinx.pycode import ModuleAnalyzer
from sphinx.util import logging
from sphinx.util.docutils import SphinxDirective

logger = logging.getLogger(__name__)

PACKAGE = "rootvar.core"


def public_names() -> list[str]:
    import rootvar.core as core

    return [n for n in core.__all__ if not n.startswith("_")]


def check_core_documented(app, env):
    """Every public core name documented once as rootvar.core.<name>, nothing else there."""
    objects = env.domains["py"].objects
    documented = {
        full[len(PACKAGE) + 1 :]
        for full in objects
        if full.startswith(PACKAGE + ".") and "." not in full[len(PACKAGE) + 1 :]
    }
    public = set(public_names())
    for name in sorted(public - documented):
        logger.warning("rootvar.core.%s is public but not documented in the reference", name)
    for name in sorted(documented - public):
        logger.warning("rootvar.core.%s is documented but not in rootvar.core.__all__", name)


def constant_comment(name: str, value) -> str:
    """The ``#:`` comment beside the constant's definition, found in whichever module holds it."""
    import rootvar.core  # noqa: F401  (loads the package so its modules can be found)

    for module_name, module in sorted(sys.modules.items()):
        if not module_name.startswith(PACKAGE + ".") or module is None:
            continue
        if vars(module).get(name, _MISSING) is not value:
            continue
        try:
            docs = ModuleAnalyzer.for_module(module_name).find_attr_docs()
        except Exception:  # a compiled or generated module: no source to read
            continue
        comment = docs.get(("", name))
        if comment:
            return " ".join(" ".join(comment).split())
    return ""


_MISSING = object()


class CoreConstants(SphinxDirective):
    """Table of public constants: name, value, what it is.

    The text is the ``#:`` comment beside the definition.  A content line
    ``NAME: text`` supplies it for a constant that has no such comment.
    """

    has_content = True
    required_arguments = 1
    final_argument_whitespace = True

    def run(self):
        import rootvar.core as core

        names = self.arguments[0].split()
        python = self.env.domains["py"]
        given = {}
        for line in self.content:
            key, _, text = line.partition(":")
            if text:
                given[key.strip()] = text.strip()
        table = nodes.table(classes=["core-constants"])
        group = nodes.tgroup(cols=3)
        table += group
        for width in (22, 28, 50):
            group += nodes.colspec(colwidth=width)
        head = nodes.thead()
        group += head
        head += self._row(["name", "value", "what it is"], literal=False)
        body = nodes.tbody()
        group += body
        out = [table]
        for name in names:
            if name not in core.__all__:
                logger.warning("%s.%s is not public", PACKAGE, name, location=self.get_location())
                continue
            value = getattr(core, name)
            shown = _shown(value)
            comment = constant_comment(name, value) or given.get(name, "")
            if not comment:
                logger.warning(
                    "%s.%s has no #: comment beside its definition",
                    PACKAGE,
                    name,
                    location=self.get_location(),
                )
            full = f"{PACKAGE}.{name}"
            python.note_object(full, "data", full, location=self.get_location())
            row = self._row([full, shown, comment], literal=True)
            target = nodes.target("", "", ids=[full])
            row[0][0].insert(0, target)
            body += row
        return out

    @staticmethod
    def _row(cells, literal):
        row = nodes.row()
        for i, text in enumerate(cells):
            entry = nodes.entry()
            if literal and i < 2:
                entry += nodes.paragraph("", "", nodes.literal(text, text))
            else:
                entry += nodes.paragraph(text, text)
            row += entry
        return row


def _shown(value) -> str:
    if isinstance(value, dict):
        return ", ".join(str(k) for k in value)
    if isinstance(value, tuple):
        return ", ".join(f"{v:g}" if isinstance(v, float) else str(v) for v in value)
    if isinstance(value, int) and abs(value) >= 10_000:
        return f"{value:_}"
    return repr(value)


def cli_help(argv: list[str]) -> str:
    """What ``rootvar ARGV`` prints, by calling the installed entry point."""
    from importlib.metadata import entry_points

    (entry,) = [e for e in entry_points(group="console_scripts") if e.name == "rootvar"]
    main = entry.load()
    buffer = io.StringIO()
    with contextlib.redirect_stdout(buffer), contextlib.suppress(SystemExit):
        main(argv)
    return buffer.getvalue().rstrip()


def list_commands(top: str) -> list[str]:
    """Command names from the top-level help: the entries under its ``COMMAND`` line."""
    match = re.search(r"\{([a-z0-9_,-]+)\}", top)  # argparse without a metavar
    if match:
        return match.group(1).split(",")
    lines = top.splitlines()
    try:
        start = next(i for i, line in enumerate(lines) if line.strip() == "COMMAND")
    except StopIteration:
        return []
    names = []
    for line in lines[start + 1 :]:
        if not line.strip():
            break
        found = re.match(r"^ {4}([a-z][a-z0-9-]*)(\s|$)", line)
        if found:
            names.append(found.group(1))
    return names


class CommandHelp(SphinxDirective):
    """``rootvar --help`` and each command's ``--help``, as literal blocks."""

    has_content = False

    def run(self):
        top = cli_help(["--help"])
        commands = list_commands(top)
        if not commands:
            logger.warning("rootvar --help lists no commands", location=self.get_location())
        out = [nodes.literal_block(top, top, language="text")]
        for command in commands:
            text = cli_help([command, "--help"])
            section = nodes.section(ids=[f"command-{command}"])
            section += nodes.title(f"rootvar {command}", f"rootvar {command}")
            section += nodes.literal_block(text, text, language="text")
            out.append(section)
        return out


class BenchmarkOutput(SphinxDirective):
    """The saved output of ``python -m benchmarks``, or a note that there is none."""

    has_content = False

    def run(self):
        name = self.config.rootvar_benchmark_output
        path = Path(self.env.srcdir) / name
        if not path.exists():
            text = (
                f"No benchmark run is saved in docs/{name} yet. Produce it with "
                f"`python -m benchmarks > docs/{name}` (or `make bench`) on a quiet machine."
            )
            note = nodes.note()
            note += nodes.paragraph(text, text)
            return [note]
        self.env.note_dependency(str(path))
        text = path.read_text(encoding="utf-8").rstrip()
        return [nodes.literal_block(text, text, language="text")]


def setup(app):
    app.add_config_value("rootvar_benchmark_output", "benchmarks.txt", "env")
    app.add_directive("core-constants", CoreConstants)
    app.add_directive("command-help", CommandHelp)
    app.add_directive("benchmark-output", BenchmarkOutput)
    app.connect("env-check-consistency", check_core_documented)
    return {"version": "1", "parallel_read_safe": False, "parallel_write_safe": True}
