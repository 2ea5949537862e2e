"""A throw-away PostgreSQL server on 127.0.0.1, for the store tests and benchmark.

Started from the machine's PostgreSQL binaries (``initdb`` and ``pg_ctl`` on
the PATH or under /usr/lib/postgresql/*/bin), trusting local connections, and
removed afterwards.  PostgreSQL refuses to run as root, so under root it runs
as the ``postgres`` user, the privilege dropped by Python itself
(``subprocess`` with ``user=``), so no helper program has to be on the PATH.
(pytest-postgresql starts pg_ctl directly and so cannot run under root, which
is how CI runs.)
"""

from __future__ import annotations

import contextlib
import glob
import os
import pwd
import shutil
import socket
import subprocess
import tempfile
from pathlib import Path


def pg_bin() -> Path | None:
    found = shutil.which("initdb")
    if found:
        return Path(found).resolve().parent
    for folder in sorted(glob.glob("/usr/lib/postgresql/*/bin"), reverse=True):
        if os.path.exists(os.path.join(folder, "initdb")):
            return Path(folder)
    return None


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextlib.contextmanager
def throwaway_postgres():
    """URL prefix ``postgresql+psycopg://postgres@127.0.0.1:PORT`` of a fresh server."""
    bin_dir = pg_bin()
    if bin_dir is None:
        raise RuntimeError("PostgreSQL binaries (initdb, pg_ctl) not found")
    root = Path(tempfile.mkdtemp(prefix="rootvar-pg-"))
    as_user: dict = {}
    if os.geteuid() == 0:
        user = pwd.getpwnam("postgres")
        os.chown(root, user.pw_uid, user.pw_gid)
        env = {**os.environ, "HOME": user.pw_dir, "USER": "postgres", "LOGNAME": "postgres"}
        as_user = {"user": user.pw_uid, "group": user.pw_gid, "extra_groups": [], "env": env}
    data, log, port = root / "data", root / "log", _free_port()

    def run(*cmd, check=True):
        subprocess.run(cmd, check=check, capture_output=True, cwd=root, timeout=120, **as_user)

    run(str(bin_dir / "initdb"), "-D", str(data), "-U", "postgres", "-A", "trust", "-N")
    options = f"-p {port} -k {root} -c listen_addresses=127.0.0.1 -F"
    run(str(bin_dir / "pg_ctl"), "-D", str(data), "-o", options, "-l", str(log), "-w", "start")
    try:
        yield f"postgresql+psycopg://postgres@127.0.0.1:{port}"
    finally:
        run(str(bin_dir / "pg_ctl"), "-D", str(data), "-m", "immediate", "stop", check=False)
        shutil.rmtree(root, ignore_errors=True)
