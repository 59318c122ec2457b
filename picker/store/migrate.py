"""Schema versions: alembic migrations run from code, and the version guard.

Every command that opens a stockroom checks its schema revision against the one
this code was written for (a cheap query, no alembic import); ``picker db upgrade``
(and ``picker init``) run the migrations.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING

from picker.errors import StoreError

if TYPE_CHECKING:
    from sqlalchemy.engine import Connection, Engine

# The newest migration this code knows; tests check it equals alembic's head.
HEAD = "0005"
# Every revision in order; a database at one of the earlier ones can be upgraded.
REVISIONS = ("0001", "0002", "0003", "0004", "0005")

MIGRATIONS = Path(__file__).with_name("migrations")


def _config(connection: Connection):  # type: ignore[no-untyped-def]
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS))
    cfg.attributes["connection"] = connection
    return cfg


def upgrade(engine: Engine, revision: str = "head") -> None:
    """Bring the database to ``revision`` in one transaction: every step or none."""
    with all_or_nothing(engine) as conn:
        upgrade_on(conn, revision)


@contextmanager
def all_or_nothing(engine: Engine) -> Iterator[Connection]:
    """A transaction that covers schema changes too, committed only if the block ends well.

    pysqlite runs CREATE and ALTER outside any transaction unless one was begun
    explicitly, so on SQLite this begins one (IMMEDIATE: it takes the write lock
    up front, waiting up to the busy timeout). PostgreSQL's DDL is transactional.
    """
    with engine.connect() as conn:
        if conn.dialect.name == "sqlite":
            conn.exec_driver_sql("BEGIN IMMEDIATE")
        try:
            yield conn
        except BaseException:
            conn.rollback()
            raise
        conn.commit()


def upgrade_on(conn: Connection, revision: str = "head") -> None:
    """Run the migrations on an open connection, inside its current transaction."""
    from alembic import command

    command.upgrade(_config(conn), revision)


def current(engine: Engine) -> str | None:
    """The database's schema revision, or None for an empty database."""
    with engine.connect() as conn:
        return current_on(conn)


def revision(engine: Engine, where: str) -> str | None:
    """current(), with an unreachable or unreadable database as a StoreError."""
    from sqlalchemy.exc import OperationalError, ProgrammingError

    from picker.store.engine import redact

    try:
        return current(engine)
    except (OperationalError, ProgrammingError) as exc:
        text = redact(str(exc.orig)).strip().splitlines()
        raise StoreError(
            f"cannot read the stockroom at {where}: {text[0] if text else type(exc).__name__}"
        ) from None


def current_on(conn: Connection) -> str | None:
    """current() on an open connection (inside its transaction)."""
    from sqlalchemy import inspect, text

    if not inspect(conn).has_table("alembic_version"):
        return None
    row = conn.execute(text("SELECT version_num FROM alembic_version")).first()
    return None if row is None else str(row[0])


def script_head() -> str:
    """The head revision as alembic reads it from the migration scripts."""
    from alembic.config import Config
    from alembic.script import ScriptDirectory

    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS))
    head = ScriptDirectory.from_config(cfg).get_current_head()
    assert head is not None
    return head


def check(engine: Engine, where: str) -> None:
    """Refuse a database whose schema is older or newer than this code."""
    from sqlalchemy.exc import DatabaseError

    try:
        rev = current(engine)
    except DatabaseError as exc:  # also "file is not a database"
        raise StoreError(f"cannot read the stockroom at {where}: {exc.orig}; is it a "
                         "picker stockroom (a SQLite file made by `picker init`)?") from None
    if rev == HEAD:
        return
    if rev is None:
        raise StoreError(
            f"{where} holds no picker stockroom; create one with `picker init` "
            "(add --demo for the demonstration parts)"
        )
    if rev in REVISIONS:
        raise StoreError(
            f"{where} has schema {rev}, this picker needs {HEAD}; "
            "back it up with `picker db backup FILE`, then run `picker db upgrade`"
        )
    raise StoreError(
        f"{where} has schema {rev}, made by a newer picker than this one ({HEAD}); "
        "upgrade picker instead of using this version on it"
    )
