"""Exit codes and endings every ``rootvar`` command shares; the standard library only.

:mod:`rootvar.addin.cli.launch` imports this before its guard, so nothing here may
import rootvar's engines, numpy or pandas.
"""

from __future__ import annotations

import os
import sys

__all__ = ["EXIT_INTERNAL", "EXIT_INTERRUPTED", "EXIT_PIPE", "crash_line", "quiet_pipe"]

#: Unexpected internal error; interrupted (Ctrl-C); the reader of our output went away
#: (128 + SIGPIPE, as a shell reports it).
EXIT_INTERNAL, EXIT_INTERRUPTED, EXIT_PIPE = 4, 130, 141


def crash_line(exc: BaseException) -> str:
    """The one line that reports an unexpected exception: its kind and its message."""
    text = " ".join(str(exc).split()) or "no message"
    return f"{type(exc).__name__}: {text}"


def quiet_pipe() -> None:
    """End quietly after the reader of stdout went away (a closed pipe)."""
    # The reader of `rootvar ... | head` has what it wanted; point stdout at devnull so
    # the interpreter's final flush does not complain again.
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):
        pass
