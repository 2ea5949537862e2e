"""Shared fixtures: a throw-away PostgreSQL server for the history-store tests.

The server is started from the PostgreSQL binaries on the machine (``initdb``
and ``pg_ctl`` on the PATH or under /usr/lib/postgresql/*/bin), listens on
127.0.0.1 only, trusts local connections and is removed after the session.
PostgreSQL refuses to run as root, so under root it runs as the ``postgres``
user through ``runuser``.  (pytest-postgresql starts pg_ctl directly and so
cannot run under root, which is how CI runs.)

Where the binaries are missing the PostgreSQL tests skip, unless
``ROOTVAR_REQUIRE_POSTGRES=1`` (set by ``.ci/run``) turns that into a failure.
"""

from __future__ import annotations

import glob
import os
import pwd
import shutil
import socket
import subprocess
import tempfile
import uuid
from pathlib import Path

import pytest


def _pg_bin() -> Path | None:
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


@pytest.fixture(scope="session")
def postgres_server():
    """URL prefix ``postgresql+psycopg://postgres@127.0.0.1:PORT`` of a fresh server."""
    bin_dir = _pg_bin()
    if bin_dir is None:
        if os.environ.get("ROOTVAR_REQUIRE_POSTGRES") == "1":
            pytest.fail("PostgreSQL binaries not found but ROOTVAR_REQUIRE_POSTGRES=1")
        pytest.skip("PostgreSQL binaries (initdb, pg_ctl) not found")
    pytest.importorskip("psycopg")
    root = Path(tempfile.mkdtemp(prefix="rootvar-pg-"))
    prefix: list[str] = []
    if os.geteuid() == 0:
        user = pwd.getpwnam("postgres")
        os.chown(root, user.pw_uid, user.pw_gid)
        prefix = ["runuser", "-u", "postgres", "--"]
    data, log, port = root / "data", root / "log", _free_port()

    def run(*cmd):
        subprocess.run([*prefix, *cmd], check=True, capture_output=True, cwd=root, timeout=120)

    run(str(bin_dir / "initdb"), "-D", str(data), "-U", "postgres", "-A", "trust", "-N")
    options = f"-p {port} -k {root} -c listen_addresses=127.0.0.1 -F"
    run(str(bin_dir / "pg_ctl"), "-D", str(data), "-o", options, "-l", str(log), "-w", "start")
    try:
        yield f"postgresql+psycopg://postgres@127.0.0.1:{port}"
    finally:
        subprocess.run(
            [*prefix, str(bin_dir / "pg_ctl"), "-D", str(data), "-m", "immediate", "stop"],
            capture_output=True,
            timeout=120,
        )
        shutil.rmtree(root, ignore_errors=True)


@pytest.fixture
def postgres_url(postgres_server):
    """A fresh, empty database on the session's server, per test."""
    import sqlalchemy as sa

    name = f"t_{uuid.uuid4().hex[:12]}"
    admin = sa.create_engine(f"{postgres_server}/postgres", isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.exec_driver_sql(f"CREATE DATABASE {name}")
    admin.dispose()
    return f"{postgres_server}/{name}"


@pytest.fixture(params=["sqlite", "postgresql"])
def store_url(request, tmp_path):
    """The same store tests on SQLite and on a real PostgreSQL server."""
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'store.sqlite'}"
    return request.getfixturevalue("postgres_url")
