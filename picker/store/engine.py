"""Where the database is and how to connect to it.

A database is named by ``--db`` (a file path or a SQLAlchemy URL) or by the
``PICKER_DB`` environment variable; otherwise it is ``picker.db`` in the user data
directory (platformdirs). SQLite runs in WAL mode with a busy timeout so a second
user waits instead of failing; PostgreSQL is reached with psycopg 3.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any
from urllib.parse import quote, quote_plus, unquote, unquote_plus

from picker.errors import StoreError

if TYPE_CHECKING:
    from sqlalchemy.engine import Engine

BUSY_TIMEOUT_S = 30.0


def default_url() -> str:
    from platformdirs import user_data_dir

    folder = Path(user_data_dir("picker", appauthor=False))
    return f"sqlite:///{folder / 'picker.db'}"


def resolve_url(db: str | None) -> str:
    """Turn a --db value (path or URL), PICKER_DB or the default into a SQLAlchemy URL.

    A URL's passwords (in the user-info and in the query string) are remembered so that
    ``redact`` hides them in every message; the user-info is re-encoded, so a password
    with an unencoded space, ``&`` or ``@`` is read whole. A libpq key-value string
    (``host=... password=...``) is refused without being shown.
    """
    text = db if db else os.environ.get("PICKER_DB") or ""
    if not text:
        return default_url()
    if "://" in text:
        text = _normalised(text)
        if text.startswith("postgresql://") or text.startswith("postgres://"):
            # psycopg 3 is the driver picker ships with
            text = "postgresql+psycopg://" + text.split("://", 1)[1]
        return text
    if _is_key_value_dsn(text):
        raise StoreError(
            "--db: a key=value connection string is not supported (it is not shown here, as "
            "it may hold a password); write a URL like postgresql://user@host/db and keep "
            "the password in PGPASSWORD or ~/.pgpass")
    return f"sqlite:///{Path(text).expanduser()}"


# libpq connection keywords (PostgreSQL documentation, "Parameter Key Words")
_LIBPQ_KEYS = frozenset({
    "host", "hostaddr", "port", "dbname", "user", "password", "passfile", "sslmode",
    "sslpassword", "service", "connect_timeout", "application_name", "options",
    "target_session_attrs", "sslcert", "sslkey", "sslrootcert", "channel_binding",
})
# query-string keys whose values may be shown; any other value is hidden, as an unencoded
# `&` inside a password (`password=a&b=c`) makes its tail look like another parameter
_SHOWN_KEYS = frozenset({
    "sslmode", "connect_timeout", "application_name", "target_session_attrs", "host",
    "port", "dbname", "user", "client_encoding", "gssencmode", "channel_binding",
})
# every password seen in a --db URL of this process, in each form it may be printed in
_SECRETS: set[str] = set()


def forget_secrets() -> None:
    """Forget the passwords remembered so far (one command line starts afresh, so a
    one-letter password of an earlier run does not blank that letter in later messages)."""
    _SECRETS.clear()


def _is_key_value_dsn(text: str) -> bool:
    for word in text.split():
        key, eq, _ = word.partition("=")
        if eq and key.strip().lower() in _LIBPQ_KEYS:
            return True
    return False


def _remember(secret: str) -> None:
    if not secret:
        return
    plain = unquote_plus(secret)
    for form in (secret, unquote(secret), plain, quote(plain, safe=""), quote_plus(plain)):
        if form:
            _SECRETS.add(form)


def _normalised(url: str) -> str:
    """The URL with its user-info password percent-encoded; its secrets remembered.

    The user-info ends at the last ``@`` before the host (a password may hold an
    unencoded ``@``); the query's secret keys are remembered too.
    """
    scheme, _, rest = url.partition("://")
    before, q, query = rest.partition("?")
    if "@" in before:  # the user-info ends at the last @ before the query
        userinfo, at, hostpart = before.rpartition("@")
        hostpart += q + query
    else:  # no user-info, or a password with an unencoded '?' (u:pa?ss@host)
        head = before.split("/", 1)[0]
        password_like = ":" in head and not head.rpartition(":")[2].isdigit()
        userinfo, at, hostpart = rest.rpartition("@") if password_like else ("", "", rest)
    if at and ":" in userinfo:
        user, _, password = userinfo.partition(":")
        _remember(password)
        rest = f"{user}:{quote(unquote(password), safe='')}@{hostpart}"
    else:
        hostpart = rest
    path, q, query = hostpart.partition("?")
    if q:
        pairs = []
        for pair in query.split("&"):
            key, eq, value = pair.partition("=")
            if eq and unquote_plus(key).strip().lower() not in _SHOWN_KEYS:
                _remember(value)
            # re-encoded, so that an '@' in a value is not taken for the user-info's end
            pairs.append(f"{key}{eq}{quote_plus(unquote_plus(value))}")
        rest = rest[: len(rest) - len(hostpart)] + f"{path}?{'&'.join(pairs)}"
    return f"{scheme}://{rest}"


def display_url(url: str) -> str:
    """A database URL as it may be shown: passwords in the user-info and the query
    replaced by ``***`` (SQLAlchemy's rendering hides only the user-info one)."""
    from sqlalchemy.engine import make_url
    from sqlalchemy.exc import ArgumentError

    try:
        parsed = make_url(url)
        query = {k: (v if k.lower() in _SHOWN_KEYS else "***") for k, v in parsed.query.items()}
        shown = parsed.set(query=query).render_as_string(hide_password=True)
    except (ArgumentError, ValueError):
        shown = url.split("://", 1)[0] + "://***"
    return redact(shown.replace("%2A%2A%2A", "***"))


def redact(text: str) -> str:
    """Hide every password of a --db URL (as parsed by ``resolve_url``) inside a text:
    errors, logs, output. The passwords are found by parsing the URL, not by
    pattern-matching the text, so any form the driver prints is covered."""
    for secret in sorted(_SECRETS, key=len, reverse=True):
        text = text.replace(secret, "***")
    return text


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
            f"--db: cannot use {display_url(url)!r} ({redact(str(exc)).splitlines()[0]}); "
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
