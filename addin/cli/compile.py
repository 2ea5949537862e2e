"""``rootvar compile``: the numerical kernels compiled ahead of time, once per machine."""

from __future__ import annotations

__all__ = ["add_compile_parser", "run_compile"]


def run_compile(args) -> int:
    """Run ``rootvar compile``; returns the exit code."""
    from rootvar.core import compile_kernels, kernels_cached

    if kernels_cached():
        print("rootvar compile: kernels already compiled for this machine; loading them")
    else:
        print("rootvar compile: compiling the numerical kernels once (up to about a minute)")
    seconds = compile_kernels()
    print(f"rootvar compile: ready in {seconds:.1f} s")
    return 0


def add_compile_parser(sub) -> None:
    """Register ``compile`` on an argparse subparsers object."""
    comp = sub.add_parser(
        "compile", help="compile the numerical kernels ahead of time (once per machine)"
    )
    comp.set_defaults(func=run_compile)
