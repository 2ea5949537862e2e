"""The ``rootvar`` console command's first step, which cannot itself fail to import.

The command line (:mod:`rootvar.addin.cli.main`) imports the core, pandas and numba
at the top.  Anything that goes wrong there (a broken installation, a cache
folder that cannot be written, a missing library) must still end as one line
and exit code 4, never a traceback and never 0 ("clear") or 1 ("breaches"),
which a scheduler would read as a result.  So this module imports nothing but
the standard library (and the stdlib-only :mod:`rootvar.addin.cli.exits`)
until it is inside the guard.
"""

from __future__ import annotations

import sys
import warnings

from rootvar.addin.cli.exits import (
    EXIT_INTERNAL,
    EXIT_INTERRUPTED,
    EXIT_PIPE,
    crash_line,
    quiet_pipe,
)

__all__ = ["main"]

_default_showwarning = warnings.showwarning


def _show_notice(message, category, filename, lineno, file=None, line=None):
    """rootvar's own notices as their one line of text; other warnings as Python shows them."""
    text = str(message)
    if not text.startswith("rootvar:"):
        return _default_showwarning(message, category, filename, lineno, file, line)
    try:
        print(text, file=sys.stderr if file is None else file)
    except (OSError, ValueError):  # stderr closed: a notice is not worth a crash
        pass


def main(argv=None) -> int:
    """Entry point of the ``rootvar`` console command; returns the exit code."""
    warnings.showwarning = _show_notice
    try:
        from rootvar.addin.cli.main import main as run

        return run(argv)
    except SystemExit:
        raise  # argparse's own exit (2 on bad options, 0 after --help)
    except KeyboardInterrupt:
        print("rootvar: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        quiet_pipe()
        return EXIT_PIPE
    except BaseException as exc:
        try:
            print(f"rootvar: internal error, please report it: {crash_line(exc)}", file=sys.stderr)
        except (OSError, ValueError):
            pass
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
