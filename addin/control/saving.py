"""One writer at a time: the workbook lock.

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
are compared with what was read (:class:`~.book.BookSnapshot`); if anything
else changed it meanwhile, nothing is written in place.  The save itself,
keeping the workbook's rights, is :func:`rootvar.addin.files.save_atomic`.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import socket
from pathlib import Path

from filelock import FileLock, Timeout

from rootvar.addin.files import current_umask

from .book import ControlError

__all__ = ["BookLock", "LockBusy"]


class LockBusy(ControlError):
    """Another run holds the workbook's lock past the waiting time."""


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
