"""The repository API: every read and write of op-amp parameter sets goes through here.

Other layers never write SQL. Every multi-row write is one transaction: it either
lands whole or leaves the database exactly as it was.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

from picker.errors import Conflict, NotFound, StoreError
from picker.fields import FIELDS, NUMERIC
from picker.store import migrate
from picker.store.engine import display_url, is_sqlite, make_engine, redact, resolve_url
from picker.store.query import Condition, clause
from picker.store.records import check_consistency

if TYPE_CHECKING:
    import pandas as pd
    from sqlalchemy.engine import Connection, Engine

FIELD_NAMES: tuple[str, ...] = tuple(f.name for f in FIELDS)
CHUNK = 2_000


@dataclass(frozen=True)
class FieldChange:
    """One field of an existing part that an update changes (values in SI, None =
    unknown)."""

    label: str
    field: str
    old: Any
    new: Any


@dataclass(frozen=True)
class ImportReport:
    added: int
    updated: int
    dry_run: bool
    changes: tuple[FieldChange, ...] = ()


def _now() -> datetime:
    return datetime.now(UTC)


class Store:
    """A stockroom database (SQLite file or PostgreSQL server)."""

    def __init__(self, engine: Engine, url: str) -> None:
        self.engine = engine
        self.url = url

    # -- opening ---------------------------------------------------------------
    @classmethod
    def open(cls, db: str | None = None, *, check: bool = True) -> Store:
        """Open an existing stockroom and refuse one of another schema version."""
        url = resolve_url(db)
        engine = make_engine(url, must_exist=check)
        store = cls(engine, url)
        if check:
            try:
                migrate.check(engine, store.where)
            except BaseException:
                engine.dispose()  # close the connection the check opened
                raise
        return store

    @classmethod
    def create(cls, db: str | None = None) -> Store:
        """Create (or upgrade) a stockroom at db."""
        url = resolve_url(db)
        store = cls(make_engine(url), url)
        store.upgrade()
        return store

    @property
    def where(self) -> str:
        if is_sqlite(self.url):
            return self.url.split("///", 1)[-1] or ":memory:"
        return display_url(self.url)

    def upgrade(self, revision: str = "head") -> None:
        from sqlalchemy.exc import DatabaseError

        try:
            migrate.upgrade(self.engine, revision)
        except DatabaseError as exc:  # also "file is not a database"
            raise StoreError(
                f"cannot set up the stockroom at {self.where}: {redact(str(exc.orig))}"
            ) from None

    def dispose(self) -> None:
        self.engine.dispose()

    # -- reads -----------------------------------------------------------------
    def count(self) -> int:
        from sqlalchemy import func, select

        from picker.store.models import parts

        with self.engine.connect() as conn:
            return int(conn.execute(select(func.count()).select_from(parts)).scalar_one())

    def parts_frame(
        self,
        columns: Sequence[str] | None = None,
        conditions: Sequence[Condition | str] = (),
        min_qty: int | None = None,
    ) -> pd.DataFrame:
        """Parts as a DataFrame indexed by label; numeric columns float64, NaN = unknown.

        Only the named columns are read (all fields and updated_at when None); conditions
        (a Condition or its ``--where`` text, see picker.store.query) and a minimum
        quantity are applied in SQL so fewer rows travel.
        """
        import pandas as pd

        names = list(FIELD_NAMES) + ["updated_at"] if columns is None else list(columns)
        labels, cols = self._read(names, conditions, min_qty)
        frame = pd.DataFrame(cols, index=pd.Index(labels, name="label"))
        return frame[[n for n in dict.fromkeys(names) if n != "label"]]

    def parts_columns(
        self,
        columns: Sequence[str],
        conditions: Sequence[Condition | str] = (),
        min_qty: int | None = None,
    ) -> tuple[Any, dict[str, Any]]:
        """Labels and numeric columns as float64 numpy arrays (NaN = unknown), by label.

        The lean read for checking parts (no pandas): picker.checks.Parts
        .from_columns takes the result as it is.
        """
        bad = [c for c in columns if c not in NUMERIC]
        if bad:
            raise ValueError(f"parts_columns reads numeric fields only, not {bad}")
        return self._read(columns, conditions, min_qty)

    def _read(self, names: Sequence[str], conditions: Sequence[Condition | str],
              min_qty: int | None) -> tuple[Any, dict[str, Any]]:
        from picker.store.columns import read_columns
        from picker.store.models import parts

        where = [clause(c) for c in conditions]
        if min_qty is not None:
            where.append(parts.c.qty >= min_qty)
        return read_columns(self.engine, names, where)

    def get(self, label: str) -> dict[str, Any]:
        from sqlalchemy import select

        from picker.store.models import parts

        with self.engine.connect() as conn:
            row = conn.execute(select(parts).where(parts.c.label == label)).mappings().first()
        if row is None:
            raise NotFound(f"part {label!r} is not in the stockroom; `picker parts list` shows them")
        return {k: row[k] for k in (*FIELD_NAMES, "updated_at")}

    def reserved(self, label: str) -> int:
        """Packages of ``label`` held for projects (``picker stock reserve``)."""
        from sqlalchemy import select

        from picker.store.models import parts

        with self.engine.connect() as conn:
            n = conn.execute(select(parts.c.reserved).where(parts.c.label == label)).scalar()
        if n is None:
            raise NotFound(f"part {label!r} is not in the stockroom; `picker parts list` shows them")
        return int(n)

    def labels(self) -> list[str]:
        from sqlalchemy import select

        from picker.store.models import parts

        with self.engine.connect() as conn:
            return [r[0] for r in conn.execute(select(parts.c.label).order_by(parts.c.label))]

    def export_rows(self) -> list[dict[str, Any]]:
        from sqlalchemy import select

        from picker.store.models import parts

        cols = [parts.c[n] for n in (*FIELD_NAMES, "updated_at")]
        with self.engine.connect() as conn:
            return [dict(r) for r in conn.execute(select(*cols).order_by(parts.c.label)).mappings()]

    def checksum(self) -> str:
        """SHA-256 over every row of every table, in key order (to prove writes undone)."""
        from sqlalchemy import MetaData, select

        meta = MetaData()
        h = hashlib.sha256()
        with self.engine.connect() as conn:
            meta.reflect(conn)
            for name in sorted(meta.tables):
                table = meta.tables[name]
                h.update(name.encode())
                order = list(table.primary_key.columns) or list(table.columns)
                for row in conn.execute(select(table).order_by(*order)):
                    h.update(repr(tuple(row)).encode())
        return h.hexdigest()

    # -- writes ----------------------------------------------------------------
    def add(self, values: Mapping[str, Any]) -> None:
        label = values.get("label")
        if label is not None and label in self._existing([str(label)]):
            raise Conflict(f"{label} is already in the stockroom; change it with "
                           f"`picker parts edit {label} FIELD=VALUE` or choose another label")
        self.import_records([values], update=False)

    def _existing(self, labels: Sequence[str]) -> set[str]:
        """Which of ``labels`` the stockroom holds."""
        from sqlalchemy import select

        from picker.store.models import parts

        found: set[str] = set()
        with self.engine.connect() as conn:
            for i in range(0, len(labels), 500):
                chunk = list(labels[i:i + 500])
                found.update(x[0] for x in conn.execute(
                    select(parts.c.label).where(parts.c.label.in_(chunk))))
        return found

    def edit(self, label: str, changes: Mapping[str, Any], by: str = "") -> None:
        """Change fields of one part. A new quantity is logged as a count movement
        (reason ``count``, note ``parts edit``) in the same transaction, so the movement
        log still explains every unit on hand."""
        from sqlalchemy import update
        from sqlalchemy.exc import IntegrityError

        from picker.store.models import parts

        if not changes:
            raise Conflict(f"nothing to change for {label!r}; give field=value pairs")
        now = _now()
        with self._begin() as conn:
            # lock the row and read its quantity in one statement
            row = conn.execute(
                update(parts).where(parts.c.label == label).values(updated_at=now)
                .returning(parts.c.id, parts.c.qty)
            ).first()
            if row is None:
                raise NotFound(f"part {label!r} is not in the stockroom; nothing changed")
            try:
                conn.execute(update(parts).where(parts.c.id == row.id).values(**dict(changes)))
            except IntegrityError as exc:
                raise Conflict(_integrity_message(exc, label)) from None
            new_qty = changes.get("qty")
            if new_qty is not None and int(new_qty) != int(row.qty):
                _log_quantity(conn, row.id, str(changes.get("label", label)),
                              int(new_qty) - int(row.qty), int(new_qty), "count", by,
                              "parts edit", now)

    def remove(self, label: str) -> None:
        from sqlalchemy import delete

        from picker.store.models import parts

        with self._begin() as conn:
            if conn.execute(delete(parts).where(parts.c.label == label)).rowcount == 0:
                raise NotFound(f"part {label!r} is not in the stockroom; nothing removed")

    def import_records(
        self,
        records: Iterable[Mapping[str, Any]],
        *,
        update: bool,
        dry_run: bool = False,
        progress: Callable[[int], None] | None = None,
        by: str = "",
    ) -> ImportReport:
        """Insert (and with update=True change) parts, all or nothing.

        A label that already exists is a Conflict unless update is set. An update
        changes only the fields a record holds: a field missing from the record is
        left as it is, a field given as None becomes unknown (picker.store.csvio
        leaves blank cells out unless blanks are to clear). The report lists every
        field that changes (old -> new); a dry run computes it and writes nothing.
        """
        rows = [dict(r) for r in records]
        now = _now()
        for r in rows:
            if r.get("updated_at") is None:
                r["updated_at"] = now
        try:
            return self._write_records(rows, update, dry_run, progress, by)
        except _DryRun as done:
            return done.report

    def _write_records(
        self,
        rows: list[dict[str, Any]],
        update: bool,
        dry_run: bool,
        progress: Callable[[int], None] | None,
        by: str = "",
    ) -> ImportReport:
        from sqlalchemy import bindparam, insert
        from sqlalchemy import update as sql_update
        from sqlalchemy.exc import IntegrityError

        from picker.store.models import parts

        with self._begin() as conn:
            self._write_lock(conn)
            current = _current_rows(conn, [r["label"] for r in rows])
            if current and not update:
                shown = ", ".join(sorted(current)[:5])
                raise Conflict(
                    f"{len(current)} label(s) already in the stockroom ({shown}); "
                    "use --update to overwrite them or rename them"
                )
            new = [r for r in rows if r["label"] not in current]
            old = [r for r in rows if r["label"] in current]
            changes = _changes(old, current)
            try:
                for i in range(0, len(new), CHUNK):
                    fresh = [_full(r) for r in new[i : i + CHUNK]]
                    conn.execute(insert(parts), fresh)
                    if progress:
                        progress(len(fresh))
                groups: dict[tuple[str, ...], list[dict[str, Any]]] = {}
                for r in old:  # one statement per set of columns given
                    groups.setdefault(tuple(k for k in r if k != "label"), []).append(r)
                for keys, group in groups.items():
                    stmt = (
                        sql_update(parts)
                        .where(parts.c.label == bindparam("b_label"))
                        .values({k: bindparam(f"b_{k}") for k in keys})
                    )
                    for i in range(0, len(group), CHUNK):
                        changed = [
                            {"b_label": r["label"],
                             **{f"b_{k}": _stored(k, r[k]) for k in keys}}
                            for r in group[i : i + CHUNK]
                        ]
                        conn.execute(stmt, changed)
                        if progress:
                            progress(len(changed))
            except IntegrityError as exc:
                raise Conflict(_integrity_message(exc, "")) from None
            for c in changes:
                if c.field == "qty":
                    part_id = current[c.label]["id"]
                    _log_quantity(conn, part_id, c.label, int(c.new) - int(c.old),
                                  int(c.new), "import", by, "parts import --update", _now())
            report = ImportReport(added=len(new), updated=len(old), dry_run=dry_run,
                                  changes=tuple(changes))
            if dry_run:
                raise _DryRun(report)
        return report

    def _write_lock(self, conn: Connection) -> None:
        """On SQLite, take the write lock before the first read (BEGIN IMMEDIATE).

        SQLite has no SELECT ... FOR UPDATE: without this, a take committed between
        reading a quantity and writing the new one would be missing from the logged
        change, and the movement log would no longer explain the stock. PostgreSQL
        locks the rows it reads instead (_current_rows).
        """
        from sqlalchemy.exc import OperationalError

        if conn.dialect.name == "sqlite":
            try:
                conn.exec_driver_sql("BEGIN IMMEDIATE")
            except OperationalError as exc:
                raise _busy(self, exc) from None

    def _begin(self):  # type: ignore[no-untyped-def]
        return _Transaction(self)


def _current_rows(conn: Connection, labels: Sequence[str]) -> dict[str, dict[str, Any]]:
    """label -> every field (and id) of the existing parts among labels, their rows
    locked until the transaction ends (PostgreSQL; SQLite holds its write lock)."""
    from sqlalchemy import select

    from picker.store.models import parts

    cols = [parts.c.id, *(parts.c[n] for n in FIELD_NAMES)]
    out: dict[str, dict[str, Any]] = {}
    for i in range(0, len(labels), 500):
        stmt = (select(*cols).where(parts.c.label.in_(list(labels[i : i + 500])))
                .with_for_update())
        out.update({r["label"]: dict(r) for r in conn.execute(stmt).mappings()})
    return out


def _stored(name: str, value: Any) -> Any:
    return 0 if name == "qty" and value is None else value  # qty is never unknown


def _changes(old: Sequence[Mapping[str, Any]],
             current: Mapping[str, Mapping[str, Any]]) -> list[FieldChange]:
    """Every field an update changes, part by part in file order; refuses an update
    that would leave a part inconsistent (supply minimum above its maximum)."""
    out: list[FieldChange] = []
    for r in old:
        label = r["label"]
        had = current[label]
        check_consistency({**had, **r}, f"{label}: ")
        for name in FIELD_NAMES:
            if name == "label" or name not in r:
                continue
            new = _stored(name, r[name])
            if had[name] != new:
                out.append(FieldChange(label, name, had[name], new))
    return out


def _log_quantity(conn: Connection, part_id: int, label: str, delta: int, qty_after: int,
                  reason: str, by: str, note: str, at: datetime) -> None:
    """A movement row for a quantity set outside the stock commands (edit, import)."""
    from picker.store.stock import _log

    _log(conn, part_id, label, delta, qty_after, None, reason, by or "unknown", note, at)  # type: ignore[arg-type]


class _DryRun(Exception):
    """Raised inside a transaction to roll a dry run back; carries its report."""

    def __init__(self, report: ImportReport) -> None:
        super().__init__("dry run")
        self.report = report


def _full(r: Mapping[str, Any]) -> dict[str, Any]:
    out = {n: r.get(n) for n in FIELD_NAMES}
    out["qty"] = 0 if out["qty"] is None else out["qty"]
    out["updated_at"] = r.get("updated_at") or _now()
    return out


def _integrity_message(exc: Exception, label: str) -> str:
    text = str(getattr(exc, "orig", exc)).lower()
    if "qty" in text or "ck_parts_qty" in text:
        return f"{label or 'a part'}: the quantity on hand cannot go below zero; nothing changed"
    if "ck_parts_reserved" in text:
        return (f"{label or 'a part'}: the quantity on hand cannot go below what projects have "
                "reserved; release or issue them first (`picker stock projects`); nothing changed")
    if "unique" in text or "duplicate" in text:
        return f"{label or 'a label'} is already in the stockroom; choose another label"
    return f"the stockroom refused the change ({redact(str(getattr(exc, 'orig', exc)))})"


class _Transaction:
    """engine.begin() that turns a busy or locked database into a clear StoreError."""

    def __init__(self, store: Store) -> None:
        self.store = store
        self._cm: Any = None

    def __enter__(self) -> Connection:
        from sqlalchemy.exc import OperationalError

        self._cm = self.store.engine.begin()
        try:
            return self._cm.__enter__()  # type: ignore[no-any-return]
        except OperationalError as exc:
            raise _busy(self.store, exc) from None

    def __exit__(self, *exc: Any) -> bool:
        from sqlalchemy.exc import OperationalError

        try:
            return bool(self._cm.__exit__(*exc))
        except OperationalError as err:
            raise _busy(self.store, err) from None


def _busy(store: Store, exc: Exception) -> StoreError:
    text = str(getattr(exc, "orig", exc))
    if "locked" in text or "busy" in text:
        return StoreError(
            f"the stockroom at {store.where} stayed busy for 30 s; try again in a moment"
        )
    return StoreError(f"the stockroom at {store.where} failed: {redact(text)}")
