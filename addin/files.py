"""Reading and writing workbook files safely, for every command that touches one.

- :func:`file_problem` says in plain words why a path cannot be read as a
  workbook (missing, a folder, no right to read it or its folder);
- :func:`save_atomic` writes through a temporary file in the target folder
  and replaces the target in one atomic step, keeping its rights.  Files
  written by a library's temporary-file call would otherwise come out
  readable by their owner only (``mkstemp`` creates them 0600).
"""

from __future__ import annotations

import errno
import os
import shutil
import stat
import tempfile
from pathlib import Path

__all__ = ["SaveError", "current_umask", "file_problem", "os_cause", "save_atomic"]


class SaveError(OSError):
    """A save failed; the target is unchanged."""


def os_cause(exc: OSError) -> str:
    """The plain cause of a failed file operation ("permission denied", ...)."""
    if exc.errno in (errno.EACCES, errno.EPERM):
        return "permission denied"
    return (exc.strerror or str(exc)).lower()


def file_problem(path: Path) -> str | None:
    """Why ``path`` cannot be read as a workbook file, or None if it can be tried."""
    try:
        st = path.stat()
    except FileNotFoundError:
        parent = path.parent
        if not parent.exists():
            return f"folder {parent} does not exist"
        return "no such file"
    except OSError as exc:
        return f"cannot reach the file ({os_cause(exc)} on its folder)"
    if path.is_dir():
        return "is a folder, not a workbook"
    if not os.access(path, os.R_OK):
        return "cannot be read (permission denied)"
    if st.st_size == 0:
        return "empty file, not a workbook"
    return None


def current_umask() -> int:
    """The process's umask (read without changing it where the OS tells it)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except OSError:
        pass
    mask = os.umask(0o022)  # elsewhere the only way to read it is to set it
    os.umask(mask)
    return mask


def _copy_rights(source_stat: os.stat_result | None, target: str) -> None:
    """Give ``target`` the mode (and group, where allowed) of the file it replaces."""
    if source_stat is None:
        os.chmod(target, 0o666 & ~current_umask())
        return
    os.chmod(target, stat.S_IMODE(source_stat.st_mode))
    if hasattr(os, "chown"):
        try:
            os.chown(target, -1, source_stat.st_gid)
        except OSError:
            pass  # only the owner's groups may be given; the mode is what matters


def save_atomic(save, target: Path, keep_backup: bool) -> Path | None:
    """Write through ``save(path)`` to a temporary file, then replace ``target`` atomically.

    Returns the backup's path (``NAME.bak.xlsx``) when one was kept.  The
    replaced file keeps its mode (and group, where the OS allows); new files
    follow the umask, and the backup is never more open than the file it copies.  On any
    failure the target is left as it was and :class:`SaveError` is raised.
    """
    folder = target.parent
    try:
        fd, tmp = tempfile.mkstemp(prefix=".rootvar-", suffix=target.suffix, dir=folder)
    except OSError as exc:
        raise SaveError(f"cannot write in {folder}: {exc.strerror or exc}") from exc
    os.close(fd)
    backup = None
    try:
        try:
            before = target.stat()
        except FileNotFoundError:
            before = None
        save(tmp)
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
        _copy_rights(before, tmp)
        if keep_backup and before is not None:
            backup = target.with_name(f"{target.stem}.bak{target.suffix}")
            fd2, tmp_backup = tempfile.mkstemp(prefix=".rootvar-", suffix=".bak", dir=folder)
            os.close(fd2)
            shutil.copyfile(target, tmp_backup)
            # umask-following, and never more open than the workbook itself
            os.chmod(tmp_backup, (0o666 & ~current_umask()) & stat.S_IMODE(before.st_mode))
            os.replace(tmp_backup, backup)
        os.replace(tmp, target)
    except Exception as exc:
        raise SaveError(f"could not save {target}: {exc}; the original is unchanged") from exc
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return backup
