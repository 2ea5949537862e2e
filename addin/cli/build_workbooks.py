"""``rootvar build-workbooks``: the shipped workbook templates, built deterministically."""

from __future__ import annotations

from pathlib import Path

__all__ = ["add_build_parser", "run_build"]


def run_build(args) -> int:
    """Run ``rootvar build-workbooks``; returns the exit code."""
    from rootvar.addin.workbooks.build import build_all

    for path in build_all(Path(args.dir)):
        print(path)
    return 0


def add_build_parser(sub) -> None:
    """Register ``build-workbooks`` on an argparse subparsers object."""
    build = sub.add_parser("build-workbooks", help="build the shipped workbook templates")
    build.add_argument("--dir", default="workbooks", help="target folder (default workbooks)")
    build.set_defaults(func=run_build)
