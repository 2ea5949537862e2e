"""Saving a workbook safely: one writer at a time, atomic replace, rights kept.

The lock
--------
A refresh takes an exclusive lock on ``.NAME.rootvar-lock`` beside the
workbook before it reads the workbook and holds it until the refreshed file
has replaced it.  The lock is the operating system's (``flock`` on POSIX,
``LockFileEx`` on Windows, through the ``filelock`` library), so it dies with
its process: a run that crashed or was killed cannot leave a lock that blocks
tomorrow.  Who holds it (host, process id, start time) is written to
``.NAME.rootvar-lock.json`` once it is taken and removed on a clean release;
finding that file when taking the lock means the previous holder ended
without releasing it, and the refresh says so.

What is guaranteed: on a local disk, between rootvar runs, on any OS.  On a
network share only as far as the share honours byte-range locks: NFSv4 and
SMB do; NFSv3 without a lock daemon and some sync folders do not.  A
spreadsheet program holding the file open is seen by its own lock file
(``~$NAME``) and, whatever holds no lock, by the identity check below.

Identity check
--------------
Just before the replace the workbook's size, modification time and SHA-256
are compared with what was read; if anything else changed it meanwhile,
nothing is written in place.

Rights
------
The replaced workbook keeps its mode bits and, where the OS allows, its
group.  New files (the backup, a first workbook) follow the user's umask; the
backup is never more open than the workbook it copies.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import shutil
import socket
import stat
import tempfile
from pathlib import Path

from filelock import FileLock, Timeout

from .book import ControlError

__all__ = ["BookLock", "LockBusy", "current_umask", "save_atomic"]


class LockBusy(ControlError):
    """Another run holds the workbook's lock past the waiting time."""


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


class BookLock:
    """Exclusive lock of one workbook; a context manager.

    Parameters
    ----------
    workbook : Path
        The workbook to lock.
    wait : float
        Seconds to wait for another run to finish; then :class:`LockBusy`.
    """

    def __init__(self, workbook: Path, wait: float = 600.0):
        self.workbook = Path(workbook)
        folder, name = self.workbook.parent, self.workbook.name
        self.lock_path = folder / f".{name}.rootvar-lock"
        self.info_path = folder / f".{name}.rootvar-lock.json"
        self.wait = float(wait)
        self.stale: dict | None = None
        self._lock = FileLock(str(self.lock_path), timeout=self.wait, mode=0o666 & ~current_umask())

    def holder(self) -> str:
        """The holder's description, from its information file."""
        try:
            info = json.loads(self.info_path.read_text(encoding="utf-8"))
            return (
                f"host {info.get('host', '?')}, process {info.get('pid', '?')}, "
                f"started {info.get('started', '?')}"
            )
        except (OSError, ValueError):
            return "holder unknown (it has not written its details yet)"

    def __enter__(self) -> BookLock:
        try:
            self._lock.acquire(timeout=self.wait)
        except Timeout as exc:
            raise LockBusy(
                f"{self.workbook}: another refresh holds it ({self.holder()}); "
                f"waited {self.wait:g} s"
            ) from exc
        except OSError as exc:
            raise ControlError(
                f"{self.workbook}: cannot take its lock {self.lock_path.name} "
                f"({exc.strerror or exc})"
            ) from exc
        if self.info_path.exists():
            try:
                self.stale = json.loads(self.info_path.read_text(encoding="utf-8"))
            except (OSError, ValueError):
                self.stale = {}
        info = {
            "host": socket.gethostname(),
            "pid": os.getpid(),
            "started": dt.datetime.now(dt.UTC).replace(microsecond=0).isoformat(),
        }
        try:
            _write_new(self.info_path, json.dumps(info).encode())
        except OSError:
            pass  # details are a courtesy to waiters; the lock itself is held
        return self

    def stale_note(self) -> str:
        """A sentence about a lock left by a run that ended without releasing it."""
        if self.stale is None:
            return ""
        s = self.stale
        return (
            "took over the lock left by a run that ended without releasing it "
            f"(host {s.get('host', '?')}, process {s.get('pid', '?')}, "
            f"started {s.get('started', '?')})"
        )

    def __exit__(self, *exc) -> None:
        try:
            self.info_path.unlink(missing_ok=True)
        finally:
            self._lock.release()


def _write_new(path: Path, data: bytes) -> None:
    tmp = path.with_name(path.name + ".tmp")
    with open(tmp, "wb") as fh:
        fh.write(data)
    os.replace(tmp, path)


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

    Returns the backup's path (``NAME.bak.xlsx``) when one was kept.  On any
    failure the target is left as it was and :class:`ControlError` is raised.
    """
    folder = target.parent
    try:
        fd, tmp = tempfile.mkstemp(prefix=".rootvar-", suffix=target.suffix, dir=folder)
    except OSError as exc:
        raise ControlError(f"cannot write in {folder}: {exc.strerror or exc}") from exc
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
        raise ControlError(f"could not save {target}: {exc}; the original is unchanged") from exc
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return backup
