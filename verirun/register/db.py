"""Open the register named by a path or URL, and bring its schema to this verirun's revision.

A plain path (or ``sqlite:///...``) is an embedded SQLite file, created and migrated on first
use. ``postgresql://user@host/db`` (psycopg 3) is a lab's shared server; its schema is migrated
on purpose, by ``verirun register migrate``, and a register whose schema is behind is refused
with that advice rather than migrated behind the lab's back.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from pathlib import Path

import sqlalchemy as sa
from sqlalchemy.engine import Engine, make_url

from verirun.errors import VerirunError

MIGRATIONS = Path(__file__).resolve().parent / "migrations"


class RegisterError(VerirunError):
    """The register refused something, or is not in a state to be used."""


class RegisterUnreachable(RegisterError):
    """The register's database cannot be reached (down, refused, locked or unwritable)."""


def url_of(name: str) -> sa.URL:
    """The SQLAlchemy URL of a register name: a path is SQLite; ``postgresql://`` uses psycopg 3."""
    if "://" not in name:
        return make_url("sqlite:///" + str(Path(name).expanduser().resolve()))
    try:
        url = make_url(name)
    except sa.exc.ArgumentError:
        raise RegisterError(f"register {name!r}: not a database URL or a file path") from None
    if url.drivername in ("postgresql", "postgres"):
        url = url.set(drivername="postgresql+psycopg")
    if url.get_backend_name() not in ("sqlite", "postgresql"):
        raise RegisterError(
            f"register {shown(url)}: verirun keeps its register on SQLite or PostgreSQL"
        )
    return url


def shown(url: sa.URL) -> str:
    """The URL as it may be printed: without its password."""
    return url.render_as_string(hide_password=True)


@dataclass(frozen=True)
class Register:
    """An open register: its engine and the name it is shown by."""

    engine: Engine
    name: str

    @property
    def dialect(self) -> str:
        return self.engine.dialect.name

    def reading(self):
        """A connection for reading only (on SQLite it takes no write lock, so never waits)."""
        return self.engine.connect().execution_options(verirun_read=True)


def _sqlite_engine(url: sa.URL) -> Engine:
    # Writers queue on BEGIN IMMEDIATE (one writer at a time, waiting up to the busy timeout)
    # so that reading the next certificate number and taking it are one step for every bench.
    engine = sa.create_engine(url, connect_args={"timeout": 30})

    @sa.event.listens_for(engine, "connect")
    def _connect(dbapi_connection, _record):
        dbapi_connection.isolation_level = None  # transactions are begun below, not by the driver
        cursor = dbapi_connection.cursor()
        cursor.execute("PRAGMA foreign_keys = ON")
        cursor.execute("PRAGMA journal_mode = WAL")  # readers never wait for the writer
        cursor.execute("PRAGMA synchronous = FULL")
        cursor.close()

    @sa.event.listens_for(engine, "begin")
    def _begin(connection):
        read_only = connection.get_execution_options().get("verirun_read", False)
        connection.exec_driver_sql("BEGIN" if read_only else "BEGIN IMMEDIATE")

    return engine


def _alembic_config(connection):
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    config.attributes["connection"] = connection
    return config


@functools.cache
def head_revision() -> str:
    """The schema revision this verirun's migrations end at."""
    from alembic.script import ScriptDirectory

    return ScriptDirectory.from_config(_alembic_config(None)).get_current_head()


def current_revision(connection) -> str | None:
    """The schema revision the database is at (``None``: an empty database)."""
    from alembic.runtime.migration import MigrationContext

    return MigrationContext.configure(connection).get_current_revision()


@functools.cache
def known_revisions() -> frozenset[str]:
    """Every schema revision this verirun's migrations know."""
    from alembic.script import ScriptDirectory

    return frozenset(
        s.revision for s in ScriptDirectory.from_config(_alembic_config(None)).walk_revisions()
    )


def _refuse_newer(name: str, at: str | None) -> None:
    """Refuse a register whose schema a later verirun has migrated past this one's.

    Raises
    ------
    RegisterError
        If ``at`` is a revision this verirun's migrations do not know.
    """
    if at is None or at in known_revisions():
        return
    raise RegisterError(
        f"register {name}: its schema is at revision {at}, newer than this verirun knows (it"
        f" needs {head_revision()}): a later verirun migrated it; upgrade verirun on this bench"
    )


def migrate(register: Register) -> tuple[str | None, str]:
    """Bring the register's schema to this verirun's revision; return (before, after).

    Raises
    ------
    RegisterError
        If the register's schema is of a later verirun than this one.
    """
    from alembic import command

    try:
        with register.engine.begin() as connection:
            before = current_revision(connection)
            _refuse_newer(register.name, before)
            if before != head_revision():
                command.upgrade(_alembic_config(connection), "head")
    except sa.exc.OperationalError as exc:
        raise RegisterUnreachable(f"register {register.name}: {_reason(exc)}") from None
    return before, head_revision()


def _reason(exc: sa.exc.DBAPIError) -> str:
    """The database's own words, first line only."""
    text = str(exc.orig) if exc.orig is not None else str(exc)
    return text.strip().splitlines()[0] if text.strip() else type(exc).__name__


_OPEN: dict[str, Register] = {}


def open_register(name: str) -> Register:
    """The register ``name``, ready to use (an embedded SQLite file is made and migrated).

    Raises
    ------
    RegisterUnreachable
        If its database cannot be reached.
    RegisterError
        If the name is not a register, or a server's schema is not at this verirun's revision.
    """
    url = url_of(name)
    key = url.render_as_string(hide_password=False)
    if key in _OPEN:
        return _OPEN[key]
    if url.get_backend_name() == "sqlite":
        if url.database and not Path(url.database).parent.is_dir():
            raise RegisterUnreachable(
                f"register {shown(url)}: the folder {Path(url.database).parent} does not exist"
            )
        register = Register(engine=_sqlite_engine(url), name=shown(url))
        migrate(register)
    else:
        engine = sa.create_engine(url, connect_args={"connect_timeout": 5}, pool_pre_ping=True)
        register = Register(engine=engine, name=shown(url))
        try:
            with engine.connect() as connection:
                at = current_revision(connection)
        except sa.exc.OperationalError as exc:
            raise RegisterUnreachable(f"register {register.name}: {_reason(exc)}") from None
        _refuse_newer(register.name, at)
        if at != head_revision():
            raise RegisterError(
                f"register {register.name}: its schema is at revision {at or 'none (empty)'},"
                f" this verirun needs {head_revision()}; migrate it with"
                f" 'verirun register migrate --register URL'"
            )
    _OPEN[key] = register
    return register


def forget_open() -> None:
    """Dispose of every open register (for tests that start and stop servers)."""
    for register in _OPEN.values():
        register.engine.dispose()
    _OPEN.clear()
