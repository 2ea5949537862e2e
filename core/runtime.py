"""The compiled kernels' run time: where numba caches them, the thread pool, the cold-cache notice.

This module imports no engine, so every kernel and engine module can import it.

Where numba keeps its compiled kernels is decided before numba is imported.

numba caches each kernel (``cache=True``) next to its source file, in
``__pycache__``.  Where that cannot be written (a shared or system-wide
installation, a service account) the first writable folder of these is used:

1. ``NUMBA_CACHE_DIR``, when the user set it and it can be written;
2. the package's own ``__pycache__``;
3. the per-user folder: ``$XDG_CACHE_HOME/rootvar/numba``
   (``~/.cache/rootvar/numba``) on Linux and macOS,
   ``%LOCALAPPDATA%\\rootvar\\numba`` on Windows;
4. a private folder in the system's temporary folder,
   ``rootvar-numba-<user id>``, made with owner-only rights (one that exists
   but belongs to another user, or lets others write, is not used);
5. none: the kernels are compiled in every process and not cached.

Choices 4 and 5, and a ``NUMBA_CACHE_DIR`` that cannot be written, give one
:class:`CacheNotice` per process; no choice makes an import fail.  numba reads
its settings once, when it is first imported, which is why every kernel module
imports numba (and :func:`njit`) from here.
"""

from __future__ import annotations

import os
import stat
import sys
import tempfile
import threading
import warnings
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

__all__ = [
    "CACHING",
    "CacheChoice",
    "CacheNotice",
    "CompileNotice",
    "cache_choice",
    "kernels_cached",
    "njit",
    "notice_if_cold",
    "numba",
    "thread_pool",
]

_PACKAGE = Path(__file__).resolve().parent


class CacheNotice(UserWarning):
    """The compiled kernels cannot be kept where they usually are (says where they go)."""


@dataclass(frozen=True)
class CacheChoice:
    """Where numba caches the kernels in this process.

    Attributes
    ----------
    folder : Path or None
        The folder given to numba as ``NUMBA_CACHE_DIR``; None for beside the
        sources (or, with ``caching`` False, nowhere).
    caching : bool
        False when no folder can be written: kernels compile in every process.
    notice : str
        Why the usual place is not used, or ``""``.
    """

    folder: Path | None
    caching: bool
    notice: str = ""


def user_cache_folder() -> Path:
    """The per-user folder for compiled kernels on this platform."""
    if sys.platform == "win32":
        base = os.environ.get("LOCALAPPDATA") or str(Path.home() / "AppData" / "Local")
    else:
        base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "rootvar" / "numba"


def _writable(folder: Path) -> bool:
    """True when ``folder`` exists or can be made, and a file can be written in it.

    The same probe numba runs before it caches (``os.access`` is not enough:
    it says yes to root on a read-only file system, and no under some ACLs).
    """
    try:
        folder.mkdir(parents=True, exist_ok=True)
        tempfile.TemporaryFile(dir=folder).close()
    except (OSError, ValueError):  # ValueError: a path with a NUL byte in it
        return False
    return True


def _private_temp_folder() -> Path | None:
    """``<temp>/rootvar-numba-<uid>``, if it is ours alone and writable; else None."""
    uid = os.getuid() if hasattr(os, "getuid") else os.environ.get("USERNAME", "user")
    try:
        # gettempdir raises when no candidate folder can be written (TMPDIR, /tmp, ...)
        folder = Path(tempfile.gettempdir()) / f"rootvar-numba-{uid}"
        folder.mkdir(mode=0o700, exist_ok=True)
        info = folder.lstat()
    except OSError:
        return None
    # Machine code loaded from a folder another user can write would run as us.
    if not stat.S_ISDIR(info.st_mode) or info.st_mode & (stat.S_IWGRP | stat.S_IWOTH):
        return None
    if hasattr(os, "getuid") and info.st_uid != os.getuid():
        return None
    return folder if _writable(folder) else None


def cache_choice(package: Path = _PACKAGE) -> CacheChoice:
    """Choose where numba caches the kernels (the order is in the module's docstring)."""
    refused = ""
    chosen = os.environ.get("NUMBA_CACHE_DIR")
    if chosen:
        if _writable(Path(chosen)):
            return CacheChoice(Path(chosen), True)
        refused = f"NUMBA_CACHE_DIR={chosen} cannot be written, so it is not used; "
    if _writable(package / "__pycache__"):
        return CacheChoice(None, True, refused.removesuffix("; "))
    user = user_cache_folder()
    if _writable(user):
        return CacheChoice(user, True, refused.removesuffix("; "))
    temp = _private_temp_folder()
    if temp is not None:
        return CacheChoice(
            temp,
            True,
            f"{refused}compiled kernels are kept in the temporary folder {temp} because neither "
            f"the package folder nor {user} can be written; they are compiled again if it is "
            "cleared",
        )
    return CacheChoice(
        None,
        False,
        f"{refused}no folder can be written for compiled kernels (package, {user}, temporary "
        "folder), so each process compiles them again (up to about a minute)",
    )


def _apply(choice: CacheChoice) -> None:
    if choice.folder is None:
        os.environ.pop("NUMBA_CACHE_DIR", None)  # beside the sources, or no cache at all
    else:
        os.environ["NUMBA_CACHE_DIR"] = str(choice.folder)
    if choice.notice:
        warnings.warn(f"rootvar: {choice.notice}", CacheNotice, stacklevel=3)


if "numba" in sys.modules:  # imported before us: its settings are fixed; cache only if it can
    CHOICE = CacheChoice(None, True)
else:
    CHOICE = cache_choice()
    _apply(CHOICE)

#: False when no folder can hold compiled kernels (see :func:`cache_choice`).
CACHING = CHOICE.caching

import numba  # noqa: E402  (after the cache folder is chosen)


def njit(*args, cache=True, **options):
    """``numba.njit`` with ``cache=`` honoured only where a folder can hold the kernels.

    Every kernel module decorates through this, so a machine on which nothing
    can be written runs the kernels uncached instead of failing at import.
    """
    return numba.njit(*args, cache=cache and CACHING, **options)


class CompileNotice(UserWarning):
    """The kernels are being compiled because the on-disk cache is empty."""


def kernels_cached(kernels) -> bool:
    """True when each of ``kernels`` is compiled in this process or has machine code on disk."""
    for kernel in kernels:
        if kernel.signatures:
            continue
        try:
            index = kernel._cache._cache_file._index_path  # numba's own index file
        except AttributeError:  # uncached, or a numba without this layout: cannot tell
            continue
        if not os.path.exists(index):
            return False
    return True


_noticed = False


def notice_if_cold(*kernels) -> None:
    """Warn once per process, before a first compile of ``kernels``, that it takes a while.

    Callers name the kernels they are about to call, so a process that never
    needs a kernel is not told it compiles (a kernel is written to the disk
    cache only when it is compiled, that is when it is first called).
    """
    global _noticed
    if _noticed or kernels_cached(kernels):
        return
    _noticed = True
    warnings.warn(
        "rootvar: compiling the numerical kernels once for this machine (up to about a "
        "minute); `rootvar compile` does it ahead of time"
        if CACHING
        else "rootvar: compiling the numerical kernels for this process (up to about a minute); "
        "no folder here can keep them",
        CompileNotice,
        stacklevel=3,
    )


def quiet_notice() -> None:
    """No cold-cache notice in this process: the caller says itself that it compiles."""
    global _noticed
    _noticed = True


_POOLS: dict = {}
_POOLS_LOCK = threading.Lock()


def thread_pool():
    """A pool of ``numba.get_num_threads()`` threads for this process, or None for one thread.

    The kernels release the GIL, so independent pieces of work (Monte Carlo
    blocks, slices of frequencies or strikes) run side by side on it.  Kept
    between calls; keyed by process id too, because a pool inherited through
    ``fork`` has no threads behind it, so a forked worker makes its own.
    """
    threads = numba.get_num_threads()
    if threads < 2:
        return None
    key = (os.getpid(), threads)
    with _POOLS_LOCK:
        if key not in _POOLS:
            _POOLS[key] = ThreadPoolExecutor(threads, thread_name_prefix="rootvar")
        return _POOLS[key]
