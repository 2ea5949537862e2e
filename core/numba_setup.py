"""Where numba keeps its compiled kernels, decided before numba is imported.

numba caches each kernel (``cache=True``) next to its source file, in
``__pycache__``.  Where the installed package folder is read-only (a shared
or system-wide installation) the cache goes to a per-user folder instead:
``$XDG_CACHE_HOME/rootvar/numba`` (``~/.cache/rootvar/numba``) on Linux and
macOS, ``%LOCALAPPDATA%\\rootvar\\numba`` on Windows.  A ``NUMBA_CACHE_DIR``
set by the user always wins.  numba reads the variable once, when it is
first imported, which is why every kernel module imports numba from here.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

__all__ = ["cache_folder", "numba", "user_cache_folder"]

_PACKAGE = Path(__file__).resolve().parent


def user_cache_folder() -> Path:
    """The per-user folder for compiled kernels on this platform."""
    if sys.platform == "win32":
        base = os.environ.get("LOCALAPPDATA") or str(Path.home() / "AppData" / "Local")
    else:
        base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "rootvar" / "numba"


def cache_folder(package: Path = _PACKAGE) -> Path | None:
    """The folder to give numba, or None to let it cache beside the sources.

    None when ``NUMBA_CACHE_DIR`` is already set or ``package`` (its
    ``__pycache__``) is writable; the per-user folder otherwise.
    """
    if os.environ.get("NUMBA_CACHE_DIR"):
        return None
    target = package / "__pycache__"
    probe = target if target.exists() else package
    if os.access(probe, os.W_OK):
        return None
    return user_cache_folder()


if "numba" not in sys.modules:
    _folder = cache_folder()
    if _folder is not None:
        os.environ["NUMBA_CACHE_DIR"] = str(_folder)

import numba  # noqa: E402  (after the cache folder is chosen)
