"""Stock movements: take, return, restock, count, the movement log and low stock.

Each movement is ONE transaction that changes the quantity on hand (and the reserved
quantity, picker.store.reservations) and writes its row in the movement log together,
so the log always explains both:
``qty now = qty before + sum of the logged deltas`` and
``reserved now = sum of the logged reserved_deltas``. What can be taken is what is
available, ``qty - reserved``; the database refuses a row where it would be negative.

Concurrency without read-modify-write: a take is the single statement
``UPDATE parts SET qty = qty - :n WHERE label = :l AND qty - reserved >= :n``; the database
applies it atomically against the current row (SQLite holds its write lock,
PostgreSQL re-checks the WHERE clause on the newest row version after waiting for a
row lock), so two people can never take the same last part. Operations that must
know the old quantity (count, the return guard) start with an UPDATE of that row,
which locks it for the rest of the transaction before anything is read. A database
that stays busy past the timeout (SQLite busy timeout, PostgreSQL lock_timeout) is a
StoreError, never a traceback.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta
from typing import TYPE_CHECKING, Any, Literal

from picker.errors import BadValue, Conflict, NotFound, PickerError, StoreError
from picker.store import engine as _engine
from picker.store.engine import is_sqlite, redact

if TYPE_CHECKING:
    from sqlalchemy.engine import Connection

    from picker.store.repo import Store

Reason = Literal["take", "return", "restock", "count", "import", "reserve", "release", "issue"]

QTY_MAX = 1_000_000_000
NAME_MAX = 100
PROJECT_MAX = 200
NOTE_MAX = 10_000


@dataclass(frozen=True)
class Movement:
    """One row of the movement log; ``at`` is timezone-aware UTC.

    ``delta``/``qty_after``: packages on hand; ``reserved_delta``/``reserved_after``:
    packages reserved for projects. ``reorder_level`` is the part's reorder level when
    a take, reserve or issue was made (None in rows read from the log).
    """

    id: int
    at: datetime
    by: str
    part: str
    delta: int
    qty_after: int
    project: str | None
    reason: Reason
    note: str | None
    reserved_delta: int = 0
    reserved_after: int = 0
    reorder_level: int | None = None

    @property
    def available_after(self) -> int:
        """Packages on hand and not reserved after the movement."""
        return self.qty_after - self.reserved_after

    @property
    def reorder_due(self) -> bool:
        """The available packages are at or under the part's reorder level."""
        return self.reorder_level is not None and self.available_after <= self.reorder_level

    def as_dict(self) -> dict[str, Any]:
        return {
            "id": self.id, "at": self.at, "by": self.by, "part": self.part,
            "delta": self.delta, "qty_after": self.qty_after, "project": self.project,
            "reason": self.reason, "note": self.note,
            "reserved_delta": self.reserved_delta, "reserved_after": self.reserved_after,
        }


# -- input checks ----------------------------------------------------------------
def _qty(value: int, where: str, *, zero_ok: bool = False) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise BadValue(where, value, "is not a whole number of packages")
    if value < 0 or (value == 0 and not zero_ok):
        expected = ">= 0" if zero_ok else ">= 1"
        raise BadValue(where, value, f"is not a number of packages {expected}")
    if value > QTY_MAX:
        raise BadValue(where, value, "is more than a stockroom can hold")
    return value


def _name(value: str | None, where: str, limit: int, *, required: bool) -> str | None:
    text = (value or "").strip()
    if not text:
        if required:
            raise BadValue(where, value or "", "is empty; give a name")
        return None
    if len(text) > limit:
        raise BadValue(where, text[:20] + "...", f"is longer than {limit} characters")
    if "\x00" in text:
        raise BadValue(where, text[:20], "contains a NUL character")
    return text


def _checked(qty: int, by: str, note: str | None, *,
             zero_ok: bool = False) -> tuple[int, str | None, str | None]:
    """The quantity, who and note of a movement, each checked (BadValue names the option)."""
    return (_qty(qty, "QTY", zero_ok=zero_ok), _name(by, "--by", NAME_MAX, required=True),
            _name(note, "--note", NOTE_MAX, required=False))


_AGO = re.compile(r"^(\d{1,6})\s*(h|d|w)$", re.IGNORECASE)
_AGO_UNIT = {"h": timedelta(hours=1), "d": timedelta(days=1), "w": timedelta(weeks=1)}


def parse_since(text: str, now: datetime | None = None) -> datetime:
    """A --since value: an ISO date or date-time (local time unless it carries an
    offset), or a time back from ``now``: ``12h``, ``7d``, ``2w`` (hours, days, weeks)."""
    raw = text.strip()
    ago = _AGO.match(raw)
    if ago is not None:
        try:
            return (now or datetime.now(UTC)) - int(ago.group(1)) * _AGO_UNIT[ago.group(2).lower()]
        except OverflowError:  # further back than the calendar goes: everything
            return datetime.min.replace(tzinfo=UTC)
    try:
        when = datetime.fromisoformat(raw)
    except ValueError:
        raise BadValue(
            "--since", text, "is not a date; write 2026-01-31, 2026-01-31T14:00 or 7d "
            "(also 12h, 2w)"
        ) from None
    try:
        if when.tzinfo is None:
            when = when.astimezone()  # the user's local time zone
        return when.astimezone(UTC)
    except (OverflowError, ValueError):  # the first or last day of the calendar
        return (datetime.min if when.year < 2 else datetime.max).replace(tzinfo=UTC)


def packages_needed(channels_needed: int, channels_per_package: int | None) -> int:
    """Packages to take for a number of op-amp channels: ceil(needed / per package)."""
    per = channels_per_package if channels_per_package and channels_per_package > 0 else 1
    return max(1, math.ceil(channels_needed / per))


# -- transactions ----------------------------------------------------------------
@contextmanager
def _transaction(store: Store) -> Iterator[Connection]:
    """One transaction; busy or unreachable databases become a clear StoreError."""
    from sqlalchemy import text
    from sqlalchemy.exc import OperationalError

    try:
        with store.engine.begin() as conn:
            if not is_sqlite(store.url):
                ms = int(_engine.BUSY_TIMEOUT_S * 1000)
                conn.execute(text(f"SET LOCAL lock_timeout = {ms}"))
            yield conn
    except OperationalError as exc:
        raise busy_error(store.where, exc) from None


def busy_error(where: str, exc: Exception) -> StoreError:
    """The StoreError for a database error: busy after the timeout, or unreachable."""
    text = redact(str(getattr(exc, "orig", exc)))
    low = text.lower()
    if "locked" in low or "busy" in low or "lock timeout" in low:
        return StoreError(
            f"the stockroom at {where} stayed busy for {_engine.BUSY_TIMEOUT_S:g} s "
            "(someone else is writing); nothing changed, try again in a moment"
        )
    first = text.strip().splitlines()[0] if text.strip() else type(exc).__name__
    return StoreError(f"the stockroom at {where} failed: {first}")


def _now() -> datetime:
    return datetime.now(UTC)


def _log(
    conn: Connection, part_id: int, label: str, delta: int, qty_after: int,
    project: str | None, reason: Reason, by: str, note: str | None, at: datetime,
    *, reserved_delta: int = 0, reserved_after: int | None = None,
    reorder_level: int | None = None,
) -> Movement:
    """The log row of a movement; called while the part's row is locked, with the time
    taken after the lock was granted (so times follow the order of the movements).
    Without reserved_after the part's reserved quantity is read (it is locked)."""
    from sqlalchemy import insert, select

    from picker.store.models import movements, parts

    if reserved_after is None:
        reserved_after = int(conn.execute(
            select(parts.c.reserved).where(parts.c.id == part_id)).scalar_one())
    new_id = conn.execute(
        insert(movements).values(
            at=at, by_user=by, part_id=part_id, part_label=label, delta=delta,
            qty_after=qty_after, project=project, reason=reason, note=note,
            reserved_delta=reserved_delta, reserved_after=reserved_after,
        ).returning(movements.c.id)
    ).scalar_one()
    return Movement(int(new_id), at, by, label, delta, qty_after, project, reason, note,
                    reserved_delta, reserved_after, reorder_level)


def _missing(label: str) -> NotFound:
    return NotFound(f"part {label!r} is not in the stockroom; `picker parts list` shows them")


def _too_few(conn: Connection, label: str, n: int, project: str | None, verb: str) -> Conflict:
    """Why a guarded take or reserve changed nothing (NotFound if the part is not there)."""
    from sqlalchemy import select

    from picker.store.models import parts

    row = conn.execute(
        select(parts.c.qty, parts.c.reserved).where(parts.c.label == label)).first()
    if row is None:
        raise _missing(label)
    free = int(row.qty) - int(row.reserved)
    held = f" ({row.qty} on hand, {row.reserved} reserved for projects)" if row.reserved else ""
    return Conflict(f"only {free} of {label} left{held}, {n} {verb} for {project}; "
                    "nothing changed")


# -- movements -------------------------------------------------------------------
def take(store: Store, label: str, qty: int, project: str, by: str,
         note: str | None = None) -> Movement:
    """Take qty packages out for a project; Conflict (nothing changed) if fewer are
    available (on hand and not reserved)."""
    from sqlalchemy import update

    from picker.store.models import parts

    n, who, text = _checked(qty, by, note)
    proj = _name(project, "--for", PROJECT_MAX, required=True)
    at = _now()
    with _transaction(store) as conn:
        # only what no project has reserved can be taken: qty - reserved >= n
        row = conn.execute(
            update(parts)
            .where(parts.c.label == label, parts.c.qty - parts.c.reserved >= n)
            .values(qty=parts.c.qty - n, updated_at=at)
            .returning(parts.c.id, parts.c.qty, parts.c.reserved, parts.c.reorder_level)
        ).first()
        if row is None:
            raise _too_few(conn, label, n, proj, "asked")
        return _log(conn, row.id, label, -n, row.qty, proj, "take", who or "", text, _now(),
                    reserved_after=int(row.reserved), reorder_level=row.reorder_level)


def return_(store: Store, label: str, qty: int, project: str, by: str,
            note: str | None = None) -> Movement:
    """Put qty packages back from a project; no more than the project has out."""
    from sqlalchemy import func, select, update

    from picker.store.models import OUT_REASONS, movements, parts

    n, who, text = _checked(qty, by, note)
    proj = _name(project, "--for", PROJECT_MAX, required=True)
    at = _now()
    with _transaction(store) as conn:
        # the UPDATE comes first: it locks the part's row before the log is read
        row = conn.execute(
            update(parts)
            .where(parts.c.label == label, parts.c.qty <= QTY_MAX - n)
            .values(qty=parts.c.qty + n, updated_at=at)
            .returning(parts.c.id, parts.c.qty, parts.c.reserved)
        ).first()
        if row is None:
            raise _missing_or_full(conn, label, n)
        # out = taken + issued - returned, for this project
        out = -int(conn.execute(
            select(func.coalesce(func.sum(movements.c.delta), 0)).where(
                movements.c.part_id == row.id,
                movements.c.project == proj,
                movements.c.reason.in_(OUT_REASONS),
            )
        ).scalar_one())
        if n > out:
            raise Conflict(
                f"{proj} has only {max(out, 0)} of {label} out, so {n} cannot come back; "
                "nothing changed (check --for, or book new stock with `picker stock add`)"
            )
        return _log(conn, row.id, label, n, row.qty, proj, "return", who or "", text, _now(),
                    reserved_after=int(row.reserved))


def _missing_or_full(conn: Any, label: str, n: int) -> PickerError:
    """Why an adding UPDATE matched no row: no such part, or QTY_MAX would be passed
    (the most an import accepts, so every export imports back)."""
    from sqlalchemy import select

    from picker.store.models import parts

    have = conn.execute(select(parts.c.qty).where(parts.c.label == label)).scalar()
    if have is None:
        return _missing(label)
    return Conflict(f"{label} has {have} on hand; {n} more would pass {QTY_MAX:,}, the most "
                    "a stockroom holds; nothing changed")


def restock(store: Store, label: str, qty: int, by: str, note: str | None = None) -> Movement:
    """Add qty new packages (a delivery)."""
    from sqlalchemy import update

    from picker.store.models import parts

    n, who, text = _checked(qty, by, note)
    at = _now()
    with _transaction(store) as conn:
        row = conn.execute(
            update(parts)
            .where(parts.c.label == label, parts.c.qty <= QTY_MAX - n)
            .values(qty=parts.c.qty + n, updated_at=at)
            .returning(parts.c.id, parts.c.qty, parts.c.reserved)
        ).first()
        if row is None:
            raise _missing_or_full(conn, label, n)
        return _log(conn, row.id, label, n, row.qty, None, "restock", who or "", text, _now(),
                    reserved_after=int(row.reserved))


def count(store: Store, label: str, qty: int, by: str, note: str | None = None) -> Movement:
    """Set the quantity after a physical count; the log keeps the difference.

    A count below what projects have reserved is refused (release those first)."""
    from sqlalchemy import update

    from picker.store.models import parts

    n, who, text = _checked(qty, by, note, zero_ok=True)
    at = _now()
    with _transaction(store) as conn:
        # lock the row and read its quantity in one statement (no other writer between)
        row = conn.execute(
            update(parts)
            .where(parts.c.label == label)
            .values(updated_at=at)
            .returning(parts.c.id, parts.c.qty, parts.c.reserved)
        ).first()
        if row is None:
            raise _missing(label)
        if n < row.reserved:
            raise Conflict(
                f"{row.reserved} of {label} are reserved for projects, so a count of {n} "
                "cannot stand; release or issue reservations first (`picker stock projects` "
                "lists them); nothing changed"
            )
        conn.execute(update(parts).where(parts.c.id == row.id).values(qty=n))
        return _log(conn, row.id, label, n - int(row.qty), n, None, "count", who or "", text,
                    _now(), reserved_after=int(row.reserved))


# -- reads -----------------------------------------------------------------------
def _utc(value: datetime) -> datetime:
    # SQLite keeps no offset; picker always writes UTC
    return value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)


def log(store: Store, label: str | None = None, since: datetime | date | None = None,
        ) -> list[Movement]:
    """The movement log in the order the movements happened (id order; ids are given
    while the part's row is locked), for one part also after it was removed."""
    from sqlalchemy import and_, func, or_, select
    from sqlalchemy.exc import OperationalError

    from picker.store.models import movements, parts

    m = movements
    stmt = (
        select(m.c.id, m.c.at, m.c.by_user, func.coalesce(parts.c.label, m.c.part_label),
               m.c.delta, m.c.qty_after, m.c.project, m.c.reason, m.c.note,
               m.c.reserved_delta, m.c.reserved_after)
        .select_from(m.outerjoin(parts, parts.c.id == m.c.part_id))
        .order_by(m.c.id)
    )
    if since is not None:
        if not isinstance(since, datetime):
            since = parse_since(since.isoformat())
        stmt = stmt.where(m.c.at >= since.astimezone(UTC))
    try:
        with store.engine.connect() as conn:
            part_id = None
            if label is not None:
                part_id = conn.execute(select(parts.c.id).where(parts.c.label == label)).scalar()
                unlinked = and_(m.c.part_id.is_(None), m.c.part_label == label)
                stmt = stmt.where(unlinked if part_id is None
                                  else or_(m.c.part_id == part_id, unlinked))
            rows = conn.execute(stmt).all()
            if label is not None and part_id is None and not rows:
                raise NotFound(
                    f"part {label!r} is not in the stockroom and has no movements; "
                    "`picker stock log` shows every part"
                )
    except OperationalError as exc:
        raise busy_error(store.where, exc) from None
    return [Movement(int(r[0]), _utc(r[1]), r[2], r[3], int(r[4]), int(r[5]), r[6], r[7], r[8],
                     int(r[9]), int(r[10])) for r in rows]


def low(store: Store, below: int | None = None) -> list[dict[str, Any]]:
    """Parts whose available packages (on hand - reserved) are at or under their reorder
    level (or, with below, every part with fewer than below available)."""
    from sqlalchemy import and_, select
    from sqlalchemy.exc import OperationalError

    from picker.store.models import parts

    p = parts.c
    available = (p.qty - p.reserved).label("available")
    if below is not None:
        cond = p.qty - p.reserved < _qty(below, "--below", zero_ok=True)
    else:
        cond = and_(p.reorder_level.is_not(None), p.qty - p.reserved <= p.reorder_level)
    stmt = (select(p.label, p.qty, p.reserved, available, p.reorder_level, p.location,
                   p.description)
            .where(cond).order_by(available, p.label))
    try:
        with store.engine.connect() as conn:
            return [dict(r) for r in conn.execute(stmt).mappings()]
    except OperationalError as exc:
        raise busy_error(store.where, exc) from None

