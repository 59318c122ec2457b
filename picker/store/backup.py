"""Backups of the stockroom (restoring them: picker.store.restore).

Two kinds of backup file:

- SQLite backup: a self-contained SQLite database file (journal mode DELETE) made
  with SQLite's online backup API in a single step, which copies one consistent
  snapshot even while other people keep writing (in WAL mode readers never block
  writers). Only for SQLite stockrooms.
- portable backup, picker's own JSON-lines format (UTF-8, one JSON value a line)::

    {"format": "picker-backup", "version": 1, "schema": "0002", "made_at": "...",
     "source": "...", "tables": [{"name": "parts", "columns": ["id", ...]}, ...]}
    {"t": "parts", "r": [1, "bip-gp-a", ...]}        one line per row, values in
    ...                                               column order
    {"end": {"parts": 30, "movements": 812}}          row counts: a cut file fails

  Times are ISO 8601 in UTC, numbers in their shortest exact form. Any stockroom
  (SQLite or PostgreSQL) can write it and any can read it back. For PostgreSQL it is
  read in one REPEATABLE READ transaction, so it is one consistent snapshot too.
  The alembic_version table is not copied: restore runs the migrations instead.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from picker.errors import StoreError
from picker.store import migrate
from picker.store.engine import is_sqlite, redact, sqlite_connector
from picker.store.outfile import database_files, fresh_temp, replacing
from picker.store.stock import busy_error

if TYPE_CHECKING:
    from sqlalchemy.engine import Engine

    from picker.store.repo import Store

Kind = Literal["sqlite", "portable"]

FORMAT = "picker-backup"
FORMAT_VERSION = 1
SQLITE_MAGIC = b"SQLite format 3\x00"
BATCH = 1_000
SKIP = ("alembic_version",)  # the migrations write it


@dataclass(frozen=True)
class BackupReport:
    path: Path
    kind: Kind
    schema: str
    rows: dict[str, int]


def sqlite_path(url: str) -> Path | None:
    """The file of a SQLite URL, None for an in-memory database."""
    path = url.split("///", 1)[1] if "///" in url else ""
    return None if path in ("", ":memory:") else Path(path)


def schema_of(store: Store) -> str:
    """The stockroom's schema revision; refuses no stockroom or a newer one."""
    rev = migrate.revision(store.engine, store.where)
    if rev is None:
        raise StoreError(f"{store.where} holds no picker stockroom; nothing to back up")
    if rev not in migrate.REVISIONS:
        raise StoreError(
            f"{store.where} has schema {rev}, made by a newer picker than this one "
            f"({migrate.HEAD}); back it up with that version"
        )
    return rev


# -- backup ------------------------------------------------------------------------
def backup(store: Store, path: Path, *, portable: bool = False) -> BackupReport:
    """Write a backup of the whole stockroom to path (replaced atomically).

    The backup goes to a new temporary file and replaces path only when complete;
    a path that is the stockroom's own file (or its -wal, -shm or -journal file) is
    refused (picker.store.outfile), so a backup can never overwrite the stockroom.
    """
    from sqlalchemy import create_engine

    schema = schema_of(store)
    protected = database_files(store.url)
    target = path.expanduser()
    with replacing(path, protected) as tmp:
        if is_sqlite(store.url):
            _sqlite_snapshot(store, tmp)
            if portable:
                snap = fresh_temp(target.parent, protected)
                try:
                    tmp.replace(snap)
                    snap_engine = create_engine(
                        "sqlite://", creator=sqlite_connector(snap, read_only=True))
                    try:
                        rows = _write_portable(snap_engine, schema, store.where, tmp)
                    finally:
                        snap_engine.dispose()
                finally:
                    snap.unlink(missing_ok=True)
            else:
                rows = _sqlite_counts(tmp)
        else:
            rows = _write_portable(store.engine, schema, store.where, tmp)
    kind: Kind = "portable" if portable or not is_sqlite(store.url) else "sqlite"
    return BackupReport(target, kind, schema, rows)


def _sqlite_snapshot(store: Store, dest: Path) -> None:
    """SQLite's online backup API, all pages in one step (one consistent snapshot)."""
    import sqlite3

    src_file = sqlite_path(store.url)
    raw = None
    src: Any = None
    try:
        if src_file is None:  # in-memory: the store's own (only) connection
            raw = store.engine.raw_connection()
            src = raw.driver_connection
        else:
            src = sqlite_connector(src_file)()
        dst = sqlite_connector(dest)()
        try:
            src.backup(dst)  # pages=-1: the whole database in one step
            dst.execute("PRAGMA journal_mode = DELETE")  # one self-contained file
            ok = dst.execute("PRAGMA quick_check").fetchone()[0]
        finally:
            dst.close()
            if raw is None:
                src.close()
    except sqlite3.OperationalError as exc:
        raise busy_error(store.where, exc) from None
    finally:
        if raw is not None:
            raw.close()
    if ok != "ok":
        raise StoreError(f"the backup of {store.where} failed its integrity check: {ok}")


def _sqlite_counts(path: Path) -> dict[str, int]:
    con = sqlite_connector(path)()
    try:
        names = [r[0] for r in con.execute(
            "SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
        return {n: int(con.execute(f'SELECT count(*) FROM "{n}"').fetchone()[0])
                for n in names if n not in SKIP and not n.startswith("sqlite_")}
    finally:
        con.close()


def _jsonable(value: Any) -> Any:
    if value is None or isinstance(value, bool | int | str):
        return value
    if isinstance(value, float):
        if not math.isfinite(value):
            raise StoreError(f"cannot back up the non-finite number {value!r}")
        return value
    if isinstance(value, datetime):
        return utc(value).isoformat()
    raise StoreError(f"cannot back up a value of type {type(value).__name__}")


def utc(value: datetime) -> datetime:
    # SQLite keeps no offset; picker always writes UTC
    return value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)


def _write_portable(engine: Engine, schema: str, where: str, dest: Path) -> dict[str, int]:
    from sqlalchemy import MetaData, select
    from sqlalchemy.exc import OperationalError

    counts: dict[str, int] = {}
    try:
        with engine.connect() as conn:
            if conn.dialect.name == "postgresql":
                conn = conn.execution_options(isolation_level="REPEATABLE READ")
            with conn.begin():
                meta = MetaData()
                meta.reflect(conn)
                tables = [t for t in meta.sorted_tables if t.name not in SKIP]
                with dest.open("w", encoding="utf-8", newline="\n") as out:
                    out.write(json.dumps({
                        "format": FORMAT, "version": FORMAT_VERSION, "schema": schema,
                        "made_at": datetime.now(UTC).isoformat(), "source": redact(where),
                        "tables": [{"name": t.name, "columns": [c.name for c in t.columns]}
                                   for t in tables],
                    }, ensure_ascii=False) + "\n")
                    for t in tables:
                        n = 0
                        stmt = select(t).order_by(*(t.primary_key.columns or t.columns))
                        for row in conn.execution_options(yield_per=BATCH).execute(stmt):
                            out.write(json.dumps(
                                {"t": t.name, "r": [_jsonable(v) for v in row]},
                                ensure_ascii=False, allow_nan=False) + "\n")
                            n += 1
                        counts[t.name] = n
                    out.write(json.dumps({"end": counts}) + "\n")
    except OperationalError as exc:
        raise busy_error(where, exc) from None
    return counts
