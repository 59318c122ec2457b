"""Restoring a backup (either kind, see picker.store.backup), all or nothing.

The backup goes into an empty database (no tables: the migrations build the
backup's schema, the rows go in, the migrations bring it to the current schema) or
a fresh one (current schema, no rows), in ONE transaction that covers the schema
changes too (picker.store.migrate.all_or_nothing): it lands whole or leaves the
database as it was; a SQLite file that restore itself created is removed again.
A portable file ends with its row counts, so a cut-off file is refused.
PostgreSQL's id sequences are moved past the restored ids.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from picker.errors import BadValue, Conflict
from picker.fields import BY_NAME
from picker.store import migrate
from picker.store.backup import (
    BATCH,
    FORMAT,
    FORMAT_VERSION,
    SKIP,
    SQLITE_MAGIC,
    sqlite_path,
)
from picker.store.engine import is_sqlite, redact, sqlite_connector
from picker.store.records import QTY_MAX, TEXT_MAX, stored_value, utc_time
from picker.store.stock import busy_error

if TYPE_CHECKING:
    from sqlalchemy import Table
    from sqlalchemy.engine import Connection

    from picker.store.repo import Store


@dataclass(frozen=True)
class RestoreReport:
    schema_from: str
    schema_to: str
    rows: dict[str, int]


def restore(store: Store, path: Path) -> RestoreReport:
    """Load a backup into an empty or fresh stockroom, in one transaction."""
    from sqlalchemy.exc import OperationalError, ProgrammingError

    src = path.expanduser()
    target_file = sqlite_path(store.url) if is_sqlite(store.url) else None
    if target_file is not None and target_file.exists() and src.exists() and \
            target_file.resolve() == src.resolve():
        raise BadValue("FILE", str(path), "is the stockroom itself; restore into another one")
    created = target_file is not None and not target_file.exists()
    try:
        with _open_source(src) as source:
            schema, blocks = source
            with migrate.all_or_nothing(store.engine) as conn:
                rows = _load(conn, store.where, str(path), schema, blocks)
    except (OperationalError, ProgrammingError) as exc:
        _forget(store, target_file, created)
        raise busy_error(store.where, exc) from None
    except BaseException:
        _forget(store, target_file, created)
        raise
    return RestoreReport(schema, migrate.HEAD, rows)


def _forget(store: Store, target_file: Path | None, created: bool) -> None:
    """Remove a SQLite file that restore itself created, so a failure leaves nothing."""
    if created and target_file is not None:
        store.engine.dispose()
        for suffix in ("", "-wal", "-shm", "-journal"):
            target_file.with_name(target_file.name + suffix).unlink(missing_ok=True)


Block = tuple[str, list[str], Iterator[tuple[int, list[Any]]]]


class _Source:
    """A backup file opened for reading: its schema and its table blocks."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self._close: list[Any] = []

    def __enter__(self) -> tuple[str, Iterator[Block]]:
        try:
            with self.path.open("rb") as f:
                head = f.read(len(SQLITE_MAGIC))
        except OSError as exc:
            raise BadValue("FILE", str(self.path), f"cannot be read ({exc.strerror})") from None
        try:
            return self._sqlite() if head == SQLITE_MAGIC else self._portable()
        except BaseException:
            self.__exit__()  # `with` does not call __exit__ when __enter__ fails
            raise

    def __exit__(self, *exc: Any) -> None:
        for close in reversed(self._close):
            close()

    def _bad(self, where: str, what: str) -> BadValue:
        return BadValue(str(self.path), where, what)

    def _check_schema(self, schema: object) -> str:
        if schema not in migrate.REVISIONS:
            raise self._bad("schema", f"is {schema!r}, made by a newer picker than this one "
                            f"({migrate.HEAD}); restore it with that version")
        return str(schema)

    def _sqlite(self) -> tuple[str, Iterator[Block]]:
        from sqlalchemy import MetaData, create_engine, select, text
        from sqlalchemy.exc import DatabaseError
        from sqlalchemy.pool import NullPool

        # opened by its path (percent-quoted in a read-only SQLite URI): '#', '?', '%'
        # and spaces in the name mean themselves
        eng = create_engine("sqlite://", creator=sqlite_connector(self.path, read_only=True),
                            poolclass=NullPool)
        self._close.append(eng.dispose)
        conn = eng.connect()
        self._close.append(conn.close)
        try:
            rev = conn.execute(text("SELECT version_num FROM alembic_version")).scalar()
            meta = MetaData()
            meta.reflect(conn)
        except DatabaseError:
            raise self._bad("", "is not a picker stockroom backup (no schema version)") from None
        schema = self._check_schema(rev)
        tables = [t for t in meta.sorted_tables if t.name not in SKIP]

        def blocks() -> Iterator[Block]:
            for t in tables:
                stmt = select(t).order_by(*(t.primary_key.columns or t.columns))
                rows = ((i, list(r)) for i, r in enumerate(conn.execute(stmt), start=1))
                yield t.name, [c.name for c in t.columns], rows

        return schema, blocks()

    def _portable(self) -> tuple[str, Iterator[Block]]:
        f = self.path.open("r", encoding="utf-8")
        self._close.append(f.close)
        try:
            header = json.loads(f.readline())
        except (ValueError, UnicodeDecodeError):
            header = None
        if not isinstance(header, dict) or header.get("format") != FORMAT:
            raise self._bad("line 1", "is not a picker backup (neither SQLite nor picker-backup)")
        if header.get("version") != FORMAT_VERSION:
            raise self._bad("line 1", f"is backup format {header.get('version')!r}; this "
                            f"picker reads format {FORMAT_VERSION}")
        schema = self._check_schema(header.get("schema"))
        tables = header.get("tables")
        if not isinstance(tables, list):
            raise self._bad("line 1", "lists no tables")
        return schema, self._portable_blocks(f, tables)

    def _portable_blocks(self, f: Any, tables: list[Any]) -> Iterator[Block]:
        order = [str(t.get("name")) for t in tables]
        columns = {str(t.get("name")): list(t.get("columns") or []) for t in tables}
        lines = _Lines(f, self)
        seen: dict[str, int] = {}

        def rows(name: str) -> Iterator[tuple[int, list[Any]]]:
            while lines.item is not None and lines.item.get("t") == name:
                r = lines.item.get("r")
                if not isinstance(r, list) or len(r) != len(columns[name]):
                    raise self._bad(f"line {lines.lineno}", f"does not hold a {name} row")
                seen[name] = seen.get(name, 0) + 1
                yield lines.lineno, r
                lines.advance()

        lines.advance()
        for name in order:
            yield name, columns[name], rows(name)
        item, where = lines.item, f"line {lines.lineno}"
        if item is not None and "t" in item:
            raise self._bad(where, f"holds a row of table {item.get('t')!r} out of place; "
                            "nothing was restored")
        if item is None or "end" not in item:
            raise self._bad(where, "ends early: the backup file is cut off; nothing was restored")
        if item["end"] != {n: seen.get(n, 0) for n in order}:
            raise self._bad(where, f"counts {item['end']} rows but the file holds {seen}; "
                            "nothing was restored")


class _Lines:
    """The records of a portable backup, one JSON object a line, read one at a time."""

    def __init__(self, f: Any, source: _Source) -> None:
        self.f = f
        self.source = source
        self.lineno = 1
        self.item: dict[str, Any] | None = None

    def advance(self) -> None:
        self.lineno += 1
        line = self.f.readline()
        if not line:
            self.item = None
            return
        try:
            item = json.loads(line)
        except ValueError:
            raise self.source._bad(f"line {self.lineno}", "is not JSON (a damaged file?)") from None
        if not isinstance(item, dict):
            raise self.source._bad(f"line {self.lineno}", "is not a backup record")
        self.item = item


def _open_source(path: Path) -> _Source:
    return _Source(path)


def _state(conn: Connection, where: str) -> Literal["empty", "fresh"]:
    from sqlalchemy import func, inspect, select
    from sqlalchemy import table as sql_table

    names = set(inspect(conn).get_table_names())
    if not names:
        return "empty"
    rev = migrate.current_on(conn)
    if rev is None:
        raise Conflict(f"{where} holds tables that are not a picker stockroom; restore into "
                       "a new, empty database")
    counts = {n: int(conn.execute(select(func.count()).select_from(sql_table(n))).scalar_one())
              for n in sorted(names - set(SKIP))}
    if any(counts.values()):
        shown = ", ".join(f"{v} {k}" for k, v in counts.items() if v)
        raise Conflict(f"{where} already holds {shown}; restore only into a new, empty "
                       "database (a new file, or a new PostgreSQL database); nothing changed")
    if rev != migrate.HEAD:
        raise Conflict(f"{where} has schema {rev}; restore into a new, empty database")
    return "fresh"


def _load(conn: Connection, where: str, source: str, schema: str,
          blocks: Iterator[Block]) -> dict[str, int]:
    from sqlalchemy import MetaData

    state = _state(conn, where)
    if state == "empty":
        migrate.upgrade_on(conn, schema)
    elif schema != migrate.HEAD:
        raise Conflict(f"{source} has schema {schema} and {where} already has {migrate.HEAD}; "
                       "restore an older backup into a new, empty database")
    meta = MetaData()
    meta.reflect(conn)
    counts: dict[str, int] = {}
    for name, columns, rows in blocks:
        table = meta.tables.get(name)
        if table is None or name in SKIP or not set(columns) <= set(table.c.keys()):
            raise BadValue(source, name, f"is not a table of schema {schema} as this picker "
                           "knows it")
        counts[name] = _insert(conn, table, columns, rows, source)
    if schema != migrate.HEAD:
        migrate.upgrade_on(conn, "head")
    if conn.dialect.name == "postgresql":
        _move_sequences(conn, meta)
    return counts


def _insert(conn: Connection, table: Table, columns: list[str],
            rows: Iterator[tuple[int, list[Any]]], source: str) -> int:
    from sqlalchemy import insert
    from sqlalchemy.exc import SQLAlchemyError

    checks = [_column_check(table, c) for c in columns]
    n = 0
    batch: list[dict[str, Any]] = []
    first = 0

    def flush() -> None:
        try:
            conn.execute(insert(table), batch)
        except SQLAlchemyError as exc:
            text = redact(str(getattr(exc, "orig", exc))).strip().splitlines()
            raise BadValue(source, f"{table.name} rows from {first} on",
                           f"cannot be restored ({text[0] if text else type(exc).__name__}); "
                           "nothing was restored") from None
        batch.clear()

    for lineno, values in rows:
        if not batch:
            first = lineno
        where = f"{source}: {table.name} row at line {lineno}, column "
        batch.append({col: check(v, where + col)
                      for col, check, v in zip(columns, checks, values, strict=True)})
        n += 1
        if len(batch) >= BATCH:
            flush()
    if batch:
        flush()
    return n


Check = Callable[[Any, str], Any]
INT_MAX = 2**31 - 1  # the Integer columns of PostgreSQL (and what picker writes to SQLite)
_MOVEMENT_COUNTS = ("delta", "qty_after")


def _column_check(table: Table, name: str) -> Check:
    """How one column of a backup row is checked before it is restored: a part field
    by the rules of an import (records.stored_value), every other column by its type
    (whole numbers within 32 bits, finite numbers, text within its length, no NUL,
    times within records.YEARS); a quantity in the log within records.QTY_MAX."""
    from sqlalchemy import DateTime, Float, Integer, String

    column = table.c[name]
    if table.name == "parts" and name in BY_NAME:
        return lambda v, where: stored_value(name, v, where)
    nullable = bool(column.nullable)
    kind = column.type
    limit = QTY_MAX if table.name == "movements" and name in _MOVEMENT_COUNTS else INT_MAX

    def check(value: Any, where: str) -> Any:
        if value is None:
            if not nullable:
                raise BadValue(where, value, "is missing; nothing was restored")
            return None
        if isinstance(kind, DateTime):
            return utc_time(value, where)
        if isinstance(kind, Integer):
            if isinstance(value, bool) or not isinstance(value, int) or abs(value) > limit:
                raise BadValue(where, str(value)[:40], f"is not a whole number within "
                               f"±{limit}; nothing was restored")
            return value
        if isinstance(kind, Float):
            if isinstance(value, bool) or not isinstance(value, int | float) or \
                    not math.isfinite(value):
                raise BadValue(where, str(value)[:40], "is not a finite number; nothing "
                               "was restored")
            return float(value)
        if isinstance(kind, String):  # Text too
            size = kind.length or TEXT_MAX
            if not isinstance(value, str) or len(value) > size or "\x00" in value:
                raise BadValue(where, str(value)[:40], f"is not text of at most {size} "
                               "characters; nothing was restored")
            return value
        return value

    return check


def _move_sequences(conn: Connection, meta: Any) -> None:
    """After explicit ids went in, let PostgreSQL hand out ids after the largest one."""
    from sqlalchemy import text

    for t in meta.sorted_tables:
        if "id" in t.c and t.c["id"].primary_key:
            conn.execute(text(
                f"SELECT setval(pg_get_serial_sequence('{t.name}', 'id'), "
                f"COALESCE((SELECT MAX(id) FROM \"{t.name}\"), 0) + 1, false)"
            ))


