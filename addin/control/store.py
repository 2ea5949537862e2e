"""The history store: the system of record of every refresh.

One SQLAlchemy Core code path serves SQLite (the default: a file beside the
workbook, created on first use) and PostgreSQL (a URL such as
``postgresql+psycopg://user@host/db``).  Every refresh writes its rows in one
transaction; a rerun of the same as-of date replaces that date's rows in the
same transaction, so a reader sees either the old date or the new one, never
half of it, and a run killed mid-write leaves whole dates only.

The schema carries a version number in ``rootvar_meta``.  Opening a store
brings an older schema up to date, one migration step per version, each in
its own transaction; a store written by a newer rootvar is refused.

References
----------
SQLAlchemy 2 documentation, "Serializable isolation / Savepoints / Transactional
DDL" for pysqlite: the ``BEGIN IMMEDIATE`` recipe used for SQLite below.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable
from pathlib import Path

import sqlalchemy as sa
from sqlalchemy.engine import make_url
from sqlalchemy.exc import ArgumentError, NoSuchModuleError, SQLAlchemyError

from .book import ControlError
from .results import FIELDS

__all__ = ["SCHEMA_VERSION", "HistoryStore", "StoreError", "default_store_url"]

#: Version of the schema this rootvar writes.
SCHEMA_VERSION = 2
#: Rows per INSERT statement (executemany keeps memory flat for big books).
_BATCH = 2_000

_SQL_TYPES = {
    "date": sa.String(10),
    "datetime": sa.String(32),
    "ratio": sa.Float,
    "variance": sa.Float,
    "prob": sa.Float,
    "years": sa.Float,
    "days": sa.Float,
    "price": sa.Float,
    "bp": sa.Float,
    "z": sa.Float,
    "seed": sa.BigInteger,
    "text": sa.Text,
}


class StoreError(ControlError):
    """The history store cannot be opened, migrated or written."""


def default_store_url(workbook: Path) -> str:
    """SQLite file beside the workbook: ``NAME.history.sqlite``."""
    path = Path(workbook).resolve()
    return f"sqlite:///{path.with_name(path.stem + '.history.sqlite')}"


def _normalise_url(url: str) -> str:
    """Accept a bare file path as a SQLite store."""
    if "://" not in url:
        return f"sqlite:///{Path(url).expanduser().resolve()}"
    return url


def define_tables(meta: sa.MetaData, version: int = SCHEMA_VERSION):
    """The tables as they stand at schema ``version``."""
    sa.Table(
        "rootvar_meta",
        meta,
        sa.Column("key", sa.String(64), primary_key=True),
        sa.Column("value", sa.Text, nullable=False),
    )
    sa.Table(
        "control_runs",
        meta,
        sa.Column("book", sa.String(200), primary_key=True),
        sa.Column("as_of", sa.String(10), primary_key=True),
        sa.Column("run_time", sa.String(32), nullable=False),
        sa.Column("rootvar_version", sa.String(40), nullable=False),
        sa.Column("row_count", sa.Integer, nullable=False),
        sa.Column("source", sa.String(20), nullable=False),  # "refresh" or "import"
    )
    cols = [
        sa.Column("book", sa.String(200), nullable=False),
        sa.Column("position", sa.Integer, nullable=False),
    ]
    for f in FIELDS:
        if f.since <= version:
            cols.append(sa.Column(f.key, _SQL_TYPES[f.kind], nullable=True))
    rows = sa.Table("control_rows", meta, *cols)
    sa.Index("control_rows_by_date", rows.c.book, rows.c.as_of)
    sa.Index("control_rows_by_model", rows.c.book, rows.c.model_id)


def migrate_0_to_1(conn) -> None:
    """Version 1: the runs and rows tables as first released."""
    meta = sa.MetaData()
    define_tables(meta, version=1)
    meta.create_all(conn)


def migrate_1_to_2(conn) -> None:
    """Version 2 adds the worst case of one Euler step and how often it is visited."""
    for f in FIELDS:
        if f.since == 2:
            kind = _SQL_TYPES[f.kind]
            kind = kind() if isinstance(kind, type) else kind
            ddl = kind.compile(dialect=conn.dialect)
            conn.execute(sa.text(f"ALTER TABLE control_rows ADD COLUMN {f.key} {ddl}"))


#: version reached -> step that takes the schema there from the one before.  Never edit
#: a step once released: add the next one.
_MIGRATIONS = {1: migrate_0_to_1, 2: migrate_1_to_2}


class HistoryStore:
    """A history store at ``url``; see the module docstring.

    Parameters
    ----------
    url : str
        SQLAlchemy URL (``sqlite:///path``, ``postgresql+psycopg://...``) or a
        plain file path, taken as SQLite.
    """

    def __init__(self, url: str):
        self.url = _normalise_url(url)
        try:
            parsed = make_url(self.url)
        except ArgumentError as exc:
            raise StoreError(f"history store URL {url!r} is not a database URL") from exc
        self.shown = parsed.render_as_string(hide_password=True)
        self.is_sqlite = parsed.get_backend_name() == "sqlite"
        try:
            if self.is_sqlite:
                self.engine = sa.create_engine(
                    self.url, connect_args={"timeout": 120}, poolclass=sa.pool.NullPool
                )
                _sqlite_immediate(self.engine)
            else:
                self.engine = sa.create_engine(self.url, pool_pre_ping=True)
        except (NoSuchModuleError, ImportError) as exc:
            raise StoreError(
                f"history store {self.shown}: no driver for it "
                "(PostgreSQL needs: pip install 'rootvar[postgres]')"
            ) from exc
        self.meta = sa.MetaData()
        define_tables(self.meta)
        self.runs = self.meta.tables["control_runs"]
        self.rows = self.meta.tables["control_rows"]
        self.info = self.meta.tables["rootvar_meta"]

    def __repr__(self) -> str:
        return f"HistoryStore({self.shown!r})"

    def _fail(self, doing: str, exc: Exception) -> StoreError:
        cause = str(getattr(exc, "orig", None) or exc).strip().splitlines()[0]
        return StoreError(f"history store {self.shown}: could not {doing}: {cause}")

    # ------------------------------------------------------------ schema

    def schema_version(self) -> int:
        """Version of the schema in the store (0 for an empty store)."""
        try:
            with self.engine.connect() as conn:
                if not sa.inspect(conn).has_table("rootvar_meta"):
                    return 0
                value = conn.execute(
                    sa.select(self.info.c.value).where(self.info.c.key == "schema_version")
                ).scalar()
        except SQLAlchemyError as exc:
            raise self._fail("read its schema version", exc) from exc
        return int(value) if value is not None else 0

    def ensure_schema(self) -> int:
        """Create or migrate the schema to :data:`SCHEMA_VERSION`; returns the version."""
        try:
            with self.engine.begin() as conn:
                self._serialise(conn)
                current = 0
                if sa.inspect(conn).has_table("rootvar_meta"):
                    value = conn.execute(
                        sa.select(self.info.c.value).where(self.info.c.key == "schema_version")
                    ).scalar()
                    current = int(value) if value is not None else 0
                if current > SCHEMA_VERSION:
                    raise StoreError(
                        f"history store {self.shown} has schema version {current}, newer than "
                        f"this rootvar knows ({SCHEMA_VERSION}); upgrade rootvar"
                    )
                for version in range(current + 1, SCHEMA_VERSION + 1):
                    _MIGRATIONS[version](conn)
                    self.set_version(conn, version)
                return SCHEMA_VERSION
        except SQLAlchemyError as exc:
            raise self._fail("create or migrate its schema", exc) from exc

    def set_version(self, conn, version: int) -> None:
        conn.execute(sa.delete(self.info).where(self.info.c.key == "schema_version"))
        conn.execute(sa.insert(self.info).values(key="schema_version", value=str(version)))

    def _serialise(self, conn) -> None:
        """Make concurrent writers of one store take turns (SQLite: BEGIN IMMEDIATE)."""
        if self.engine.dialect.name == "postgresql":
            # one key for all rootvar writers of this database; released at commit
            conn.execute(sa.text("SELECT pg_advisory_xact_lock(727274615)"))

    # ------------------------------------------------------------ writing

    def book_is_new(self, book: str) -> bool:
        """True when the store holds no date of ``book`` yet."""
        try:
            with self.engine.connect() as conn:
                return (
                    conn.execute(
                        sa.select(sa.func.count()).where(self.runs.c.book == book)
                    ).scalar()
                    == 0
                )
        except SQLAlchemyError as exc:
            raise self._fail("read it", exc) from exc

    def record(
        self,
        book: str,
        as_of: str,
        rows: list[dict],
        run_time: str,
        version: str,
        imported: Iterable[dict] = (),
    ) -> None:
        """Write one refresh (and, once, the imported old history) in one transaction.

        The rows of ``as_of`` already in the store for ``book`` are replaced.
        ``imported`` rows (from an old *History* sheet) are added for their
        own dates only where the store has none for that date.
        """
        try:
            with self.engine.begin() as conn:
                self._serialise(conn)
                if imported:
                    self._import(conn, book, imported, exclude=as_of)
                self._replace_date(conn, book, as_of, rows, run_time, version, "refresh")
        except SQLAlchemyError as exc:
            raise self._fail(f"write the rows of {as_of}", exc) from exc

    def _replace_date(self, conn, book, as_of, rows, run_time, version, source) -> None:
        conn.execute(
            sa.delete(self.rows).where((self.rows.c.book == book) & (self.rows.c.as_of == as_of))
        )
        conn.execute(
            sa.delete(self.runs).where((self.runs.c.book == book) & (self.runs.c.as_of == as_of))
        )
        conn.execute(
            sa.insert(self.runs).values(
                book=book,
                as_of=as_of,
                run_time=run_time,
                rootvar_version=version,
                row_count=len(rows),
                source=source,
            )
        )
        self._insert_rows(conn, book, rows)

    def _insert_rows(self, conn, book, rows) -> None:
        for start in range(0, len(rows), _BATCH):
            batch = [
                {"book": book, "position": start + i} | _db_row(r)
                for i, r in enumerate(rows[start : start + _BATCH])
            ]
            conn.execute(sa.insert(self.rows), batch)

    def _import(self, conn, book, imported, exclude: str) -> None:
        by_date: dict[str, list[dict]] = {}
        for r in imported:
            if r.get("as_of") and r["as_of"] != exclude:
                by_date.setdefault(r["as_of"], []).append(r)
        have = set(
            conn.execute(sa.select(self.runs.c.as_of).where(self.runs.c.book == book)).scalars()
        )
        for as_of, rows in sorted(by_date.items()):
            if as_of in have:
                continue
            first = rows[0]
            self._replace_date(
                conn,
                book,
                as_of,
                rows,
                str(first.get("run_time") or ""),
                str(first.get("rootvar_version") or ""),
                "import",
            )

    # ------------------------------------------------------------ reading

    def dates(self, book: str | None = None) -> list[str]:
        """As-of dates in the store (of one book, or all), oldest first."""
        q = sa.select(self.runs.c.as_of).distinct().order_by(self.runs.c.as_of)
        if book is not None:
            q = q.where(self.runs.c.book == book)
        try:
            with self.engine.connect() as conn:
                return list(conn.execute(q).scalars())
        except SQLAlchemyError as exc:
            raise self._fail("read its dates", exc) from exc

    def books(self) -> list[str]:
        """Books with history in the store."""
        try:
            with self.engine.connect() as conn:
                q = sa.select(self.runs.c.book).distinct().order_by(self.runs.c.book)
                return list(conn.execute(q).scalars())
        except SQLAlchemyError as exc:
            raise self._fail("read its books", exc) from exc

    def read(
        self,
        book: str | None = None,
        model: str | None = None,
        since: str | None = None,
        last_dates: int | None = None,
    ) -> list[dict]:
        """Rows as dicts (keys of FIELDS plus ``book``), by date, then in written order."""
        r = self.rows
        shown = [c for c in r.c if c.name != "position"]  # the order is the position
        q = sa.select(*shown).order_by(r.c.book, r.c.as_of, r.c.position)
        if book is not None:
            q = q.where(r.c.book == book)
        if model is not None:
            q = q.where(r.c.model_id == model)
        if since is not None:
            q = q.where(r.c.as_of >= since)
        if last_dates is not None:
            kept = self.dates(book)[-last_dates:] if last_dates > 0 else []
            if not kept:
                return []
            q = q.where(r.c.as_of >= kept[0])
        try:
            with self.engine.connect() as conn:
                return [dict(m) for m in conn.execute(q).mappings()]
        except SQLAlchemyError as exc:
            raise self._fail("read its rows", exc) from exc

    def dispose(self) -> None:
        self.engine.dispose()


def _db_row(row: dict) -> dict:
    out = {}
    for f in FIELDS:
        value = row.get(f.key)
        if isinstance(value, float) and not math.isfinite(value):
            # SQLite and PostgreSQL both keep infinities, but a NaN reads back as NULL on
            # one and NaN on the other; store every non-finite as text-free NULL except
            # +inf (an unbounded safe step), which both keep.
            value = value if value == math.inf else None
        if value == "":
            value = None
        out[f.key] = value
    return out


def book_label(workbook: Path, configured: str) -> str:
    """The name a book's rows carry in the store: the setting, or the file's stem."""
    text = configured.strip() or Path(workbook).stem
    return re.sub(r"\s+", " ", text)[:200]


def _sqlite_immediate(engine) -> None:
    """Take SQLite's write lock at BEGIN, so two writers queue instead of deadlocking."""

    @sa.event.listens_for(engine, "connect")
    def _connect(dbapi_connection, _record):
        dbapi_connection.isolation_level = None  # let SQLAlchemy's BEGIN below rule

    @sa.event.listens_for(engine, "begin")
    def _begin(conn):
        conn.exec_driver_sql("BEGIN IMMEDIATE")
