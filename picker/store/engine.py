"""Where the database is and how to connect to it.

A database is named by ``--db`` (a file path or a SQLAlchemy URL) or by the
``PICKER_DB`` environment variable; otherwise it is ``picker.db`` in the user data
directory (platformdirs). SQLite runs in WAL mode with a busy timeout so a second
user waits instead of failing; PostgreSQL is reached with psycopg 3.
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from picker.errors import StoreError

if TYPE_CHECKING:
    from sqlalchemy.engine import Engine

BUSY_TIMEOUT_S = 30.0


def default_url() -> str:
    from platformdirs import user_data_dir

    folder = Path(user_data_dir("picker", appauthor=False))
    return f"sqlite:///{folder / 'picker.db'}"


def resolve_url(db: str | None) -> str:
    """Turn a --db value (path or URL), PICKER_DB or the default into a SQLAlchemy URL."""
    text = db if db else os.environ.get("PICKER_DB") or ""
    if not text:
        return default_url()
    if "://" in text:
        if text.startswith("postgresql://") or text.startswith("postgres://"):
            # psycopg 3 is the driver picker ships with
            text = "postgresql+psycopg://" + text.split("://", 1)[1]
        return text
    return f"sqlite:///{Path(text).expanduser()}"


_PASSWORD = re.compile(r"(://[^:/@\s]*:)([^@\s]*)(@)")


def redact(text: str) -> str:
    """Hide any password of a database URL inside a text (errors, logs, output)."""
    return _PASSWORD.sub(r"\1***\3", text)


def is_sqlite(url: str) -> bool:
    return url.startswith("sqlite")


def sqlite_connector(path: Path, *, read_only: bool = False) -> Callable[[], Any]:
    """A function that opens the SQLite file at path by its name (no URI parsing).

    With read_only the file is opened through a SQLite URI whose path is
    percent-quoted, so no character of the name can start a query or a fragment.
    """
    import sqlite3
    from urllib.parse import quote

    name = os.path.abspath(path)

    def connect() -> Any:
        if read_only:
            uri = "file:" + quote(name, safe="/") + "?mode=ro"
            return sqlite3.connect(uri, uri=True, timeout=BUSY_TIMEOUT_S,
                                   check_same_thread=False)
        return sqlite3.connect(name, timeout=BUSY_TIMEOUT_S, check_same_thread=False)

    return connect


def make_engine(url: str, *, must_exist: bool = False) -> Engine:
    """Create an engine with picker's connection settings; nothing is opened yet."""
    from sqlalchemy import create_engine, event
    from sqlalchemy.exc import ArgumentError, NoSuchModuleError
    from sqlalchemy.pool import QueuePool

    kwargs: dict[str, Any] = {}
    engine_url = url
    if is_sqlite(url):
        path = url.split("///", 1)[1] if "///" in url else ""
        if path and path != ":memory:":
            p = Path(path)
            # the file is opened by its path, never through a URL, so '?', '#', '%' and
            # spaces in a file name mean themselves (a URL would cut or decode them)
            kwargs["creator"] = sqlite_connector(p)
            kwargs["poolclass"] = QueuePool
            engine_url = "sqlite://"
            if must_exist and not p.exists():
                raise StoreError(
                    f"no stockroom at {p}; create one with `picker init` (or `picker init --demo`)"
                )
            try:
                p.parent.mkdir(parents=True, exist_ok=True)
            except OSError as exc:
                raise StoreError(f"cannot create folder {p.parent}: {exc.strerror}") from None
        kwargs["connect_args"] = {"timeout": BUSY_TIMEOUT_S}
        if path in ("", ":memory:"):
            from sqlalchemy.pool import StaticPool

            kwargs["poolclass"] = StaticPool
            kwargs["connect_args"]["check_same_thread"] = False
    try:
        engine = create_engine(engine_url, **kwargs)
    except (ArgumentError, NoSuchModuleError, ValueError) as exc:
        raise StoreError(
            f"--db: cannot use {redact(url)!r} ({redact(str(exc)).splitlines()[0]}); "
            "give a file path or a URL like postgresql+psycopg://user@host/db"
        ) from None
    except ImportError:
        if url.startswith("postgresql"):
            raise StoreError(
                "--db: PostgreSQL needs psycopg; install it with `pip install 'picker[postgres]'`"
            ) from None
        scheme = url.split("://", 1)[0]
        raise StoreError(
            f"--db: no database driver for {scheme!r}; picker works with SQLite files and "
            "postgresql+psycopg:// URLs"
        ) from None

    if is_sqlite(url):

        @event.listens_for(engine, "connect")
        def _sqlite_pragmas(dbapi_conn: Any, _record: Any) -> None:
            cur = dbapi_conn.cursor()
            cur.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
            if "memory" not in url and url.rstrip("/") != "sqlite:":
                cur.execute("PRAGMA journal_mode = WAL")
                cur.execute("PRAGMA synchronous = NORMAL")
            cur.execute("PRAGMA foreign_keys = ON")
            cur.close()

    return engine
