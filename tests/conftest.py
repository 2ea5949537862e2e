"""Shared fixtures: the throw-away PostgreSQL server (tests/pg_server.py) for the store tests.

The server is started from the PostgreSQL binaries on the machine (``initdb``
and ``pg_ctl`` on the PATH or under /usr/lib/postgresql/*/bin), listens on
127.0.0.1 only, trusts local connections and is removed after the session.
PostgreSQL refuses to run as root, so under root it runs as the ``postgres``
user, the privilege dropped in Python (``subprocess`` with ``user=``).
(pytest-postgresql starts pg_ctl directly and so cannot run under root, which
is how CI runs.)

Where the binaries are missing the PostgreSQL tests skip, unless
``ROOTVAR_REQUIRE_POSTGRES=1`` (set by ``.ci/run``) turns that into a failure.
"""

from __future__ import annotations

import os
import uuid

import pytest
from support.pg_server import pg_bin, throwaway_postgres


@pytest.fixture(scope="session")
def postgres_server():
    """URL prefix ``postgresql+psycopg://postgres@127.0.0.1:PORT`` of a fresh server."""
    if pg_bin() is None:
        if os.environ.get("ROOTVAR_REQUIRE_POSTGRES") == "1":
            pytest.fail("PostgreSQL binaries not found but ROOTVAR_REQUIRE_POSTGRES=1")
        pytest.skip("PostgreSQL binaries (initdb, pg_ctl) not found")
    pytest.importorskip("psycopg")
    with throwaway_postgres() as url:
        yield url


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
